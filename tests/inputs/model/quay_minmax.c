/* Velin quay cranes: tiled sweeps with MIN/MAX macros, calls to small
 * min/max helpers and ternaries. */

#include <stdlib.h>

#define MIN(a, b) ((a) < (b) ? (a) : (b))
#define MAX(a, b) ((a) > (b) ? (a) : (b))
#define TILE 4

static int imin(int a, int b) { return a < b ? a : b; }
static int imax(int a, int b) { return a > b ? a : b; }

void crane_tiles(int n, int m, double *A)
{
    for (int ii = 0; ii < n; ii += TILE)
        for (int i = ii; i < MIN(ii + TILE, n); i++)
            for (int j = MAX(0, i - 2); j <= MIN(m, i + 2); j++)
                A[i + j] = 0.0;
}

void crane_reach(int n, int m, double *A)
{
    for (int i = 0; i < n; i++) {
        for (int j = (i > m ? m : i); j < n; j++)
            A[j] = 1.0;
        for (int j = 0; j < (i % 2 == 0 ? n : m); j++)
            A[j] += 1.0;
        for (int j = imax(i - m, -2); j < imin(n, m + i); j++)
            A[j] -= 1.0;
        for (int j = -abs(i - m); j < abs(m); j++)
            A[j] *= 2.0;
    }
}
