/*
 * Velin wave model -- relaxation of the harbour surface elevation.
 *
 * The wave office solves a Poisson-like problem for the set-up of the water
 * surface inside the breakwater on a regular grid of 5 m cells. Interior
 * cells are relaxed with a 5-point stencil; the quay walls reflect, the
 * harbour mouth absorbs. Red-black ordering lets each half-sweep run in place.
 */
#include <math.h>

#define MOUTH_DAMPING 0.35  /* absorbing sponge at the harbour mouth */

/* One Jacobi sweep of the 5-point stencil over the interior cells. */
void wave_jacobi_step(int N, int M, double out[restrict N][M], const double in[restrict N][M])
{
#pragma omp parallel for
    for (int i = 1; i < N - 1; i++)
        for (int j = 1; j < M - 1; j++)
            out[i][j] = 0.2 * (in[i][j] + in[i - 1][j] + in[i + 1][j] + in[i][j - 1] + in[i][j + 1]);
}

/* Red-black Gauss-Seidel: the red cells ((i + j) even) first, then the black ones. */
void wave_redblack_sweep(int N, double h2, double u[restrict N][N], const double f[restrict N][N])
{
    int i, j;

    for (i = 1; i < N - 1; i++)
        for (j = 1; j < N - 1; j++)
            if ((i + j) % 2 == 0)
                u[i][j] = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1] - h2 * f[i][j]);
    for (i = 1; i < N - 1; i++)
        for (j = 1; j < N - 1; j++)
            if ((i + j) % 2 == 1)
                u[i][j] = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1] - h2 * f[i][j]);
}

/* Colour census for the log: red and black cells of the whole grid in one pass. */
long wave_colour_census(int N, int M, const double u[restrict N][M], double *energy)
{
    long red = 0;
    double e = 0.0;

    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {
            if ((i + j) % 2 == 0)
                red++;
            else
                e += u[i][j] * u[i][j];
        }
    energy[0] = e;
    return red;
}

/* Boundary cells: quay walls (rows 0 and N-1, column 0) reflect, the
 * harbour mouth (column M-1) is damped; interior cells are left alone. */
void wave_boundary(int N, int M, double eta[restrict N][M])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {
            if (i == 0)
                eta[i][j] = eta[i + 1][j];
            else if (i == N - 1)
                eta[i][j] = eta[i - 1][j];
            else if (j == 0)
                eta[i][j] = eta[i][j + 1];
            else if (j == M - 1)
                eta[i][j] *= MOUTH_DAMPING;
        }
}

/* Relax until the residual drops below tol, at most maxit sweeps. The sweep
 * count depends on the data, so the solver's log reports it afterwards. */
int wave_relax(int N, int maxit, double tol, double u[restrict N][N], const double f[restrict N][N])
{
    int it;

    for (it = 0; it < maxit; it++) {
        double res = 0.0;
        for (int i = 1; i < N - 1; i++)
            for (int j = 1; j < N - 1; j++) {
                double r = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1] - f[i][j]) - u[i][j];
                u[i][j] += r;
                res += fabs(r);
            }
        if (res < tol)
            break;
    }
    return it;
}
