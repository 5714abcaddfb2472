/* One Jacobi sweep of the Velin basin's surface height: each interior cell
 * becomes the sum of its four neighbours. */
void basin_sweep(int n, double u[n][n], double v[n][n])
{
    for (int i = 1; i < n - 1; i++)
        for (int j = 1; j < n - 1; j++)
            v[i][j] = u[i - 1][j] + u[i + 1][j] + u[i][j - 1] + u[i][j + 1];
}
