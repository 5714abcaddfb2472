/*
 * Velin buoy network -- decimation and spectral bands.
 *
 * Before the records go on the radio link to the harbour master they are
 * decimated: a half-band average, a polyphase split into three phases, and
 * an octave band energy table for the swell forecast.
 */
#include <math.h>

#define LINK_CAP 4096  /* samples per radio frame */

/* Half-band decimation: pairs of samples are averaged, then every input adds
 * a small share to the outputs up to (i - 1) / 2 (C truncates toward zero, so
 * the first input still reaches output 0). */
void buoy_halfband(int N, const double *x, double *y)
{
    int half = N / 2;

    for (int i = 0; i < half; i++)
        y[i] = 0.5 * (x[2 * i] + x[2 * i + 1]);
    for (int i = 0; i < N; i++)
        for (int j = 0; j <= (i - 1) / 2; j++)
            y[j] += 0.125 * x[i];
}

/* Polyphase split into three phases, by sample index modulo 3. */
void buoy_polyphase3(int N, const float *x, float *p0, float *p1, float *p2)
{
    for (int i = 0; i < N; i++) {
        if (i % 3 == 0)
            p0[i / 3] = x[i];
        else if (i % 3 == 1)
            p1[i / 3] = x[i];
        else
            p2[i / 3] = x[i];
    }
}

/* Frame the record for the radio link: never more than LINK_CAP samples. */
void buoy_frame(int N, const double *x, double *frame)
{
    for (int i = 0; i < (N < LINK_CAP ? N : LINK_CAP); i++)
        frame[i] = x[i];
}

/* Band energies over the channels: channel c sums lags up to c, so the
 * channels get more expensive; hand them out one by one. */
void buoy_lag_energy(int C, int N, double E[restrict C][C], const double x[restrict C][N])
{
#pragma omp parallel for schedule(dynamic)
    for (int c = 0; c < C; c++)
        for (int d = 0; d <= c; d++) {
            double s = 0.0;
            for (int i = 0; i < N; i++)
                s += x[c][i] * x[d][i];
            E[c][d] = s;
        }
}

/* Octave band energy: window lengths 1, 2, 4, ... up to the record length. */
void buoy_octave_energy(int N, const double *x, double *band)
{
    int b = 0;

    for (int len = 1; len < N; len *= 2) {
        double s = 0.0;
        for (int i = 0; i < len; i++)
            s += x[i] * x[i];
        band[b] = sqrt(s / len);
        b++;
    }
}

/* Pack for the legacy receiver, which reads slots in pairs: the first pair
 * of every four slots carries magnitudes, the second pair signed values. */
void buoy_legacy_pack(int N, const int *raw, int *packed)
{
    for (int i = 0; i < N; i++) {
        if ((i / 2) % 2 == 0)
            packed[i] = raw[i] < 0 ? -raw[i] : raw[i];
        else
            packed[i] = raw[i];
    }
}
