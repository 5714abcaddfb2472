/* Velin tide tables with a size named in Spanish. */
void marea(int ñ, double *nivel) {
    for (int i = 0; i < ñ; i++)
        nivel[i] = 0;
}
