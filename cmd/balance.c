/* What the user should see about a split's balance and its shortcuts, printed the same way by
 * split, pack, build and audit: the compact class x split table, and the attributes other than
 * the picture that predict the label (core/shortcut.h). */
#include <stdlib.h>
#include <string.h>

#include "../core/checked.h"
#include "cmd.h"

#define CLASS_ROWS 30  /* classes listed in the table before "... and N more" */
#define VALUE_ROWS 10  /* values listed under a shortcut finding */

void cli_print_class_table(FILE *f, const struct kiln_catalog *cat, const char *asked,
                           bool with_val)
{
    const size_t nc = cat->nclasses;
    size_t *count = kiln_alloc_array((nc + 1) * KILN_NSPLITS, sizeof *count);
    if (!count)
        return; /* a summary line is not worth failing the run */
    memset(count, 0, (nc + 1) * KILN_NSPLITS * sizeof *count);
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status != KILN_ST_OK || it->split < 0 || it->split >= KILN_NSPLITS)
            continue;
        const size_t c = it->class_index >= 0 ? (size_t)it->class_index : nc; /* nc: no label */
        count[c * KILN_NSPLITS + (size_t)it->split]++;
    }
    size_t width = 5; /* "class" */
    for (size_t c = 0; c < nc && c < CLASS_ROWS; c++)
        if (strlen(cat->classes[c]) > width)
            width = strlen(cat->classes[c]) > 24 ? 24 : strlen(cat->classes[c]);
    size_t total[KILN_NSPLITS + 1] = {0};
    fprintf(f, "  %-*s %8s", (int)width, "class", "train");
    if (with_val)
        fprintf(f, " %8s", "val");
    fprintf(f, " %8s %8s\n", "test", "total");
    for (size_t c = 0; c <= nc; c++) {
        const size_t *row = &count[c * KILN_NSPLITS];
        const size_t sum = row[0] + row[1] + row[2];
        for (int s = 0; s < KILN_NSPLITS; s++)
            total[s] += row[s];
        total[KILN_NSPLITS] += sum;
        if (c == nc && sum == 0)
            continue;
        if (c >= CLASS_ROWS && c < nc) {
            if (c == CLASS_ROWS)
                fprintf(f, "  ... and %zu more classes (manifest.json \"counts\")\n",
                        nc - CLASS_ROWS);
            continue;
        }
        fprintf(f, "  %-*.*s %8zu", (int)width, (int)width, c < nc ? cat->classes[c] : "(none)",
                row[0]);
        if (with_val)
            fprintf(f, " %8zu", row[1]);
        fprintf(f, " %8zu %8zu\n", row[2], sum);
    }
    fprintf(f, "  %-*s %8zu", (int)width, "all", total[0]);
    if (with_val)
        fprintf(f, " %8zu", total[1]);
    fprintf(f, " %8zu %8zu\n", total[2], total[3]);
    if (total[3]) {
        fprintf(f, "  %-*s %7.1f%%", (int)width, "share", 100.0 * (double)total[0] / (double)total[3]);
        if (with_val)
            fprintf(f, " %7.1f%%", 100.0 * (double)total[1] / (double)total[3]);
        fprintf(f, " %7.1f%%", 100.0 * (double)total[2] / (double)total[3]);
        if (asked)
            fprintf(f, "  (asked %s)", asked);
        fputc('\n', f);
    }
    free(count);
}

/* "the file format", "the stored size", ... for sentences. */
static const char *attr_phrase(int attr)
{
    switch (attr) {
    case KILN_ATTR_FORMAT: return "the file format";
    case KILN_ATTR_STORED_SIZE: return "the stored size (width x height)";
    case KILN_ATTR_DEPTH: return "the bit depth";
    case KILN_ATTR_CHANNELS: return "the channels";
    case KILN_ATTR_SOURCE: return "the source (folder or archive)";
    case KILN_ATTR_ORIENTATION: return "the orientation tag";
    case KILN_ATTR_JPEG_CODING: return "the JPEG coding";
    case KILN_ATTR_SIZE_BAND: return "the file-size band";
    default: return "an attribute";
    }
}

static void print_values(FILE *f, const struct kiln_shortcut *sc,
                         const struct kiln_catalog *cat, size_t nc)
{
    size_t shown = 0;
    for (size_t v = 0; v < sc->nvalues; v++) {
        const uint64_t *row = &sc->counts[v * nc]; /* split 0: train */
        uint64_t n = 0;
        for (size_t c = 0; c < nc; c++)
            n += row[c];
        if (!n)
            continue;
        if (shown == VALUE_ROWS) {
            fprintf(f, "    ... and more values (kiln report shows every one)\n");
            break;
        }
        const int32_t m = sc->majority[v];
        fprintf(f, "    %s: %llu training %s, %.0f%% '%s'\n", sc->values[v],
                (unsigned long long)n, n == 1 ? "item" : "items",
                100.0 * (double)row[m] / (double)n, cat->classes[m]);
        shown++;
    }
}

void cli_print_shortcuts(FILE *f, const struct kiln_shortcuts *s, const struct kiln_catalog *cat,
                         bool findings, bool quiet)
{
    const size_t nc = s->nclasses;
    for (int a = 0; a < KILN_ATTR_COUNT; a++) {
        const struct kiln_shortcut *sc = &s->attrs[a];
        if (!sc->fires)
            continue;
        const char *held = sc->held_split >= 0 ? kiln_split_name(sc->held_split) : "train";
        char what[512];
        snprintf(what, sizeof what,
                 "%s alone predicts the label: guessing each value's majority class (learnt on "
                 "train) is right for %llu of %llu %s items, against %llu for the most common "
                 "class; Cramér's V %.2f (bias-corrected) on train. A network can learn this "
                 "instead of the picture (docs/shortcuts.md)",
                 attr_phrase(a), (unsigned long long)sc->held_rule_hits,
                 (unsigned long long)sc->held_n, held, (unsigned long long)sc->held_base_hits,
                 sc->train.v_corrected);
        if (findings) {
            fprintf(f, "SHORTCUT %s: %s:\n", kiln_shortcut_attr_name(a), what);
            print_values(f, sc, cat, nc);
        } else {
            cli_warn("shortcut: %s:", what);
            print_values(stderr, sc, cat, nc);
        }
    }
    if (quiet || s->fired)
        return;
    int best = -1;
    for (int a = 0; a < KILN_ATTR_COUNT; a++)
        if (best < 0 || s->attrs[a].train.v_corrected > s->attrs[best].train.v_corrected)
            best = a;
    fprintf(f, "shortcut check: no attribute besides the picture predicts the label (strongest: "
               "%s, Cramér's V %.2f)\n",
            kiln_shortcut_attr_name(best), s->attrs[best].train.v_corrected);
}

void cli_check_shortcuts(FILE *f, const struct kiln_catalog *cat, bool findings, bool quiet)
{
    struct kiln_shortcuts s;
    struct kiln_err err;
    if (kiln_shortcuts_run(cat, &s, &err)) {
        cli_warn("shortcut check not done: %s", err.msg);
        return;
    }
    cli_print_shortcuts(f, &s, cat, findings, quiet);
    kiln_shortcuts_free(&s);
}
