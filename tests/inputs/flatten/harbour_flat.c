/* Velin harbour: depth grids stored row by row in one block. */
#define IDX(i, j) ((i) * n + (j))

void harbour_flat_smooth(int m, int n, double *depth, double *out)
{
    for (int i = 0; i < m; i++)
        for (int j = 0; j < n; j++)
            out[IDX(i, j)] = depth[i * n + j] * 0.5;
}

void harbour_flat_upper(int g, double *w)
{
    for (int p = 0; p < g; p++)
        for (int q = p + 1; q < g; q++)
            w[p * g + q] = w[q * g + p];
}

void harbour_flat_shift(int m, int n, double *a)
{
    for (int i = 0; i < m; i++)
        for (int j = 0; j < n; j++)
            a[i * n + j] = a[i * n + j + 1];
}
