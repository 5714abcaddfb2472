/* Velin berths: bounds through loop-invariant locals, global constants,
 * a global size and values the model names (a call, a structure member). */

#include <string.h>

static const int LANES = 4;
int berth_extra;

struct quay {
    int slots;
};

void berth_plan(int n, struct quay *q, const char *name, double *plan)
{
    int half = n / 2;
    const int ts = 8;
    int len = strlen(name);

    for (int i = 0; i < half; i += ts / 4)
        for (int j = 0; j < LANES + berth_extra; j++)
            plan[i * 8 + j] = 1.0;
    for (int i = 0; i < q->slots; i++)
        for (int j = i; j < len; j++)
            plan[j] = 2.0;
}
