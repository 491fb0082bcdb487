/* The shortcut check: how well an attribute that is not the picture's content (file format,
 * stored size, bit depth, channels, source, orientation tag, JPEG coding, file-size band)
 * predicts the label on its own. Pure computation over a split catalogue; docs/shortcuts.md
 * gives the statistics, the thresholds and the published sources they come from. */
#ifndef KILN_SHORTCUT_H
#define KILN_SHORTCUT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "arena.h"
#include "catalog.h"
#include "err.h"

/* Association between two categorical variables, from an r x k table of counts (rows: the
 * attribute's values, columns: classes). Rows and columns with no count are dropped first. */
struct kiln_assoc {
    uint64_t n;
    size_t rows, cols;  /* non-empty ones */
    double chi2;        /* Pearson's chi-squared statistic */
    double v;           /* Cramér's V (Cramér 1946): sqrt(chi2 / n / min(r - 1, k - 1)) */
    double v_corrected; /* with Bergsma's (2013) bias correction; 0 when undefined */
    double lambda;      /* Goodman and Kruskal's lambda (1954) for predicting the column from
                           the row: the share of the majority-class errors that the majority
                           class of each row removes */
};

/* Computes every field of out from table[r * k] (row-major). A table with fewer than two
 * non-empty rows or columns, or n < 2, has all statistics 0. Returns KILN_OK or KILN_ENOMEM. */
int kiln_assoc_compute(const uint64_t *table, size_t r, size_t k, struct kiln_assoc *out);

enum kiln_shortcut_attr {
    KILN_ATTR_FORMAT = 0,
    KILN_ATTR_STORED_SIZE,
    KILN_ATTR_DEPTH,
    KILN_ATTR_CHANNELS,
    KILN_ATTR_SOURCE,
    KILN_ATTR_ORIENTATION,
    KILN_ATTR_JPEG_CODING,
    KILN_ATTR_SIZE_BAND,
    KILN_ATTR_COUNT
};
const char *kiln_shortcut_attr_name(int attr); /* "format", "stored size", ... */

/* Thresholds (docs/shortcuts.md): an attribute is flagged when, on at least
 * KILN_SHORTCUT_MIN_TRAIN labelled training items, its bias-corrected V reaches
 * KILN_SHORTCUT_V and the majority class of each of its values, learnt on train, removes at
 * least KILN_SHORTCUT_LAMBDA of the majority-class baseline's errors on the held-out split
 * (test, else val; on train itself when neither has KILN_SHORTCUT_MIN_HELD items). */
#define KILN_SHORTCUT_V 0.5
#define KILN_SHORTCUT_LAMBDA 0.5
#define KILN_SHORTCUT_MIN_TRAIN 20
#define KILN_SHORTCUT_MIN_HELD 10

struct kiln_shortcut {
    int attr;
    size_t nvalues;      /* distinct values over all packed items, byte-wise sorted */
    const char **values; /* strings in kiln_shortcuts.strings */
    /* counts[(s * nvalues + v) * nclasses + c]: items of split s, value v, class c. */
    uint64_t *counts;
    struct kiln_assoc train; /* on the training split */
    int32_t *majority;       /* per value: majority class on train (ties: lower index), -1 */
    int held_split;          /* split the rule was checked on: test, val, or -1 (train) */
    uint64_t held_n, held_rule_hits, held_base_hits;
    double held_lambda; /* (rule hits - baseline hits) / (n - baseline hits), 0 if undefined */
    bool fires;
};

struct kiln_shortcuts {
    struct kiln_shortcut attrs[KILN_ATTR_COUNT];
    size_t nclasses;
    size_t fired;
    int32_t base_class; /* majority class of train, -1 when train has no labelled item */
    struct kiln_arena strings;
};

/* Runs the check over the ok, labelled items of cat that have a split. */
int kiln_shortcuts_run(const struct kiln_catalog *cat, struct kiln_shortcuts *out,
                       struct kiln_err *err);
void kiln_shortcuts_free(struct kiln_shortcuts *s);

/* The attribute's value for one item, as the check sees it (written to buf, NUL-terminated).
 * Returns false when the attribute does not apply (JPEG coding of a PNG). */
bool kiln_shortcut_value(int attr, const struct kiln_item *it, char *buf, size_t len);

#endif
