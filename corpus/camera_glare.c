/*
 * Velin harbour cameras -- exposure statistics and glare handling.
 *
 * The sun sets right behind the harbour mouth, so the west camera fights
 * glare every evening. These are the exposure statistics of the watch
 * software, and the scans it uses to find usable rows.
 */

#define BINS 256

/* Grey-level histogram of a frame, plus the cumulative table for equalising. */
void camera_histogram(int H, int W, const unsigned char img[restrict H][W], int *hist, int *cdf)
{
    for (int b = 0; b < BINS; b++)
        hist[b] = 0;
    for (int i = 0; i < H; i++)
        for (int j = 0; j < W; j++)
            hist[img[i][j]]++;
    cdf[0] = hist[0];
    for (int b = 1; b < BINS; b++)
        cdf[b] = cdf[b - 1] + hist[b];
}

/* First row, from the top, whose mean is below the glare threshold; -1 if none.
 * The scan runs until it finds one or runs out of rows. */
int camera_first_clear_row(int H, int W, const unsigned char img[restrict H][W], int thresh)
{
    int row = 0;

    for (;;) {
        if (row >= H)
            return -1;
        int sum = 0;
        for (int j = 0; j < W; j++)
            sum += img[row][j];
        if (sum < thresh * W)
            return row;
        row++;
    }
}

/* Mean of a row, skipping glare streaks: a saturated pixel makes the scan
 * jump over the streak length the sensor reports for it. */
int camera_row_mean_noglare(int W, const unsigned char *row, int streak)
{
    int acc = 0;
    int used = 0;

    for (int j = 0; j < W; j++) {
        if (row[j] == 255)
            j += streak;
        acc += row[j];
        used++;
    }
    return used > 0 ? acc / used : 0;
}

/* Equalise a frame with the cumulative table: the integer mapping keeps the
 * watch software free of floating point on the tower box. */
void camera_equalise(int H, int W, unsigned char img[restrict H][W], const int *cdf)
{
    const long total = (long)H * W;

    for (int i = 0; i < H; i++)
        for (int j = 0; j < W; j++)
            img[i][j] = (unsigned char)(total > 0 ? (255L * cdf[img[i][j]]) / total : 0);
}

/* Run lengths of saturated pixels on each row, for the glare report. */
void camera_glare_runs(int H, int W, const unsigned char img[restrict H][W], int *longest)
{
    for (int i = 0; i < H; i++) {
        int best = 0;
        int j = 0;
        while (j < W) {
            int run = 0;
            while (j < W && img[i][j] == 255) {
                run++;
                j++;
            }
            if (run > best)
                best = run;
            j++;
        }
        longest[i] = best;
    }
}
