/*
 * Velin harbour cameras -- image pyramid for the mooring watch.
 *
 * Six cameras on the harbour master's tower watch the moorings. Frames are
 * 8-bit grey; the watch software builds a pyramid of half-size images and
 * clamps the border before the motion detector runs on each level.
 */

/* 2x2 box downsampling: only full 2x2 blocks are used, an odd last row or
 * column is dropped. Four threads match the four cores of the tower box. */
void camera_downsample2x(int H, int W, unsigned char out[restrict H / 2][W / 2],
                         const unsigned char in[restrict H][W])
{
#pragma omp parallel for num_threads(4)
    for (int i = 0; i < H - 1; i += 2)
        for (int j = 0; j < W - 1; j += 2) {
            int s = in[i][j] + in[i][j + 1] + in[i + 1][j] + in[i + 1][j + 1];
            out[i / 2][j / 2] = (unsigned char)((s + 2) / 4);
        }
}

/* Subsample every third pixel of every second row for the thumbnail strip. */
void camera_thumbnail(int H, int W, unsigned char *thumb, const unsigned char in[restrict H][W])
{
    int tw = (W + 2) / 3;

    for (int i = 0; i < H; i += 2)
        for (int j = 0; j < W; j += 3)
            thumb[(i / 2) * tw + j / 3] = in[i][j];
}

/* Clamp-to-edge border of width B around an H x W frame stored with its
 * border (rows and columns 0..H+2B-1): corners, edges, then nothing inside. */
void camera_clamp_border(int H, int W, int B, unsigned char img[restrict H + 2 * B][W + 2 * B])
{
    for (int i = 0; i < H + 2 * B; i++)
        for (int j = 0; j < W + 2 * B; j++) {
            int si = i < B ? B : (i >= H + B ? H + B - 1 : i);
            int sj = j < B ? B : (j >= W + B ? W + B - 1 : j);
            if (si != i || sj != j)
                img[i][j] = img[si][sj];
        }
}

/* Signed difference of two pyramid levels, in char, for the motion detector. */
void camera_level_diff(int H, int W, char d[restrict H][W],
                       const unsigned char a[restrict H][W], const unsigned char b[restrict H][W])
{
#pragma omp parallel for schedule(static) num_threads(4)
    for (int i = 0; i < H; i++)
        for (int j = 0; j < W; j++) {
            int v = ((int)a[i][j] - (int)b[i][j]) / 2;
            d[i][j] = (char)v;
        }
}

/* Pyramid depth of every camera: each level halves the width until it is
 * a few pixels wide, so the number of levels is a logarithm of the width. */
void camera_pyramid_depths(int C, const int *width, int *levels)
{
    for (int c = 0; c < C; c++) {
        int w = width[c];
        int n = 0;
        do {
            w = w / 2;
            n++;
        } while (w >= 8 && n < 16);
        levels[c] = n;
    }
}
