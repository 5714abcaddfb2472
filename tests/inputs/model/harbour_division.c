/* Velin harbour basins: bounds with C integer division and remainder.
 * C truncates toward zero, so n / 3 and n % 4 differ from floor division
 * when n is negative (an offset from the mean tide level may be). */

void basin_offsets(int n, int m, float *q)
{
    for (int i = -n; i < n / 3; i++)
        for (int j = i / 2; j <= i % 3 + m; j++)
            q[j] = 0.0f;
    for (int i = n % 4 - 5; i < (n - 7) / 2; i++)
        if (i % 2 != 0 && -i / 4 < m)
            q[i] += 1.0f;
    for (int i = -8; i < n >> 1; i++)
        q[i & 7] = 2.0f;
}
