/*
 * Velin tide gauges: statements the model cannot follow next to ones it can.
 * gauge_flagged: the store to B sits under a data-dependent test, so it is
 * not counted; the j loop beside it is exact. gauge_scatter: one subscript is
 * a product of loop variables, one reads an index table.
 */
void gauge_flagged(int N, double *A, double *B, double C[N][N])
{
    for (int i = 0; i < N; i++) {
        if (A[i] > 0.0)
            B[i] = 1.0;
        for (int j = 0; j < N; j++)
            C[i][j] = 1.0;
    }
}

void gauge_scatter(int N, double *A, const int *idx, double C[N][N])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++) {
            C[i][j] = A[i * j];
            A[idx[i]] += C[i][j];
        }
}
