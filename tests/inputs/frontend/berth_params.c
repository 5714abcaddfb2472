/* Velin berths: parameter spellings seen in harbour codes. */
#include <stddef.h>
#define M 64
typedef float depth_t;

void b_restrict(int n, double A[restrict n][M], const float *restrict x) { }
void b_pointer_to_array(long m, double (*A)[M]) { }
void b_open_dim(size_t n, double A[][64], unsigned int flags) { }
void b_void(void) { }
void b_empty() { }
void b_typedef(depth_t *d, depth_t e[static 4], struct berth *b) { }
void b_callback(void (*notify)(int, double), int *const *rows, ...) { }
static inline double *b_returns(double *p) { return p; }
