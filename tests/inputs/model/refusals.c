/* Velin harbour control: loops tripcount declines to count, each beside
 * exact code that must still be counted. One function per reason. */

int probe(int k) { return k % 3; }

void doubling_windows(int n, int s, double *x)
{
    for (int w = 1; w < n; w *= 2)            /* TC201: not an addition */
        x[w] = 0.0;
    for (int i = 0; i < n; i += s)            /* TC201: step is a size, not a constant */
        x[i] = 1.0;
}

void csr_rows(int n, const int *rowptr, const int *col, double *y)
{
    for (int i = 0; i < n; i++) {
        y[i] = 0.0;                           /* exact */
        for (int k = rowptr[i]; k < rowptr[i + 1]; k++)   /* TC202 */
            y[i] += col[k];
    }
}

void growing_window(int n, double *x)
{
    int w = 1;
    for (int i = 0; i < n; i++) {
        for (int j = 0; j < w; j++)           /* TC203: w changes in the nest */
            x[j] += 1.0;
        w = w + 2;
        x[i] = 0.0;                           /* exact */
    }
}

void first_dry_berth(int n, int m, double *depth)
{
    for (int i = 0; i < n; i++) {
        depth[i] = 1.0;                       /* exact */
        for (int j = 0; j < m; j++) {         /* TC204: break */
            if (depth[j] < 0.5)
                break;
            depth[j] *= 0.9;
        }
        depth[i] += 2.0;                      /* exact */
    }
}

int scan_alarm(int n, const double *h)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++)
            if (h[i * n + j] > 9.0)
                return i;                     /* TC205 */
    return -1;
}

void settle(int n, double *x)
{
    for (int i = 0; i < n; i++) {
        int r = 0;                            /* exact */
        while (x[i] > 1.0) {                  /* TC206 */
            x[i] *= 0.5;
            r++;
        }
        x[i] += r;                            /* exact */
    }
}

void skip_marks(int n, double *x)
{
    for (int i = 0; i < n; i++) {
        x[i] = 0.0;
        if (x[i] > 1.0)
            i++;                              /* TC207 */
    }
}

void unbounded_forms(double *x)
{
    for (int i = 0; i >= 0; i++)              /* TC208: nothing limits i */
        x[i] = 1.0;
}

void forever_sweep(int n, double *x)
{
    for (int i = n; ; i--)                    /* TC208: no condition */
        x[i] = 0.0;
}

void products(int n, double *x)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < n; j++)
            for (int k = 0; k < i * j; k++)   /* TC209 */
                x[k] = 0.0;
}

void wet_cells(int n, int m, const double *A, double *B)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < m; j++) {
            if (A[i * m + j] > 0.0)           /* TC210 */
                B[j] = 1.0;
            else
                B[j] = 0.0;
            B[i] += 1.0;                      /* exact */
        }
}

void sawtooth(int n, double *x)
{
    for (int i = 0; i % 7 < 5 && i < n; i++)  /* TC211 */
        x[i] = 0.0;
}

void paired(int n, double *x)
{
    int j;
    for (int i = 0, k = n; i < k; i++)        /* TC212: two variables */
        x[i] = 0.0;
    for (j = 0; j < n; j++)
        for (; j < n; j++)                    /* TC212: no start value */
            x[j] = 1.0;
}

void skip_wet(int n, const double *A, double *B)
{
    for (int i = 0; i < n; i++) {
        B[i] = 0.0;                           /* exact */
        if (A[i] > 0.0)
            continue;                         /* TC213 */
        B[i] = 1.0;
    }
}

void gate_modes(int n, const int *mode, double *x)
{
    for (int i = 0; i < n; i++) {
        switch (mode[i]) {                    /* TC214 */
        case 0:
            x[i] = 0.0;
            break;
        default:
            x[i] = 1.0;
        }
        x[i] += 1.0;                          /* exact */
    }
}

void float_sweep(int n, double *x)
{
    for (double t = 0.0; t < n; t += 0.5)     /* TC219 */
        x[0] += t;
}

void probed(int n, double *x)
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j < probe(i); j++)    /* TC209: call that varies with i */
            x[j] = 0.0;
}
