/* Velin basin: a time-stepped 2-D smoothing of the sediment layer, on rows
 * that are not a multiple of a cache line (m doubles, m odd). */
void basin_smooth(int steps, int n, int m, double s[n][m], double t[n][m])
{
    for (int k = 0; k < steps; k++) {
        for (int i = 1; i < n - 1; i++)
            for (int j = 1; j < m - 1; j++)
                t[i][j] = 0.2 * (s[i][j] + s[i - 1][j] + s[i + 1][j] + s[i][j - 1] + s[i][j + 1]);
        for (int i = 1; i < n - 1; i++)
            for (int j = 1; j < m - 1; j++)
                s[i][j] = t[i][j];
    }
}

/* Moorings indexed through a flat buffer: one row of 13 floats per quay. */
void basin_moorings(int q, float *load, const float *tension)
{
    for (int i = 0; i < q; i++)
        for (int j = 0; j < 13; j++)
            load[13 * i + j] += tension[j] * 0.5f;
}
