/* Velin harbour: silt carried along the quay channels by the ebb tide.
 *
 * Each channel is a row of cells; the silt of a cell grows with the silt the
 * ebb brings from the cell upstream, so the sweep along a channel is a
 * recurrence. The night shift once put the team on the cells of a channel
 * instead of on the channels: that loop is kept here, as committed, because
 * its iterations race on the upstream cell. */

/* Drift along each channel: cell j takes a share of the silt of cell j - 1. */
void harbour_silt_drift(int C, int L, double silt[restrict C][L], const double ebb[restrict C][L])
{
    for (int c = 0; c < C; c++)
#pragma omp parallel for
        for (int j = 1; j < L; j++)
            silt[c][j] = silt[c][j] + ebb[c][j] * silt[c][j - 1];
}
