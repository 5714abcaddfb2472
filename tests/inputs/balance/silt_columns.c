/* Velin silt model: elimination sweep over the bed matrix. The column loop k
 * is sequential; each step's rows are split between the threads, and the
 * team meets at a barrier after every step. */
void silt_sweep(int N, double A[N][N])
{
    for (int k = 0; k < N; k++) {
#pragma omp parallel for schedule(static)
        for (int i = k + 1; i < N; i++)
            for (int j = k + 1; j < N; j++)
                A[i][j] -= A[i][k] * A[k][j];
    }
}

/* Every step has the same rows: the time loop of the silt transport. */
void silt_transport(int T, int N, double *c, const double *u)
{
    for (int s = 0; s < T; s++) {
#pragma omp parallel for schedule(static, 4)
        for (int i = 0; i < N; i++)
            for (int j = 0; j <= i; j++)
                c[i] += u[j];
    }
}
