/*
 * Velin buoy network -- filtering of the wave-height records.
 *
 * Eleven buoys outside the Velin breakwater send heave records every twenty
 * minutes. The records are filtered on shore: an FIR low-pass against the
 * hull's own bobbing, a full convolution with the buoy's transfer function,
 * and a search for the first sample over the storm threshold.
 */
#include <math.h>

#define MIN(a,b) ((a)<(b)?(a):(b))
#define MAX(a,b) ((a)>(b)?(a):(b))

#define HEAVE_GAIN 0.0125f  /* metres per logger count */

/* The logger writes the number of valid samples into the first slot of a
 * record; the samples follow. */
long count_samples(const float *buf)
{
    return (long)buf[0];
}

/* Causal FIR low-pass: y[i] = sum of h[i-k] x[k] over the last `taps` samples. */
void buoy_fir_lowpass(int N, int taps, const float *x, const float *h, float *y)
{
    for (int i = 0; i < N; i++) {
        float acc = 0.0f;
        for (int k = MAX(0, i - taps + 1); k <= i; k++)
            acc += h[i - k] * x[k];
        y[i] = acc;
    }
}

/* Full convolution c = a * b of an N-sample record with an M-tap response. */
void buoy_convolve(int N, int M, const double *a, const double *b, double *c)
{
    for (int i = 0; i < N + M - 1; i++) {
        c[i] = 0.0;
        for (int k = MAX(0, i - M + 1); k <= MIN(i, N - 1); k++)
            c[i] += a[k] * b[i - k];
    }
}

/* Convert a raw record to metres; the record says itself how long it is. */
void buoy_scale_record(const float *buf, float *out)
{
    const float *p = buf + 1;

    for (long i = 0; i < count_samples(buf); i++)
        out[i] = HEAVE_GAIN * p[i];
}

/* Index of the first sample whose height exceeds the storm limit, or -1.
 * The warning desk only needs the first one, so the scan stops there. */
long buoy_first_exceedance(long N, const float *h, float limit)
{
    long hit = -1;

    for (long i = 0; i < N; i++) {
        float a = fabsf(h[i]);
        if (a > limit) {
            hit = i;
            break;
        }
    }
    return hit;
}

/* Remove the hull resonance from all channels of one buoy with a short
 * symmetric smoother; the window is clipped at both ends of the record. */
void buoy_smooth_channels(int C, int N, int w, float y[restrict C][N], const float x[restrict C][N])
{
    for (int c = 0; c < C; c++)
        for (int i = 0; i < N; i++) {
            float s = 0.0f;
            for (int k = MAX(0, i - w); k <= MIN(N - 1, i + w); k++)
                s += x[c][k];
            y[c][i] = s / (float)(2 * w + 1);
        }
}
