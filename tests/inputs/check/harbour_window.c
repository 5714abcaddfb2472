/* Velin harbour imaging: 3x3 smoothing window over one sonar frame. */
void harbour_window(int H, int W, float in[H + 2][W + 2], float out[H][W], const float k[3][3])
{
    for (int y = 0; y < H; y++)
        for (int x = 0; x < W; x++)
            for (int dy = 0; dy < 3; dy++)
                for (int dx = 0; dx < 3; dx++)
                    out[y][x] += in[y + dy][x + dx] * k[dy][dx];
}
