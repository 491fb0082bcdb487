/* What scan and split tell the user, printed by one function each so that scan and build, and
 * split and build, say the same things in the same words. Summaries go to stdout and are
 * skipped by --quiet; warnings go to stderr always. */
#include <stdlib.h>
#include <string.h>

#include "../core/checked.h"
#include "cmd.h"

#define LIST_LIMIT 10 /* rows, units or items named before "... and N more" */

static const char *plural(size_t n, const char *one, const char *many)
{
    return n == 1 ? one : many;
}

/* ---- scan --------------------------------------------------------------------------------- */

/* A group rule that matches nothing, or too little, or keeps nothing together, is almost
 * always a mistake in the expression (a case typo such as t[0-9]+ for T[0-9]+); its cost is
 * specimens split across train and test. Half of the usable files is the line: a rule meant
 * for every file that misses half of them is wrong, while a clean run matches all or nearly
 * all and stays quiet. */
static void warn_group_rule(const struct kiln_scan_report *rep, const char *re)
{
    const size_t matched = rep->group_matched, usable = matched + rep->group_unmatched;
    if (!re || usable == 0)
        return;
    if (matched == 0)
        cli_warn("the group rule '%s' matches none of the %zu usable %s, so every file is a "
                 "unit of its own and shots of one specimen can land in different splits (the "
                 "rule is matched against names like '%s')",
                 re, usable, plural(usable, "file", "files"), rep->first_unmatched);
    else if (matched < usable - matched)
        cli_warn("the group rule '%s' matches only %zu of the %zu usable files; the other %zu "
                 "are units of their own (the first is '%s')",
                 re, matched, usable, usable - matched, rep->first_unmatched);
    else if (matched > 1 && rep->groups_shared == 0)
        cli_warn("the group rule '%s' gives each of the %zu files it matches a group of its "
                 "own, so it keeps nothing together (the capture group should be the "
                 "specimen, not the whole name)",
                 re, matched);
}

void cli_print_scan_summary(FILE *f, const struct kiln_catalog *cat,
                            const struct kiln_scan_report *rep, const char *group_regex,
                            bool quiet)
{
    warn_group_rule(rep, group_regex);
    if (quiet)
        return;
    fprintf(f, "%zu %s catalogued (%.1f MB), %zu %s\n", cat->n, plural(cat->n, "file", "files"),
            (double)rep->bytes / 1e6, cat->nclasses, plural(cat->nclasses, "class", "classes"));
    for (int s = 0; s < KILN_ST_COUNT; s++)
        if (rep->status[s])
            fprintf(f, "  %-15s %zu\n", kiln_status_name(s), rep->status[s]);
    if (rep->hidden || rep->junk)
        fprintf(f, "skipped without a row: %zu hidden, %zu system %s\n", rep->hidden, rep->junk,
                plural(rep->junk, "file", "files"));
    if (rep->outputs)
        fprintf(f, "skipped without a row: %zu kiln output %s inside the sources (%s%s)\n",
                rep->outputs, plural(rep->outputs, "folder", "folders"), rep->first_output,
                rep->outputs > 1 ? ", ..." : "");
    size_t unusable = cat->n - rep->status[KILN_ST_OK], shown = 0, pages = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status == KILN_ST_OK) {
            pages += it->pages > 1;
            continue;
        }
        if (shown == LIST_LIMIT)
            continue;
        char name[4096];
        kiln_catalog_item_name(it, name, sizeof name);
        fprintf(f, "  %s: %s: %s\n", kiln_status_name(it->status), name, it->reason);
        shown++;
    }
    if (unusable > shown)
        fprintf(f, "  ... and %zu more (catalog.csv gives every row its status and reason)\n",
                unusable - shown);
    if (pages)
        fprintf(f, "%zu multi-page %s: only the first page of each is used (column pages)\n",
                pages, plural(pages, "file", "files"));
    if (group_regex)
        fprintf(f, "group rule matched %zu of %zu usable files (%zu %s, %zu of them with two "
                   "files or more)\n",
                rep->group_matched, rep->group_matched + rep->group_unmatched, rep->groups,
                plural(rep->groups, "group", "groups"), rep->groups_shared);
    if (rep->csv_rows_unused)
        fprintf(f, "labels CSV: %zu of %zu rows match no file (first: %s)\n", rep->csv_rows_unused,
                rep->csv_rows, rep->first_unused_csv_row);
}

/* ---- split -------------------------------------------------------------------------------- */

/* "group 'T0042'" or, for a unit of identical or near-identical files, its first file. */
static void unit_name(const struct kiln_catalog *cat, const struct kiln_unit *un, char *buf,
                      size_t len)
{
    const struct kiln_item *id = &cat->items[un->id_item];
    if (un->id_kind == KILN_UNIT_ID_GROUP) {
        snprintf(buf, len, "group '%s'", id->group);
    } else {
        char name[4096];
        kiln_catalog_item_name(id, name, sizeof name);
        snprintf(buf, len, "the copies of %s", name);
    }
}

/* Lists the items of unit u with their labels, LIST_LIMIT at most. */
static void list_unit_items(FILE *f, const struct kiln_catalog *cat,
                            const struct kiln_units *units, size_t u)
{
    size_t shown = 0, total = units->units[u].size;
    for (size_t i = 0; i < cat->n && shown < LIST_LIMIT; i++) {
        if (units->unit_of[i] != u)
            continue;
        char name[4096];
        kiln_catalog_item_name(&cat->items[i], name, sizeof name);
        const char *label = cat->items[i].label;
        fprintf(f, "      %s (%s)\n", name, label[0] ? label : "no label");
        shown++;
    }
    if (total > shown)
        fprintf(f, "      ... and %zu more\n", total - shown);
}

static void warn_units(FILE *f, const struct kiln_catalog *cat, const struct kiln_units *units,
                       const struct kiln_split_params *p, bool mixed, size_t count)
{
    if (!count)
        return;
    if (mixed)
        cli_warn("%zu %s items of more than one label (a group, or copies of one picture, "
                 "across classes):",
                 count, plural(count, "unit holds", "units hold"));
    else
        cli_warn("%zu %s more than twice as large as %s split's share, so the split sizes "
                 "miss the ratios:",
                 count, plural(count, "unit is", "units are"), plural(count, "its", "their"));
    /* Stratum sizes give each oversized unit's target (docs/split.md, exact mode). */
    uint64_t R = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        R += p->ratio[s];
    size_t shown = 0;
    for (size_t u = 0; u < units->nunits; u++) {
        const struct kiln_unit *un = &units->units[u];
        if (!(mixed ? un->mixed : un->oversized))
            continue;
        if (shown == LIST_LIMIT) {
            fprintf(f, "  ... and %zu more units\n", count - shown);
            break;
        }
        char name[4200];
        unit_name(cat, un, name, sizeof name);
        if (mixed) {
            fprintf(f, "  %s (%u items, %s):\n", name, un->size, kiln_split_name(un->split));
            list_unit_items(f, cat, units, u);
        } else {
            uint64_t total = 0;
            for (size_t v = 0; v < units->nunits; v++)
                if (!p->stratify || units->units[v].stratum == un->stratum)
                    total += units->units[v].size;
            const double target = R ? (double)p->ratio[un->split] * (double)total / (double)R : 0;
            fprintf(f, "  %s: %u items in %s, whose share%s is %.1f items\n", name, un->size,
                    kiln_split_name(un->split), p->stratify ? " of its class" : "", target);
        }
        shown++;
    }
}

/* Classes that have items but none in a split that should hold some. A split with a share that
 * got no item at all is named once instead of class by class. */
static void warn_missing_classes(const struct kiln_catalog *cat,
                                 const struct kiln_split_params *p,
                                 const struct kiln_split_report *rep)
{
    size_t nc = cat->nclasses;
    size_t *count = kiln_alloc_array(nc ? nc * KILN_NSPLITS : 1, sizeof *count);
    if (!count) {
        cli_warn("cannot check classes per split: out of memory");
        return;
    }
    memset(count, 0, (nc ? nc * KILN_NSPLITS : 1) * sizeof *count);
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split >= 0 && it->class_index >= 0)
            count[(size_t)it->split * nc + (size_t)it->class_index]++;
    }
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!p->ratio[s])
            continue;
        if (rep->items[s] == 0) {
            cli_warn("the %s split received no item (too few units for the ratios)",
                     kiln_split_name(s));
            continue;
        }
        for (size_t c = 0; c < nc; c++)
            if (!count[(size_t)s * nc + c])
                cli_warn("class '%s' has no item in the %s split", cat->classes[c],
                         kiln_split_name(s));
    }
    free(count);
}

/* The near-duplicate links the unit rule refused: the units they would have formed are not
 * formed silently (docs/near-duplicates.md, section 4); each is named with its evidence. */
static void warn_refused(FILE *f, const struct kiln_catalog *cat, const struct kiln_nearlinks *l)
{
    const size_t refused = l->per_verdict[KILN_NEARLINK_REFUSED_LABEL] +
                           l->per_verdict[KILN_NEARLINK_REFUSED_SIZE];
    if (!refused)
        return;
    cli_warn("%zu near-duplicate %s passed the pixel check but would join %s, so the "
             "units stay apart (group them, or correct a label, if they are copies):",
             refused, plural(refused, "link", "links"),
             l->per_verdict[KILN_NEARLINK_REFUSED_SIZE] ? "different labels or too many "
                                                          "pictures"
                                                        : "different labels");
    size_t shown = 0;
    for (size_t k = 0; k < l->n; k++) {
        const struct kiln_nearlink *x = &l->link[k];
        if (x->verdict == KILN_NEARLINK_LINKED)
            continue;
        if (shown++ == LIST_LIMIT) {
            fprintf(f, "  ... and %zu more (catalog.json \"near_duplicates\" lists up to 100)\n",
                    refused - LIST_LIMIT);
            break;
        }
        char na[4096], nb[4096];
        kiln_catalog_item_name(&cat->items[x->c.a], na, sizeof na);
        kiln_catalog_item_name(&cat->items[x->c.b], nb, sizeof nb);
        const char *la = cat->items[x->c.a].label, *lb = cat->items[x->c.b].label;
        fprintf(f, "  %s (%s) ~ %s (%s)\n    ", na, la[0] ? la : "no label", nb,
                lb[0] ? lb : "no label");
        cli_print_link_evidence(f, x);
        fputc('\n', f);
    }
}

void cli_print_split_summary(FILE *f, const struct kiln_catalog *cat,
                             const struct kiln_units *units, const struct kiln_split_params *p,
                             const struct kiln_split_report *rep,
                             const struct kiln_nearlinks *near, bool quiet)
{
    if (!quiet) {
        char ratios[96];
        kiln_split_format_ratios(p, ratios, sizeof ratios);
        const size_t items = rep->items[0] + rep->items[1] + rep->items[2];
        fprintf(f, "%zu %s from %zu usable %s (seed %llu, ratios %s, %s mode%s)\n", rep->units,
                plural(rep->units, "unit", "units"), items, plural(items, "item", "items"),
                (unsigned long long)p->seed, ratios, kiln_split_mode_name(p->mode),
                p->stratify ? ", stratified" : "");
        for (int s = 0; s < KILN_NSPLITS; s++)
            if (s != KILN_SPLIT_VAL || p->nparts == 3)
                fprintf(f, "  %-5s %zu %s in %zu %s\n", kiln_split_name(s), rep->items[s],
                        plural(rep->items[s], "item", "items"), rep->units_per_split[s],
                        plural(rep->units_per_split[s], "unit", "units"));
        if (units->merged_bytes || units->merged_pixels || units->merged_groups ||
            units->merged_records || units->merged_near)
            fprintf(f, "kept together: %zu by group, %zu identical files, %zu identical "
                       "pixels, %zu identical records, %zu near duplicates\n",
                    units->merged_groups, units->merged_bytes, units->merged_pixels,
                    units->merged_records, units->merged_near);
        if (p->near && near)
            fprintf(f, "near duplicates: %zu %s checked (%zu low-information, left to exact "
                       "copies), %zu %s, %zu passed the pixel check, %zu refused by the unit "
                       "rule\n",
                    near->pictures, plural(near->pictures, "picture", "pictures"), near->lowinfo,
                    near->candidates, plural(near->candidates, "candidate", "candidates"),
                    near->n,
                    near->per_verdict[KILN_NEARLINK_REFUSED_LABEL] +
                        near->per_verdict[KILN_NEARLINK_REFUSED_SIZE]);
        else if (!p->near)
            fprintf(f, "near duplicates: not checked (--near-duplicates off)\n");
        if (p->keep_manifest)
            fprintf(f, "kept from %s: %zu items in %zu units\n", p->keep_manifest,
                    rep->kept_items, rep->kept_units);
        cli_print_class_table(f, cat, ratios, p->nparts == 3);
    }
    fflush(f); /* the warnings below name units listed on f */
    if (p->near && near)
        warn_refused(stderr, cat, near);
    warn_units(stderr, cat, units, p, true, rep->mixed_units);
    warn_units(stderr, cat, units, p, false, rep->oversized_units);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (p->ratio[s] == 0 && (s != KILN_SPLIT_VAL || p->nparts == 3))
            cli_warn("the %s split has a zero share", kiln_split_name(s));
    warn_missing_classes(cat, p, rep);
    cli_check_shortcuts(f, cat, false, quiet);
}
