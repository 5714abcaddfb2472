/* Velin tide gauges: the record is scanned backwards (newest first) and in
 * strides of three readings; both splits follow the iteration order. */
void gauge_backwards(int N, double *r, const double *h)
{
#pragma omp parallel for schedule(static)
    for (int i = N - 1; i >= 0; i--)
        for (int k = 0; k < i; k++)
            r[i] += h[k];
}

void gauge_strided(int N, double *r, const double *h)
{
#pragma omp parallel for schedule(static, 2)
    for (int i = 1; i < N; i += 3)
        for (int k = 0; k <= i; k++)
            r[i] += h[k];
}

/* The gauge hut's small machine: three threads whatever the environment says. */
void gauge_three(int N, double *r, const double *h)
{
#pragma omp parallel for num_threads(3)
    for (int i = 0; i < N; i++)
        for (int k = i; k < N; k++)
            r[i] += h[k];
}
