/* Velin lock gates: which chambers fill on which tide step. Guards with
 * &&, ||, !, == and != on loop variables, else branches and continue. */

void lock_fill(int n, int m, int g, double *level)
{
    for (int t = 0; t < n; t++) {
        for (int c = 0; c < m; c++) {
            if (c == t || (c > 2 * t && !(c == g)))
                level[c] += 1.0;
            else if (c != t + 1)
                level[c] -= 1.0;
            else
                level[c] = 0.0;
        }
        if (t % 3 == 0)
            continue;
        level[t] = 2.0;
        for (int c = t; c < m; c++) {
            if (c < g)
                continue;
            if (c - t > 4) {
                level[c] = 3.0;
                continue;
            }
            level[c] *= 0.5;
        }
    }
}
