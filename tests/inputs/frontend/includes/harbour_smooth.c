/* Velin harbour: smoothing of the surface grid; sizes come from the project
   header and from -D flags, as in the harbour's build. */
#include "velin_grid.h"
#include "velin_grid.h"
#include <math.h>
#include "velin_tides.h"

void smooth_surface(real *a, real *b)
{
    for (int i = 1; i < GRID_X - 1; i++)
        for (int j = 0; j < GRID_Y + HALO; j++)
            b[i] += SQRT_FUN(a[i - 1] + a[i + 1]);
}
