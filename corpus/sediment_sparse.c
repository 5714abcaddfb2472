/*
 * Velin harbour sediment solver -- the fine mesh.
 *
 * Near the quay walls the office refines the bed mesh; the fine system is
 * sparse and stored by rows (CSR). The coarse correction uses a banded
 * matrix, since cells only talk to neighbours along the channel.
 */

#define MIN(a,b) ((a)<(b)?(a):(b))
#define MAX(a,b) ((a)>(b)?(a):(b))

/* y = A x for the fine mesh in CSR form: how many entries a row has is only
 * known from the row pointers. */
void sediment_csr_apply(int N, const int *rowptr, const int *col, const double *val,
                        const double *x, double *y)
{
    for (int i = 0; i < N; i++) {
        double s = 0.0;
        for (int k = rowptr[i]; k < rowptr[i + 1]; k++)
            s += val[k] * x[col[k]];
        y[i] = s;
    }
}

/* y = A x for the coarse correction, A banded with half-bandwidth B and stored
 * full (the office never bothered with band storage at this size). */
void sediment_band_apply(int N, int B, const double A[restrict N][N], const double *x, double *y)
{
    for (int i = 0; i < N; i++) {
        y[i] = 0.0;
        for (int j = MAX(0, i - B); j <= MIN(N - 1, i + B); j++)
            y[i] += A[i][j] * x[j];
    }
}

/* Jacobi scaling of the fine system: divide every row by its diagonal, which
 * the assembler stores first in each row. */
void sediment_csr_scale(int N, const int *rowptr, double *val, double *b)
{
    for (int i = 0; i < N; i++) {
        double d = val[rowptr[i]];
        b[i] = b[i] / d;
    }
}

/* Lower band only: the settling operator couples a cell to the B cells
 * upstream of it (a triangular band). */
void sediment_upstream(int N, int B, double A[restrict N][N], const double *rate)
{
    for (int i = 0; i < N; i++)
        for (int j = MAX(0, i - B); j <= i; j++)
            A[i][j] = rate[i] * (double)(i - j + 1);
}
