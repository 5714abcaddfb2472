/* Velin tide gauges: resampling the gauge record with strides, upward and
 * downward. Every loop here is exact. */

void tide_resample(int n, int lo, double *gauge, double *out)
{
    for (int t = lo; t < n; t += 3)
        out[t] = gauge[t];
    for (int t = n; t >= lo; t -= 4)
        out[t] += 1.0;
    for (int t = lo + 2; t <= 2 * n - 1; t = 5 + t)
        for (int k = t; k > lo - t; k = k - 2)
            out[k] = gauge[t];
}

void tide_reverse_sweep(int n, int m, double *level)
{
    int i, j;

    for (i = n - 1; i >= 0; --i)
        for (j = i; j < m; ++j)
            level[j] -= level[i];
    for (i = 3 * n; i > -n; i--)
        for (j = m; j >= i; j -= 3)
            level[j] = 0.0;
}
