/* Velin tide gauges: every seventh gauge of a shifted window, binned by a
   five-gauge rotation. Its count once printed 'k*(X) % m' for 'k*((X) % m)'. */
void bin_gauges(int N, int M, long long *bins) {
  for (int i = -N - 2; i <= -M - N + 2; i = i + 7) {
    if ((-i - 2) % 5 != 4) bins[1] += 1; else bins[2] += 1; } }
