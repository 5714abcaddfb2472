/* Three harbour kernels of different cost for the ranking: a quay-load
   matrix product (2*N^3 flops), a tide gauge update (2*N flops) and a
   sediment grid sweep (N*N flops). */
void quay_loads(int N, double A[N][N], double B[N][N], double C[N][N]) {
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            for (int k = 0; k < N; k++)
                C[i][j] += A[i][k] * B[k][j];
}

void tide_gauge(int N, double a, double *x, double *y) {
    for (int i = 0; i < N; i++)
        y[i] = a * x[i] + y[i];
}

void sediment_sweep(int N, double G[N][N]) {
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            G[i][j] = G[i][j] * 0.5;
}
