/* Velin harbour imaging: cross-correlation of sonar frames, all pairs of rows. */
void harbour_correlate(int N, double C[restrict N][N], const double F[restrict N][N])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            for (int k = 0; k < N; k++)
                C[i][j] += F[i][k] * F[j][k];
}
