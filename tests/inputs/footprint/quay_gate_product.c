/* Velin quay cranes: load plan product, three loops deep. */
void quay_plan(int N, int M, int K, double X[N][M], const double A[N][K], const double B[K][M])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < M; j++) {
            double acc = 0.0;
            for (int k = 0; k < K; k++)
                acc += A[i][k] * B[k][j];
            X[i][j] = acc;
        }
}
