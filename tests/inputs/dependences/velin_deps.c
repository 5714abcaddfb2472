/* Dependence structure of textbook kernels, set in the Velin harbour models. */

/* crane load products: C = C + A*B; k carries a reduction on C[i][j] */
void crane_product(int n, double A[n][n], double B[n][n], double C[n][n])
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++)
            for (int k = 0; k < n; k++)
                C[i][j] += A[i][k] * B[k][j];
}

/* quay stiffness elimination (LU without pivoting): k sequential, i and j parallel */
void quay_lu(int n, double A[n][n])
{
    for (int k = 0; k < n; k++)
        for (int i = k + 1; i < n; i++) {
            A[i][k] = A[i][k] / A[k][k];
            for (int j = k + 1; j < n; j++)
                A[i][j] -= A[i][k] * A[k][j];
        }
}

/* basin relaxation in place (Gauss-Seidel): no loop parallel without skewing */
void basin_gauss_seidel(int T, int n, double u[n][n])
{
    for (int t = 0; t < T; t++)
        for (int i = 1; i < n - 1; i++)
            for (int j = 1; j < n - 1; j++)
                u[i][j] = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1]);
}

/* basin relaxation into a second grid (Jacobi): i and j parallel */
void basin_jacobi(int n, double u[n][n], double v[n][n])
{
    for (int i = 1; i < n - 1; i++)
        for (int j = 1; j < n - 1; j++)
            v[i][j] = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1]);
}

/* tide forward substitution: i sequential (x[i] reads every earlier x[j]) */
void tide_forward(int n, double L[n][n], double b[n], double x[n])
{
    for (int i = 0; i < n; i++) {
        x[i] = b[i];
        for (int j = 0; j < i; j++)
            x[i] -= L[i][j] * x[j];
        x[i] = x[i] / L[i][i];
    }
}

/* sediment running sum along each column: j parallel, i sequential (distance 1) */
void sediment_prefix(int n, int m, double s[n][m])
{
    for (int i = 1; i < n; i++)
        for (int j = 0; j < m; j++)
            s[i][j] = s[i][j] + s[i - 1][j];
}

/* wave reversal sweep counting down: i carries an anti dependence */
void wave_down(int n, double w[n])
{
    for (int i = n - 2; i >= 0; i--)
        w[i] = w[i] + w[i + 1];
}

/* gauge totals with a scalar accumulator declared per row: j a reduction, i parallel */
void gauge_rows(int n, int m, double g[n][m], double tot[n])
{
    for (int i = 0; i < n; i++) {
        double acc = 0;
        for (int j = 0; j < m; j++)
            acc += g[i][j];
        tot[i] = acc;
    }
}

/* the same with one accumulator for the whole nest: i and j both carry it */
void gauge_all(int n, int m, double g[n][m], double *total)
{
    double acc = 0;
    for (int i = 0; i < n; i++)
        for (int j = 0; j < m; j++)
            acc += g[i][j];
    total[0] = acc;
}
