/* Velin harbour: parallel loops whose threads get unequal shares of work. */

/* Sediment samples compared pairwise along the quay: a triangle of work. */
void quay_pairs(int n, double d[n][n], const double depth[n])
{
#pragma omp parallel for schedule(static)
    for (int i = 0; i < n; i++)
        for (int j = 0; j < i; j++)
            d[i][j] = depth[i] - depth[j];
}

/* The same triangle dealt out in chunks of two berths. */
void quay_pairs_chunked(int n, double d[n][n], const double depth[n])
{
#pragma omp parallel for schedule(static, 2)
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++)
            d[i][j] += depth[i] * depth[j];
}

/* Tide gauges by berth and hour, both loops shared out, one time step after another. */
void quay_gauges(int steps, int b, int h, float g[b][h], const float tide[h])
{
    for (int s = 0; s < steps; s++) {
#pragma omp parallel for collapse(2)
        for (int i = 0; i < b; i++)
            for (int k = 0; k < h; k++)
                g[i][k] = 0.5f * g[i][k] + tide[k];
    }
}
