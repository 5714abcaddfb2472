/*
 * Velin harbour cameras -- tiled passes over full-resolution frames.
 *
 * Full frames from the tower cameras do not fit in the cache of the tower
 * box, so the rotation to the chart orientation and the glare blur walk the
 * frame in TS x TS tiles.
 */

#define MIN(a,b) ((a)<(b)?(a):(b))
#define TS 32  /* tile edge, in pixels */

/* Transpose a frame (the north camera is mounted on its side). */
void camera_rotate(int H, int W, float out[restrict W][H], const float in[restrict H][W])
{
    int ii, jj, i, j;

    for (ii = 0; ii < H; ii += TS)
        for (jj = 0; jj < W; jj += TS)
            for (i = ii; i < MIN(ii + TS, H); i++)
                for (j = jj; j < MIN(jj + TS, W); j++)
                    out[j][i] = in[i][j];
}

/* Horizontal 3-tap glare blur, tiled by rows only; the first and last
 * columns are copied. */
void camera_glare_blur(int H, int W, float out[restrict H][W], const float in[restrict H][W])
{
    for (int ii = 0; ii < H; ii += TS)
        for (int i = ii; i < MIN(ii + TS, H); i++) {
            out[i][0] = in[i][0];
            for (int j = 1; j < W - 1; j++)
                out[i][j] = (in[i][j - 1] + 2.0f * in[i][j] + in[i][j + 1]) * 0.25f;
            out[i][W - 1] = in[i][W - 1];
        }
}

/* Accumulate the colour-correction product of a camera pair, C += A * B,
 * in TS x TS tiles of the rows of A and of the inner dimension. */
void camera_colour_product(int N, int M, int P, float C[restrict N][P],
                           const float A[restrict N][M], const float B[restrict M][P])
{
    for (int ii = 0; ii < N; ii += TS)
        for (int kk = 0; kk < M; kk += TS)
            for (int i = ii; i < MIN(ii + TS, N); i++)
                for (int k = kk; k < MIN(kk + TS, M); k++)
                    for (int j = 0; j < P; j++)
                        C[i][j] += A[i][k] * B[k][j];
}
