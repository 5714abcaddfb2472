/* Velin sediment: element types from a project header and from this file. */
#include "velin_types.h"
typedef float sample;
using weight = float;

void settle(int n, grain_t *g, base *tag, depth_code *code, real_ptr out, sample *s)
{
    for (int i = 0; i < n; i++) {
        out[i] = g[i] * 0.5 + (real)s[i];
        tag[i] = tag[i] + 1;
        code[i] = code[i] * 2;
    }
}
