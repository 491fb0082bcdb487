/* Building and reading the scan and split records. */
#include "stage_record.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "textesc.h"
#include "version.h"

static json_t *text(const char *s)
{
    char *e = kiln_text_escape(s);
    json_t *j = json_string(e ? e : "");
    free(e);
    return j;
}

json_t *kiln_scan_record(const char *const *sources, size_t nsources,
                         const struct kiln_scan_opts *o, const struct kiln_scan_report *rep,
                         const struct kiln_catalog *cat)
{
    json_t *j = json_object();
    json_t *src = json_array();
    for (size_t i = 0; i < nsources; i++)
        json_array_append_new(src, text(sources[i]));
    json_object_set_new(j, "kiln_version", json_string(KILN_VERSION));
    json_object_set_new(j, "sources", src);
    json_object_set_new(j, "labels", json_string(kiln_label_rule_name(o->labels)));
    json_object_set_new(j, "labels_csv", o->labels_csv ? text(o->labels_csv) : json_null());
    json_object_set_new(j, "group_regex", o->group_regex ? text(o->group_regex) : json_null());
    json_object_set_new(j, "follow_links", json_boolean(o->walk.follow_links));
    json_object_set_new(j, "max_pixels", json_integer((json_int_t)o->limits.max_pixels));
    json_object_set_new(j, "max_side", json_integer(o->limits.max_side));
    json_object_set_new(j, "rows", json_integer((json_int_t)cat->n));
    json_t *st = json_object();
    for (int s = 0; s < KILN_ST_COUNT; s++)
        if (rep->status[s])
            json_object_set_new(st, kiln_status_name(s), json_integer((json_int_t)rep->status[s]));
    json_object_set_new(j, "status_counts", st);
    json_object_set_new(j, "hidden_skipped", json_integer((json_int_t)rep->hidden));
    json_object_set_new(j, "system_files_skipped", json_integer((json_int_t)rep->junk));
    if (o->group_regex) {
        json_object_set_new(j, "group_matched", json_integer((json_int_t)rep->group_matched));
        json_object_set_new(j, "group_unmatched", json_integer((json_int_t)rep->group_unmatched));
    }
    if (o->labels == KILN_LABELS_CSV) {
        json_object_set_new(j, "labels_csv_rows", json_integer((json_int_t)rep->csv_rows));
        json_object_set_new(j, "labels_csv_rows_without_file",
                            json_integer((json_int_t)rep->csv_rows_unused));
    }
    return j;
}

json_t *kiln_split_record(const struct kiln_split_params *p, const struct kiln_units *u,
                          const struct kiln_split_report *rep)
{
    json_t *j = json_object();
    char ratios[96];
    kiln_split_format_ratios(p, ratios, sizeof ratios);
    char seed[32];
    snprintf(seed, sizeof seed, "%llu", (unsigned long long)p->seed);
    json_object_set_new(j, "algorithm", json_string(KILN_SPLIT_ALGORITHM));
    /* The seed is a string: 64-bit values do not survive every JSON reader as numbers. */
    json_object_set_new(j, "seed", json_string(seed));
    json_object_set_new(j, "ratios", json_string(ratios));
    json_object_set_new(j, "parts", json_integer(p->nparts));
    json_object_set_new(j, "mode", json_string(kiln_split_mode_name(p->mode)));
    json_object_set_new(j, "stratify", json_boolean(p->stratify));
    json_object_set_new(j, "units", json_integer((json_int_t)rep->units));
    json_object_set_new(j, "merged_by_group", json_integer((json_int_t)u->merged_groups));
    json_object_set_new(j, "merged_by_bytes", json_integer((json_int_t)u->merged_bytes));
    json_object_set_new(j, "merged_by_pixels", json_integer((json_int_t)u->merged_pixels));
    json_object_set_new(j, "mixed_label_units", json_integer((json_int_t)rep->mixed_units));
    json_object_set_new(j, "oversized_units", json_integer((json_int_t)rep->oversized_units));
    json_t *items = json_object();
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (s != KILN_SPLIT_VAL || p->nparts == 3)
            json_object_set_new(items, kiln_split_name(s), json_integer((json_int_t)rep->items[s]));
    json_object_set_new(j, "items", items);
    return j;
}

int kiln_split_params_from_record(const json_t *split, struct kiln_split_params *p,
                                  struct kiln_err *err)
{
    memset(p, 0, sizeof *p);
    const char *alg = json_string_value(json_object_get(split, "algorithm"));
    const char *seed = json_string_value(json_object_get(split, "seed"));
    const char *ratios = json_string_value(json_object_get(split, "ratios"));
    const char *mode = json_string_value(json_object_get(split, "mode"));
    if (!alg || !seed || !ratios || !mode)
        return kiln_err_set(err, KILN_EINVAL, "split record lacks algorithm, seed, ratios or mode");
    if (strcmp(alg, KILN_SPLIT_ALGORITHM) != 0)
        return kiln_err_set(err, KILN_EUNSUPPORTED, "split algorithm %s is not %s", alg,
                            KILN_SPLIT_ALGORITHM);
    char *end;
    p->seed = strtoull(seed, &end, 10);
    if (!*seed || *end)
        return kiln_err_set(err, KILN_EINVAL, "bad recorded seed '%s'", seed);
    bool note;
    int rc = kiln_split_parse_ratios(ratios, p, &note, err);
    if (rc)
        return rc;
    p->mode = kiln_split_mode_parse(mode);
    if (p->mode < 0)
        return kiln_err_set(err, KILN_EINVAL, "bad recorded mode '%s'", mode);
    p->stratify = json_is_true(json_object_get(split, "stratify"));
    return KILN_OK;
}
