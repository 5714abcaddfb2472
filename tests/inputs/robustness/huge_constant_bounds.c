/* Velin sediment grid with constant bounds of 10^30 (loop variables of no declared
   type: mathematical integers): no count of its points can finish. */
void f(double *a, double *b) {
    for (i = 0; i < 1000000000000000000000000000000; i++)
        for (j = 0; j < 1000000000000000000000000000000; j++)
            a[i * 3 + j] += b[j] + b[j + 1];
}
