/*
 * Velin berth ledgers: arrays handed in with an extent left open. Only the
 * first extent of a C array parameter may be omitted; `double A[N][]` is not
 * valid C, but the fuzzer feeds it and the footprint must not depend on the
 * missing extent.
 */
void berth_rows(int N, double A[N][])
{
    for (int i = 0; i < N; i++)
        A[i][0] = 1.0;
}

void berth_cols(int N, double A[][N])
{
    for (int i = 0; i < N; i++)
        A[i][0] = 1.0;
}

void berth_list(int N, double A[])
{
    for (int i = 0; i < N; i++)
        A[i] = 1.0;
}

void berth_fixed(int N, double A[][16])
{
    for (int i = 0; i < N; i++)
        for (int j = 0; j < 16; j++)
            A[i][j] = 2.0;
}
