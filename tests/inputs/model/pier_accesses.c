/* Velin pier loads: which arrays each statement reads and writes, with
 * element types from parameters, locals and globals. */

#include <stddef.h>
#include <stdint.h>

long double pier_ledger[64];

void pier_loads(int N, int M, int K, double A[restrict N][M], const double B[N][K],
                const double C[K][M], const float *w, int64_t *tally, size_t *slot)
{
    #pragma omp parallel for schedule(static, 2) collapse(2)
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++)
            for (int k = 0; k < K; k++)
                A[i][j] += B[i][k] * C[k][j];
    for (int i = 0; i < N; i++) {
        double s = w[i];
        tally[i]++;
        slot[i] = tally[2 * i + 1] + slot[tally[i]];
        pier_ledger[i % 64] = s;
    }
}
