/* Velin tide table in an old-style (K&R) definition: the parameter types sit
   between ')' and '{'. */
void tide_table(n, level)
    int n;
    double *level;
{
    int i;
    for (i = 0; i < n; i++)
        level[i] = 0.0;
}

void ebb(int n, double *level)
{
    for (int i = 0; i < n; i++)
        level[i] -= 1.0;
}
