/* Velin sediment model: element types shared by the kernels. */
#pragma once
typedef double real;
typedef real grain_t;          /* a chain: grain_t -> real -> double */
typedef char base;
typedef unsigned short depth_code;
typedef real *real_ptr;        /* a pointer typedef */
typedef struct { real x, y; } point;
