/* Velin wave-buoy sampling: five loops, strides 61/59/53, modulo guards (a hard nest for formulas). */
void f(int N, int M, int P, long long *c) {
    for (int i = 0; i < N; i += 61)
        for (int j = i; j < M + i; j += 59)
            for (int k = 0; k < P - j; k += 53)
                for (int l = 0; l < N; l++)
                    for (int m = l; m < l + 3; m++)
                        if ((i + j + k) % 7 == 3 && (l + 2 * m) % 5 != 1)
                            c[0] += 1;
}
