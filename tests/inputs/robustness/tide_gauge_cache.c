/* Velin tide gauges: two nests whose cache entries the tests damage. */
void tide_smooth(int N, int M, double *level, double *out) {
    for (int g = 0; g < N; g++)
        for (int t = 1; t < M - 1; t++)
            out[g * M + t] = (level[g * M + t - 1] + level[g * M + t] + level[g * M + t + 1]) / 3;
}

void tide_pairs(int N, double *level, double *dist) {
    for (int a = 0; a < N; a++)
        for (int b = a + 1; b < N; b++)
            dist[a * N + b] = level[a] - level[b];
}
