/* Velin harbour model: relaxation sweeps of the tide surface between two
   tidal readings. Sizes come from include/velin_model.h and the build flags. */
#include <math.h>
#include "velin_model.h"

/* one Jacobi sweep over the interior of the surface, per vertical layer */
void relax_layers(real u[NZ][NX][NY], real v[NZ][NX][NY])
{
    for (int k = 0; k < NZ; k++)
        for (int i = HALO; i < NX - HALO; i++)
            for (int j = HALO; j < NY - HALO; j++)
                v[k][i][j] = 0.25 * (u[k][i - 1][j] + u[k][i + 1][j] + u[k][i][j - 1] + u[k][i][j + 1]);
}

/* wave energy of each row of the surface, T readings */
void row_energy(int T, const real *h, real *e)
{
    for (int t = 0; t < T; t++)
        for (int i = 0; i < NX; i++) {
            real s = 0.0;
            for (int j = 0; j < NY; j++)
                s += h[IDX(i, j)] * h[IDX(i, j)];
            e[t * NX + i] = SQRT_FUN(s);
        }
}
