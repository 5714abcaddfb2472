/* Hand-tiled copies of three corpus kernels (corpus/tide_gain.c, corpus/wave_shallow.c,
 * corpus/harbour_silt.c): the band the tiling advice names, cut into TI x TJ tiles whose
 * origins start at the loops' lower bounds, the tile sizes passed in. The statements are
 * the corpus ones, so the tile loops ii, jj come first in every statement's iteration. */

#define MIN(a, b) ((a) < (b) ? (a) : (b))

void tide_gain_product_tiled(int N, int M, int K, int TI, int TJ, double G[restrict N][M],
                             const double A[restrict N][K], const double B[restrict K][M])
{
    for (int ii = 0; ii < N; ii += TI)
        for (int jj = 0; jj < M; jj += TJ)
            for (int i = ii; i < MIN(ii + TI, N); i++)
                for (int j = jj; j < MIN(jj + TJ, M); j++) {
                    double acc = 0.0;
                    for (int k = 0; k < K; k++)
                        acc += A[i][k] * B[k][j];
                    G[i][j] = acc;
                }
}

void wave_jacobi_step_tiled(int N, int M, int TI, int TJ, double out[restrict N][M], const double in[restrict N][M])
{
    for (int ii = 1; ii < N - 1; ii += TI)
        for (int jj = 1; jj < M - 1; jj += TJ)
            for (int i = ii; i < MIN(ii + TI, N - 1); i++)
                for (int j = jj; j < MIN(jj + TJ, M - 1); j++)
                    out[i][j] = 0.2 * (in[i][j] + in[i - 1][j] + in[i + 1][j] + in[i][j - 1] + in[i][j + 1]);
}

void harbour_silt_drift_tiled(int C, int L, int TI, int TJ, double silt[restrict C][L], const double ebb[restrict C][L])
{
    for (int ii = 0; ii < C; ii += TI)
        for (int jj = 1; jj < L; jj += TJ)
            for (int c = ii; c < MIN(ii + TI, C); c++)
                for (int j = jj; j < MIN(jj + TJ, L); j++)
                    silt[c][j] = silt[c][j] + ebb[c][j] * silt[c][j - 1];
}
