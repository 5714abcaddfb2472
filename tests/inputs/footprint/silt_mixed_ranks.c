/*
 * Velin silt samples: one array read with two subscripts and with one (a
 * macro that flattens the index, an undeclared array). Its footprint cannot
 * be given; the other arrays of the nest are still counted.
 */
#define ROW(P, i) P[i]

void silt_mixed(int N, double *B)
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++) {
            S[i][j] = 2.0 * B[j];
            ROW(S, i) = B[i];
        }
}

void silt_pointer(int N, double *S, double *B)
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < N; j++)
            B[j] += S[i] * S[i][j];
}
