/* Prints core/shortcut's association statistics for tables read from standard input, for the
 * comparison with scipy and numpy (tests/cli/shortcut_stats.sh). Input: per table "r k" and
 * then r * k counts, row by row. Output: one line per table, "chi2 v v_corrected lambda". */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>

#include "../../core/shortcut.h"

int main(void)
{
    size_t r, k;
    while (scanf("%zu %zu", &r, &k) == 2) {
        if (r == 0 || k == 0 || r > 1000 || k > 1000)
            return 2;
        uint64_t *t = calloc(r * k, sizeof *t);
        if (!t)
            return 1;
        for (size_t i = 0; i < r * k; i++)
            if (scanf("%" SCNu64, &t[i]) != 1)
                return 2;
        struct kiln_assoc a;
        if (kiln_assoc_compute(t, r, k, &a))
            return 1;
        printf("%.17g %.17g %.17g %.17g\n", a.chi2, a.v, a.v_corrected, a.lambda);
        free(t);
    }
    return 0;
}
