/* Velin harbour: pairwise spacing of the mooring buoys (lower triangle).
 * Row i has i + 1 pairs, so equal blocks of rows give unequal work. */
void buoy_spacing(int N, double D[N][N], const double *x)
{
#pragma omp parallel for schedule(static)
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            D[i][j] = x[i] - x[j];
}

/* The same rows dealt three at a time. */
void buoy_spacing_chunked(int N, double D[N][N], const double *x)
{
#pragma omp parallel for schedule(static, 3)
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= i; j++)
            D[i][j] = x[i] - x[j];
}

/* No schedule clause, and schedule(auto): the runtime's default split. */
void buoy_spacing_default(int N, double D[N][N], const double *x)
{
#pragma omp parallel for
    for (int i = 0; i < N; i++)
        for (int j = i; j < N; j++)
            D[i][j] = x[j] - x[i];
}

void buoy_spacing_auto(int N, double D[N][N], const double *x)
{
#pragma omp parallel for schedule(auto)
    for (int i = 0; i < N; i++)
        for (int j = i; j < N; j++)
            D[i][j] = x[j] - x[i];
}
