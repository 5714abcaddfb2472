/* Velin sediment grid with constant bounds of 10^30: no count of its points can finish. */
void f(double *a, double *b) {
    for (long long i = 0; i < 1000000000000000000000000000000; i++)
        for (long long j = 0; j < 1000000000000000000000000000000; j++)
            a[i * 3 + j] += b[j] + b[j + 1];
}
