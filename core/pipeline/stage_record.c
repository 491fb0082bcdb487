/* Filling the scan and split records, and their output form. */
#include "stage_record.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../names.h"
#include "../textesc.h"
#include "../version.h"

/* A malloc'ed recorded form of user text (escaped); NULL only when memory runs out. */
static char *recorded(const char *raw, int *rc, struct kiln_err *err)
{
    char *e = *rc ? NULL : kiln_text_escape(raw);
    if (!e && !*rc)
        *rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    return e;
}

int kiln_record_scan(struct kiln_scan_record *r, const char *const *sources, size_t nsources,
                     const struct kiln_scan_opts *o, const struct kiln_scan_report *rep,
                     const struct kiln_catalog *cat, struct kiln_err *err)
{
    memset(r, 0, sizeof *r);
    int rc = KILN_OK;
    snprintf(r->kiln_version, sizeof r->kiln_version, "%s", KILN_VERSION);
    r->sources = calloc(nsources + 1, sizeof *r->sources);
    if (!r->sources)
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t i = 0; !rc && i < nsources; i++)
        if ((r->sources[i] = recorded(sources[i], &rc, err)))
            r->nsources++;
    snprintf(r->labels, sizeof r->labels, "%s", kiln_label_rule_name(o->labels));
    if (o->labels_csv)
        r->labels_csv = recorded(o->labels_csv, &rc, err);
    if (o->group_regex)
        r->group_regex = recorded(o->group_regex, &rc, err);
    r->follow_links = o->walk.follow_links;
    r->max_pixels = o->limits.max_pixels;
    r->max_side = o->limits.max_side;
    r->max_file_bytes = o->walk.max_file_bytes;
    r->rows = cat->n;
    memcpy(r->status, rep->status, sizeof r->status);
    r->hidden = rep->hidden;
    r->junk = rep->junk;
    r->outputs_skipped = rep->outputs;
    r->has_group_counts = o->group_regex != NULL;
    r->group_matched = rep->group_matched;
    r->group_unmatched = rep->group_unmatched;
    r->has_csv_counts = o->labels == KILN_LABELS_CSV;
    r->csv_rows = rep->csv_rows;
    r->csv_rows_unused = rep->csv_rows_unused;
    if (rc)
        kiln_scan_record_free(r);
    return rc;
}

int kiln_record_split(struct kiln_split_record *r, const struct kiln_split_params *p,
                      const struct kiln_units *u, const struct kiln_split_report *rep,
                      const struct kiln_nearlinks *near, const struct kiln_catalog *cat,
                      struct kiln_err *err)
{
    memset(r, 0, sizeof *r);
    int rc = KILN_OK;
    snprintf(r->algorithm, sizeof r->algorithm, "%s", KILN_SPLIT_ALGORITHM);
    r->seed = p->seed;
    kiln_split_format_ratios(p, r->ratios, sizeof r->ratios);
    r->parts = p->nparts;
    snprintf(r->mode, sizeof r->mode, "%s", kiln_split_mode_name(p->mode));
    r->stratify = p->stratify;
    if (p->near && !(r->near = kiln_manifest_near_json(p, near, cat)))
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot record the near-duplicate check");
    r->keep = p->keep_manifest != NULL;
    if (r->keep) {
        r->keep_manifest = recorded(p->keep_manifest, &rc, err);
        memcpy(r->keep_sha256, p->keep_sha256, sizeof r->keep_sha256);
        r->keep_to_test = p->keep_to_test;
        r->kept_units = rep->kept_units;
        r->kept_items = rep->kept_items;
        r->moved_items = rep->moved_items;
    }
    r->units = rep->units;
    r->merged_by_group = u->merged_groups;
    r->merged_by_bytes = u->merged_bytes;
    r->merged_by_pixels = u->merged_pixels;
    r->merged_by_records = u->merged_records;
    r->merged_by_near = u->merged_near;
    r->mixed_units = rep->mixed_units;
    r->oversized_units = rep->oversized_units;
    memcpy(r->items, rep->items, sizeof r->items);
    return rc;
}

int kiln_record_split_params(const struct kiln_split_record *r, struct kiln_split_params *p,
                             struct kiln_err *err)
{
    memset(p, 0, sizeof *p);
    if (strcmp(r->algorithm, KILN_SPLIT_ALGORITHM) != 0)
        return kiln_err_set(err, KILN_EUNSUPPORTED, "split algorithm %s is not %s", r->algorithm,
                            KILN_SPLIT_ALGORITHM);
    p->seed = r->seed;
    bool note;
    int rc = kiln_split_parse_ratios(r->ratios, p, &note, err);
    if (rc)
        return rc;
    p->mode = kiln_split_mode_parse(r->mode);
    if (p->mode < 0)
        return kiln_err_set(err, KILN_EINVAL, "bad recorded mode '%s'", r->mode);
    p->stratify = r->stratify;
    if (r->near) {
        const char *nalg = json_string_value(json_object_get(r->near, "algorithm"));
        if (!nalg || strcmp(nalg, KILN_NEAR_ALGORITHM) != 0)
            return kiln_err_set(err, KILN_EUNSUPPORTED, "near-duplicate algorithm %s is not %s",
                                nalg ? nalg : "(none)", KILN_NEAR_ALGORITHM);
    }
    kiln_near_params_from_record(r, &p->near, &p->near_params);
    return KILN_OK;
}

void kiln_near_params_from_record(const struct kiln_split_record *r, bool *on,
                                  struct kiln_nearlink_params *p)
{
    kiln_nearlink_defaults(p);
    *on = !r || r->near;
    if (!r || !r->near)
        return;
    struct {
        const char *key;
        unsigned *v, lo, hi;
    } f[] = {{"radius_full", &p->radius_full, 0, 16},
             {"radius_centre", &p->radius_centre, 0, 16},
             {"radius_turned", &p->radius_turned, 0, 16},
             {"radius_coarse", &p->radius_coarse, 0, 16},
             {"coarse_confirm", &p->coarse_confirm, 0, 63},
             {"max_pictures", &p->max_pictures, 2, UINT32_MAX}};
    for (size_t k = 0; k < sizeof f / sizeof f[0]; k++) {
        const json_t *v = json_object_get(r->near, f[k].key);
        if (json_is_integer(v) && json_integer_value(v) >= (json_int_t)f[k].lo &&
            (uint64_t)json_integer_value(v) <= f[k].hi)
            *f[k].v = (unsigned)json_integer_value(v);
    }
}

/* *out = the output form of s (malloc'ed); s NULL stays NULL. */
static int public_name(const struct kiln_names *n, const char *s, char **out, struct kiln_err *err)
{
    *out = NULL;
    if (!s)
        return KILN_OK;
    char buf[KILN_NAME_HASH_LEN];
    const char *shown;
    int rc = kiln_names_out(n, s, buf, &shown, err);
    if (!rc && !(*out = strdup(shown)))
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot copy the records");
    return rc;
}

static int public_scan(const struct kiln_scan_record *in, const struct kiln_names *n,
                       struct kiln_scan_record *out, struct kiln_err *err)
{
    *out = *in;
    out->sources = calloc(in->nsources + 1, sizeof *out->sources);
    out->nsources = 0;
    out->labels_csv = out->group_regex = NULL;
    int rc = out->sources ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "cannot copy the records");
    for (size_t i = 0; !rc && i < in->nsources; i++)
        if (!(rc = public_name(n, in->sources[i], &out->sources[i], err)))
            out->nsources++;
    if (!rc)
        rc = public_name(n, in->labels_csv, &out->labels_csv, err);
    if (!rc)
        rc = public_name(n, in->group_regex, &out->group_regex, err);
    return rc;
}

/* The near-duplicate record with the item names of its refused links in output form. */
static int public_near(const json_t *near, const struct kiln_names *n, json_t **out,
                       struct kiln_err *err)
{
    *out = json_deep_copy(near);
    if (!*out)
        return kiln_err_set(err, KILN_ENOMEM, "cannot copy the records");
    size_t i, k;
    json_t *link, *item;
    json_array_foreach(json_object_get(*out, "refused"), i, link)
    {
        json_array_foreach(json_object_get(link, "items"), k, item)
        {
            const char *name = json_string_value(json_object_get(item, "name"));
            char *shown = NULL;
            int rc = public_name(n, name, &shown, err);
            if (rc)
                return rc;
            if (shown)
                json_object_set_new(item, "name", json_string(shown));
            free(shown);
        }
    }
    return KILN_OK;
}

int kiln_record_public(const struct kiln_scan_record *scan, const struct kiln_split_record *split,
                       const struct kiln_names *n, struct kiln_scan_record *scan_out,
                       struct kiln_split_record *split_out, struct kiln_err *err)
{
    memset(scan_out, 0, sizeof *scan_out);
    memset(split_out, 0, sizeof *split_out);
    int rc = scan ? public_scan(scan, n, scan_out, err) : KILN_OK;
    if (!rc && split) {
        *split_out = *split;
        split_out->near = NULL;
        rc = public_name(n, split->keep_manifest, &split_out->keep_manifest, err);
        if (!rc && split->near)
            rc = public_near(split->near, n, &split_out->near, err);
    }
    if (rc) {
        kiln_scan_record_free(scan_out);
        kiln_split_record_free(split_out);
    }
    return rc;
}
