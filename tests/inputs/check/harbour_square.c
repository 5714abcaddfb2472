/* Velin harbour imaging: background subtraction of one sonar frame. */
void harbour_background(int N, int M, double F[restrict N][M], const double B[restrict N][M])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++)
            F[i][j] -= B[i][j];
}
