/* Velin harbour-imaging and wave kernels whose working sets are checked
   against the bytes gcc actually touches (tests/test_footprint_exact.py). */

/* 3x3 smoothing of a harbour camera frame */
void harbour_blur(int H, int W, double img[H][W], double out[H][W], double k[3][3])
{
    for (int i = 1; i < H - 1; i++)
        for (int j = 1; j < W - 1; j++)
            for (int di = 0; di < 3; di++)
                for (int dj = 0; dj < 3; dj++)
                    out[i][j] += k[di][dj] * img[i + di - 1][j + dj - 1];
}

/* quay crane load products, blocked by 32 */
void quay_blocked(int n, double A[n][n], double B[n][n], double C[n][n])
{
    for (int ii = 0; ii < n; ii += 32)
        for (int jj = 0; jj < n; jj += 32)
            for (int kk = 0; kk < n; kk += 32)
                for (int i = ii; i < (ii + 32 < n ? ii + 32 : n); i++)
                    for (int j = jj; j < (jj + 32 < n ? jj + 32 : n); j++)
                        for (int k = kk; k < (kk + 32 < n ? kk + 32 : n); k++)
                            C[i][j] += A[i][k] * B[k][j];
}

/* tide gauge matrix times weights; rows of m doubles */
void tide_rows(int n, int m, double A[n][m], double x[m], double y[n])
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < m; j++)
            y[i] += A[i][j] * x[j];
}

/* wave height, time-stepped five-point relaxation */
void wave_steps(int T, int nx, int ny, double u[nx][ny], double v[nx][ny])
{
    for (int t = 0; t < T; t++) {
        for (int i = 1; i < nx - 1; i++)
            for (int j = 1; j < ny - 1; j++)
                v[i][j] = 0.25 * (u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1]);
        for (int i = 1; i < nx - 1; i++)
            for (int j = 1; j < ny - 1; j++)
                u[i][j] = v[i][j];
    }
}

/* the harbour blur on flattened buffers, as C code usually indexes a matrix */
void harbour_blur_flat(int H, int W, const double *img, double *out, const double *k)
{
    for (int i = 1; i < H - 1; i++)
        for (int j = 1; j < W - 1; j++)
            for (int di = 0; di < 3; di++)
                for (int dj = 0; dj < 3; dj++)
                    out[i * W + j] += k[3 * di + dj] * img[(i + di - 1) * W + (j + dj - 1)];
}

/* products of every pair of tide records (lower triangle), records stored row by row */
void tide_pairs(int n, int m, const double *x, double *g)
{
    for (int i = 0; i < n; ++i)
        for (int j = 0; j <= i; ++j) {
            double acc = 0;
            for (int k = 0; k < m; ++k)
                acc += x[i * m + k] * x[j * m + k];
            g[i * n + j] = acc;
        }
}

/* elimination on the quay stiffness matrix, rows shortening as k grows */
void quay_elimination(int n, double A[n][n])
{
    for (int k = 0; k < n; k++)
        for (int i = k + 1; i < n; i++) {
            A[i][k] /= A[k][k];
            for (int j = k + 1; j < n; j++)
                A[i][j] -= A[i][k] * A[k][j];
        }
}
