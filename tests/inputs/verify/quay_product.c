/* Velin quay loads: the product of two load tables, row by column. */
void quay_product(int n, double L[n][n], double R[n][n], double P[n][n]) {
  for (int i = 0; i < n; i++)
    for (int j = 0; j < n; j++)
      for (int k = 0; k < n; k++)
        P[i][j] += L[i][k] * R[k][j];
}
