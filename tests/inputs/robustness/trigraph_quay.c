??=define QUAYS 12
/* Velin quay bollards, written with trigraphs: read as written, as in C23. */
void tension(double *load) ??<
    for (int q = 0; q < QUAYS; q++)
        load??(q??) *= 0.5;
??>
