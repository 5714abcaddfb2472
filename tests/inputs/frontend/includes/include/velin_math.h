#ifndef VELIN_MATH_H
#define VELIN_MATH_H
#define SQRT_FUN(x) sqrt(x)
#if TIDE_DEBUG
#define TRACE_AT(where, what
#endif
#endif
