/*
 * Velin tidal observatory -- nightly refit of the harmonic gain model.
 *
 * The tide model of the port of Velin predicts the water level at every quay
 * from a handful of harmonic constituents. Each night the gains that map the
 * constituents onto the gauges are refitted by least squares from the day's
 * readings. These are the dense kernels of that refit: the gain product, the
 * normal-equation update and the scaling of the design matrix.
 */
#include <math.h>

#define VELIN_GAUGES 48        /* tide gauges around the basin */
#define VELIN_REFERENCE_M 3.2  /* chart datum offset of the old lighthouse gauge */

/* Gain product G = A * B: gauges x constituents times constituents x quays. */
void tide_gain_product(int N, int M, int K,
                       double G[restrict N][M],
                       const double A[restrict N][K],
                       const double B[restrict K][M])
{
    /* every (gauge, quay) pair is independent: hand the whole plane to the team */
#pragma omp parallel for collapse(2)
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {
            double acc = 0.0;
            for (int k = 0; k < K; k++)
                acc += A[i][k] * B[k][j];
            G[i][j] = acc;
        }
}

/* Normal equations C := beta*C + alpha*A*A^T, lower triangle only (rank-K update). */
void tide_normal_update(int N, int K, double alpha, double beta,
                        double C[restrict N][N], const double A[restrict N][K])
{
    for (int i = 0; i < N; i++) {
        for (int j = 0; j <= i; j++)
            C[i][j] *= beta;
        for (int k = 0; k < K; k++)
            for (int j = 0; j <= i; j++)
                C[i][j] += alpha * A[i][k] * A[j][k];
    }
}

/* Weight the design matrix by gauge reliability and remove the datum offset;
 * returns the mean weight, which the refit log reports. */
double tide_weight_design(int N, int K, double A[restrict N][K], const double *sigma)
{
    const double datum = VELIN_REFERENCE_M;
    double total = 0.0;

    for (int i = 0; i < N; i++) {
        double w = 1.0 / (1.0 + fabs(sigma[i]));
        for (int k = 0; k < K; k++)
            A[i][k] = w * (A[i][k] - datum);
        total += w;
    }
    return total / VELIN_GAUGES;
}
