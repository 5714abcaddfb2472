/* Velin harbour: tide-gauge smoothing and basin averaging.
   Whole-file input for the front end: includes, macros, typedefs,
   structs, prototypes, globals and a few kernels. */
#include <stdio.h>
#include <stdlib.h>
#include "velin/harbour.h"

#define NGAUGE 48
#define NSTEP  1440          /* one reading per minute */
#define MIN(a, b) ((a) < (b) ? (a) : (b))
#define MAX(a, b) ((a) > (b) ? (a) : (b))

typedef double level_t;

struct gauge {
    int id;
    level_t zero;
};

enum quay { NORTH, SOUTH };

static const int TS = 32;
double levels[NGAUGE][NSTEP];
level_t datum = 0.0, *cursor;
struct gauge gauges[NGAUGE];

void read_gauges(const char *path);
static level_t mean_level(int n, const level_t *x);

/* running mean over a window of w readings */
void smooth(int n, int w, level_t out[restrict NGAUGE][NSTEP])
{
    int g, t, k;
    for (g = 0; g < NGAUGE; g++)
        for (t = 0; t < n; t++) {
            level_t s = 0.0;
            for (k = MAX(0, t - w); k <= MIN(n - 1, t + w); k++)
                s += levels[g][k];
            out[g][t] = s / (2 * w + 1);
        }
}

static level_t mean_level(int n, const level_t *x)
{
    level_t s = 0;
    int i = 0;
    while (i < n) {
        s += x[i];
        i++;
    }
    return n > 0 ? s / n : 0.0;
}

/* tiled basin average, in parallel over tiles */
void basin_tiles(int ny, int nx, double depth[ny][nx], double *avg)
{
    #pragma omp parallel for schedule(dynamic, 2) collapse(2)
    for (int ti = 0; ti < ny; ti += TS)
        for (int tj = 0; tj < nx; tj += TS) {
            double acc = 0.0;
            for (int i = ti; i < MIN(ti + TS, ny); i++)
                for (int j = tj; j < MIN(tj + TS, nx); j++)
                    acc += depth[i][j];
            avg[(ti / TS) * ((nx + TS - 1) / TS) + tj / TS] = acc;
        }
}

int main(void)
{
    read_gauges("gauges.csv");
    smooth(NSTEP, 5, levels);
    printf("%f\n", mean_level(NSTEP, levels[0]));
    return 0;
}
