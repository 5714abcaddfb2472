/* Velin basin: T sweeps of an interior update that runs only from D = 3 and M = 3 on. */
void basin_interior(int T, int D, int M, double a[restrict D][M], double b[restrict D][M])
{
    for (int t = 0; t < T; t++)
        for (int z = 1; z < D - 1; z++)
            for (int x = 1; x < M - 1; x++)
                b[z][x] = a[z - 1][x] + a[z + 1][x];
}
