/* Velin quay: a file with mistakes the front end must survive. */
#define N 100

void survey(int n, double *h)
{
    for (int i = 0; i < n; i++) {
        h[i] = h[i] * 0.5;
        h[i] = @ 2;
        h[i] += 1.0;
    }
    for (int k = 0; k < n; k++ {
        h[k] = 0;
    }
    h[0] = ;
    n = n + 1;
}

void ok_after(int n, double *h)
{
    for (int i = 0; i < n; i++)
        h[i] = i;
}

void never_closed(int n)
{
    for (int i = 0; i < n; i++) {
        n--;
