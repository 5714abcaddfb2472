/* Velin harbour grid: kernels whose memory accesses the trace tests record. */

/* depth products of the survey grid: a packed VLA matrix multiply */
void survey_product(int n, int m, int p, double A[n][p], double B[p][m], double C[n][m])
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < m; j++)
            for (int k = 0; k < p; k++)
                C[i][j] += A[i][k] * B[k][j];
}

/* the same product on flattened storage, as most C and C++ code indexes it */
void survey_product_flat(int n, double *A, double *B, double *C)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++)
            for (int k = 0; k < n; k++)
                C[i * n + j] += A[i * n + k] * B[k * n + j];
}

/* running sum of soundings: a recurrence carried by i */
void sounding_prefix(int n, float *s)
{
    for (int i = 1; i < n; i++)
        s[i] = s[i - 1] + s[i];
}
