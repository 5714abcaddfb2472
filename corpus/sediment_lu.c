/*
 * Velin harbour sediment solver -- direct factorisation of the bed system.
 *
 * The dredging office of Velin models the silt bed of the inner harbour as a
 * diffusion problem on a coarse mesh of survey cells. The resulting system is
 * small, dense and strongly diagonally dominant (the bed never moves much in a
 * night), so it is factored in place without pivoting and solved by forward
 * and backward substitution.
 */

#define BED_DIFFUSIVITY 0.018  /* m^2 per tide cycle, from the 1998 survey */

/* In-place LU without pivoting: afterwards L (unit lower) and U share A. */
void sediment_lu_factor(int N, double A[restrict N][N])
{
    int i, j, k;

    for (k = 0; k < N; k++) {
        for (i = k + 1; i < N; i++)
            A[i][k] = A[i][k] / A[k][k];
        for (i = k + 1; i < N; i++)
            for (j = k + 1; j < N; j++)
                A[i][j] -= A[i][k] * A[k][j];
    }
}

/* Solve L y = b with the unit lower factor left by sediment_lu_factor. */
void sediment_forward_solve(int N, const double L[restrict N][N], const double *b, double *y)
{
    for (int i = 0; i < N; i++) {
        double s = b[i];
        for (int j = 0; j < i; j++)
            s -= L[i][j] * y[j];
        y[i] = s;
    }
}

/* Solve U x = y, last survey cell first. */
void sediment_back_solve(int N, const double U[restrict N][N], const double *y, double *x)
{
    int i, j;

    for (i = N - 1; i >= 0; i--) {
        double s = y[i];
        for (j = i + 1; j < N; j++)
            s -= U[i][j] * x[j];
        x[i] = s / U[i][i];
    }
}

/* Assemble the bed matrix: diffusion between neighbouring cells plus the
 * settling term on the diagonal. */
void sediment_assemble(int N, double dt, double A[restrict N][N], const double *settle)
{
    const double r = BED_DIFFUSIVITY * dt;

    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            A[i][j] = 0.0;
    for (int i = 0; i < N; i++) {
        A[i][i] = 1.0 + 2.0 * r + settle[i];
        if (i > 0)
            A[i][i - 1] = -r;
        if (i < N - 1)
            A[i][i + 1] = -r;
    }
}
