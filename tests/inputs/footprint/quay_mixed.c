/*
 * Velin quay sensors: statements that mix integer and floating work, for the
 * flop-counting rules (integer index arithmetic and counters are not flops).
 */
#include <math.h>

void quay_mixed(int N, int stride, double w[N], float v[N], int hist[N], double out[N])
{
    for (int i = 1; i < N - 1; i++) {
        double r = 0.5 * (w[i - 1] + w[i + 1]);       /* 1 mul, 1 add */
        hist[i] = hist[i] + 2 * i;                     /* integer: no flops */
        out[i] = fabs(r) + sqrt(v[i]) / 3.0;           /* fabs, sqrt, 1 div, 1 add */
        out[i] += fma(w[i], r, 1.0);                   /* fma = mul + add, then += */
        v[i] = (float)(i * 3 + 1);                     /* integer arithmetic, a cast */
    }
}
