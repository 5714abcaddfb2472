/*
 * Velin harbour office: dense kernels of the berth-planning model, written
 * as plain loop nests. Used by the flop and footprint tests.
 */
#include <math.h>

/* Mooring loads: gain matrix times berth responses, G = G + R * W. */
void berth_gain(int M, int N, int K, double G[M][N], const double R[M][K], const double W[K][N])
{
    for (int i = 0; i < M; i++)
        for (int j = 0; j < N; j++)
            for (int k = 0; k < K; k++)
                G[i][j] += R[i][k] * W[k][j];
}

/* Silt transport: LU factorisation without pivoting, in place. */
void silt_lu(int N, double A[N][N])
{
    for (int k = 0; k < N; k++)
        for (int i = k + 1; i < N; i++) {
            A[i][k] /= A[k][k];
            for (int j = k + 1; j < N; j++)
                A[i][j] -= A[i][k] * A[k][j];
        }
}

/* Keel clearance covariance: right-looking Cholesky, lower triangle. */
void keel_cholesky(int N, double A[N][N])
{
    for (int k = 0; k < N; k++) {
        A[k][k] = sqrt(A[k][k]);
        for (int i = k + 1; i < N; i++)
            A[i][k] /= A[k][k];
        for (int j = k + 1; j < N; j++)
            for (int i = j; i < N; i++)
                A[i][j] -= A[i][k] * A[j][k];
    }
}

/* Tide levels from the lower-triangular gauge coupling: forward substitution. */
void tide_forward(int N, const double L[N][N], double b[N])
{
    for (int i = 0; i < N; i++) {
        for (int j = 0; j < i; j++)
            b[i] -= L[i][j] * b[j];
        b[i] /= L[i][i];
    }
}

/* Hull sensor cross-products, lower triangle only: C = C + A * A^T. */
void hull_syrk(int N, int K, double C[N][N], const double A[N][K])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            for (int k = 0; k < K; k++)
                C[i][j] += A[i][k] * A[j][k];
}

/* Buoy drift: y = y + A x. */
void buoy_gaxpy(int M, int N, double y[M], const double A[M][N], const double x[N])
{
    for (int i = 0; i < M; i++)
        for (int j = 0; j < N; j++)
            y[i] += A[i][j] * x[j];
}
