/* Velin quay grid: wave height relaxation over the N x M cells of the quay
 * apron, rows and columns collapsed into one iteration space. */
void quay_relax(int N, int M, double h[N][M], const double *g)
{
#pragma omp parallel for collapse(2) schedule(static)
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {
            h[i][j] = 0.5 * h[i][j];
            h[i][j] += g[j];
        }
}

/* Chunks of five cells, round-robin. */
void quay_relax_chunked(int N, int M, double h[N][M], const double *g)
{
#pragma omp parallel for collapse(2) schedule(static, 5)
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++)
            h[i][j] = h[i][j] + g[j];
}

/* Cells below the diagonal of the quay's square basin only: a non-rectangular
 * collapse (OpenMP 5.0 allows it, without a schedule clause in gcc 12; the
 * iterations are numbered in loop order). */
void basin_lower(int N, double h[N][N])
{
#pragma omp parallel for collapse(2)
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            h[i][j] = 2.0 * h[i][j];
}
