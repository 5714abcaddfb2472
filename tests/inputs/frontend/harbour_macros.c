// Velin harbour: macro-heavy wave-spectrum kernel (preprocessor input).
#define NB 64
#define HALF (NB / 2)
#define SQ(x) ((x) * (x))
#define IDX(i, j) ((i) * NB + (j))
#define LOOP(v, lo, hi) for (v = (lo); v < (hi); v++)
#define SELF SELF + 1
#define LONG_SUM(a, b, c) \
    ((a) +                \
     (b) + (c))
#if 0
#error this branch is never read
#define NB 1
#elif defined(NB) && NB > 32
#define WIDE 1
#else
#define WIDE 0
#endif
#ifndef TIDE_TABLE
#define TIDE_TABLE 12
#endif
#ifdef NO_SUCH_MACRO
int never;
#endif
#define TMP 3
#undef TMP

void spectrum(double *e, const double *a)
{
    int i, j;
    LOOP(i, 0, HALF)
        for (j = 0; j < NB; j++)
            e[IDX(i, j)] = SQ(a[IDX(i, j)]) + WIDE + TIDE_TABLE;
    i = SELF;
    j = LONG_SUM(1, 2, 3);
    j = TMP;
}
