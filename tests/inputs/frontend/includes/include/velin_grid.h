/* Velin harbour model: grid sizes and element type shared by the kernels. */
#pragma once
#define GRID_X 1024
#define GRID_Y (GRID_X / 2)
typedef float real;
#include "velin_math.h"
/* a helper defined in the header: reported when the header itself is analyzed */
static inline void clear_row(int n, real *row) { for (int i = 0; i < n; i++) row[i] = 0; }
