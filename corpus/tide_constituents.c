/*
 * Velin tidal observatory -- constituent tables.
 *
 * The harbour almanac is printed from tables of harmonic constituents: the
 * pairwise interaction terms of the constituents (a triangle), their lag
 * products, and a legacy table whose row lengths are products of indices.
 */
#include <math.h>

/* Interaction terms between constituents p < q (strict upper triangle). */
void tide_interactions(int K, double T[restrict K][K], const double *amp, const double *phase)
{
    for (int p = 0; p < K; p++)
        for (int q = p + 1; q < K; q++)
            T[p][q] = amp[p] * amp[q] * fabs(sin(phase[p] - phase[q]));
}

/* Lag products of the hourly record, lags 0..L-1, one sum per lag; the
 * parallel team splits the lags in chunks of four. */
void tide_lag_products(int N, int L, const double *h, double *r)
{
#pragma omp parallel for schedule(static, 4)
    for (int lag = 0; lag < L; lag++) {
        double s = 0.0;
        for (int t = lag; t < N; t++)
            s += h[t] * h[t - lag];
        r[lag] = s;
    }
}

/* The old almanac table: row (i, j) holds i*j compound-tide entries. */
void tide_compound_table(int K, double *out, const double *amp)
{
    long pos = 0;

    for (int i = 1; i < K; i++)
        for (int j = 1; j < K; j++)
            for (int k = 0; k < i * j; k++) {
                out[pos] = amp[i] * amp[j] / (1.0 + k);
                pos++;
            }
}

/* Spring-neap envelope: every day of the lunar month, sampled hourly; the
 * month is D days of 24 hours, the record starts at hour `start`. */
void tide_envelope(int D, int start, const double *h, double *env)
{
    for (int d = 0; d < D; d++) {
        double peak = 0.0;
        for (int t = start + 24 * d; t < start + 24 * d + 24; t++)
            peak = fmax(peak, fabs(h[t]));
        env[d] = sqrt(peak);
    }
}
