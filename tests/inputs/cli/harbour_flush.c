/* Velin harbour: flushing of the inner basin after a storm surge.
 * Two small kernels used by the command-line tests. */
#include <stddef.h>

#define BASIN 16

void flush_basin(int n, int m, double depth[n][m], const double inflow[n])
{
    for (int i = 0; i < n; i++)
        for (int j = 0; j <= i; j++)
            depth[i][j] += 0.5 * inflow[j];
}

double basin_mean(int n, const double level[restrict n])
{
    double s = 0.0;
    for (int i = 0; i < n; i += 2)
        s += level[i];
    while (s > 1.0)
        s = s / 2.0;
    return s;
}
