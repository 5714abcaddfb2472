/* Velin harbour model: the grid and element type shared by the model's kernels.
   The vertical extent NZ and the halo width come from the build (-D flags in
   compile_commands.json). */
#pragma once

#define NX 512
#define NY 384
#ifndef HALO
#define HALO 1
#endif

typedef double real;

#define SQRT_FUN(x) sqrt(x)
#define IDX(i, j) ((i) * NY + (j))
