/*
 * Velin harbour sediment solver -- covariance of the bed survey.
 *
 * Between dredging campaigns the office keeps a covariance of the bed height
 * over the survey cells, built from the sonar passes of the harbour launch.
 * It is factored by Cholesky to draw plausible beds for the shoaling risk map.
 */
#include <math.h>

/* Lower triangle of S = X X^T over the sonar passes. Rows are handed out in
 * equal blocks, so the thread that owns the last rows does most of the work. */
void sediment_covariance(long N, long M, double S[restrict N][N], const double X[restrict N][M])
{
#pragma omp parallel for schedule(static)
    for (long i = 0; i < N; i++)
        for (long j = 0; j <= i; j++) {
            double acc = 0.0;
            for (long k = 0; k < M; k++)
                acc += X[i][k] * X[j][k];
            S[i][j] = acc;
        }
}

/* Cholesky S = L L^T in place (lower triangle), column by column. */
void sediment_cholesky(int N, double A[restrict N][N])
{
    for (int j = 0; j < N; j++) {
        for (int k = 0; k < j; k++)
            A[j][j] -= A[j][k] * A[j][k];
        A[j][j] = sqrt(A[j][j]);
        for (int i = j + 1; i < N; i++) {
            for (int k = 0; k < j; k++)
                A[i][j] -= A[i][k] * A[j][k];
            A[i][j] /= A[j][j];
        }
    }
}

/* Before factoring: the first cell whose running pivot is not positive, or -1.
 * The survey software stops at the first bad cell and asks for a new pass. */
int sediment_first_bad_pivot(int N, const double A[restrict N][N])
{
    for (int i = 0; i < N; i++) {
        double d = A[i][i];
        for (int k = 0; k < i; k++)
            d -= A[i][k] * A[i][k];
        if (d <= 0.0)
            return i;
    }
    return -1;
}

/* Draw one bed: z = L w for a vector w of unit normal deviates. */
void sediment_draw_bed(int N, const double L[restrict N][N], const double *w, double *z)
{
    for (int i = 0; i < N; i++) {
        z[i] = 0.0;
        for (int j = 0; j <= i; j++)
            z[i] += L[i][j] * w[j];
    }
}
