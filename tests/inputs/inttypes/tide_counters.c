/* Velin tide gauges: loops over unsigned and narrow counters, as gauge
   firmware writes them. Each function is one case of C's integer rules. */
#include <stddef.h>

void gauge_pairs(unsigned n, double *x)      /* n - 1 wraps at n == 0 */
{
    for (unsigned i = 0; i < n - 1; i++)
        x[i] = 0;
}

void gauge_signed_limit(int n, double *x)    /* n converts to unsigned */
{
    for (unsigned i = 0; i < n; i++)
        x[i] = 0;
}

void gauge_blocks(long n, double *x)         /* 64-bit: n - 1 read modulo 2^64 */
{
    for (size_t i = 0; i < n - 1; i++)
        x[i] = 0;
}

void gauge_bytes(int n, double *x)           /* wraps past 255 when n > 255 */
{
    for (unsigned char c = 0; c < n; c++)
        x[c] = 0;
}

void gauge_halves(unsigned n, double *x)     /* steps down by 2 past 0 for odd n */
{
    for (unsigned i = n; i > 0; i -= 2)
        x[i] = 0;
}

void gauge_all_bytes(double *x)              /* never ends */
{
    for (unsigned char c = 0; c < 300; c++)
        x[c] = 0;
}

void gauge_plain(int n, double *x)           /* int: nothing to say */
{
    for (int i = 0; i < n; i++)
        x[i] = 0;
    for (unsigned i = 0; i < n + 2u; i++)   /* 2u: the sum is unsigned */
        x[i] = 1;
}
