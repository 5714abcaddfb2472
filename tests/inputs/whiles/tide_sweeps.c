/* Velin tide solver: sweeps written as while loops. */

void tide_relax(int n, double *level, double tol)
{
    double res = 1;
    while (res > tol) {
        for (int i = 0; i < n; i++)
            level[i] = level[i] * 0.5;
        res = res * 0.5;
    }
}

void tide_every_third(int n, double *level)
{
    int i = 2;
    while (i < n) {
        level[i] = 0;
        i += 3;
    }
}

void tide_upper(int n, double *level)
{
    for (int j = 0; j < n; j++) {
        int i;
        i = j;
        while (i < n) {
            level[i] += 1;
            i++;
        }
    }
}

void tide_early(int n, double *level)
{
    int i = 0;
    while (i < n) {
        if (level[i] < 0)
            break;
        i++;
    }
}

void tide_down(int n, double *level)
{
    int k;
    k = n;
    while (k > 0) {
        level[k] = 2;
        k -= 2;
    }
}
