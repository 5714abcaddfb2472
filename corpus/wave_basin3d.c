/*
 * Velin wave model -- heat and salinity mixing in the deep basin.
 *
 * Below the outer breakwater the basin is deep enough that the harbour
 * office tracks temperature layers in 3-D: a 7-point diffusion stencil on a
 * (depth, north, east) grid, stepped in time with two buffers.
 */

#define KAPPA 0.125  /* diffusion number, stable below 1/6 */

/* T time steps of the 7-point stencil, ping-ponging between a and b. */
void wave_basin_mix(int T, int D, int N, int M,
                    double a[restrict D][N][M], double b[restrict D][N][M])
{
    for (int t = 0; t < T; t++) {
#pragma omp parallel for collapse(2) schedule(static, 4)
        for (int z = 1; z < D - 1; z++)
            for (int y = 1; y < N - 1; y++)
                for (int x = 1; x < M - 1; x++)
                    b[z][y][x] = a[z][y][x] + KAPPA * (a[z - 1][y][x] + a[z + 1][y][x]
                                                       + a[z][y - 1][x] + a[z][y + 1][x]
                                                       + a[z][y][x - 1] + a[z][y][x + 1]
                                                       - 6.0 * a[z][y][x]);
#pragma omp parallel for collapse(2) schedule(static, 4)
        for (int z = 1; z < D - 1; z++)
            for (int y = 1; y < N - 1; y++)
                for (int x = 1; x < M - 1; x++)
                    a[z][y][x] = b[z][y][x];
    }
}

/* Mean temperature of each layer, for the morning bulletin. */
void wave_layer_means(int D, int N, int M, const double a[restrict D][N][M], double *mean)
{
    const double cells = (double)N * (double)M;

    for (int z = 0; z < D; z++) {
        double s = 0.0;
        for (int y = 0; y < N; y++)
            for (int x = 0; x < M; x++)
                s += a[z][y][x];
        mean[z] = cells > 0.0 ? s / cells : 0.0;
    }
}

/* Sponge layers along the open side: the damping depth shrinks with the
 * layer (ternary bound), so deep layers are damped over fewer columns. */
void wave_sponge(int D, int N, int M, int width, double a[restrict D][N][M])
{
    for (int z = 0; z < D; z++)
        for (int y = 0; y < N; y++)
            for (int x = 0; x < (width > z ? width - z : 1); x++)
                a[z][y][x] *= 0.5;
}
