/* Building and reading the scan and split records. */
#include "stage_record.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../audit.h"
#include "../names.h"
#include "stage_scan.h"
#include "../textesc.h"
#include "../version.h"

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

static json_t *q20(int32_t v)
{
    return json_real((double)v / 1048576.0); /* exact: a binary fraction */
}

/* {"name": relative name, "split": split} of an item, as records list them. */
static json_t *item_entry(const struct kiln_item *it)
{
    char rel[4096];
    kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
    json_t *o = json_object();
    json_object_set_new(o, "name", text(rel));
    json_object_set_new(o, "split", json_string(kiln_split_name(it->split)));
    return o;
}

json_t *kiln_nearlink_record(const struct kiln_nearlink *l, const struct kiln_catalog *cat)
{
    json_t *j = json_object(), *items = json_array(), *searches = json_array();
    json_array_append_new(items, item_entry(&cat->items[l->c.a]));
    json_array_append_new(items, item_entry(&cat->items[l->c.b]));
    json_object_set_new(j, "items", items);
    json_object_set_new(j, "orientation", json_integer(l->c.orientation));
    json_object_set_new(j, "distance", json_integer(l->c.distance));
    json_object_set_new(j, "centre_distance", json_integer(l->c.centre_distance));
    json_object_set_new(j, "similarity", q20(kiln_nearmatch_global(&l->m)));
    json_object_set_new(j, "detail", q20(kiln_nearmatch_local(&l->m)));
    json_object_set_new(j, "hue", q20(l->m.hue));
    json_object_set_new(j, "trimmed", json_boolean(l->m.trimmed));
    json_object_set_new(j, "alignment", json_integer(l->m.warp));
    static const char *const names[] = {"full", "centre", "turned", "coarse", "coarse-centre"};
    for (int b = 0; b < 5; b++)
        if (l->c.sources >> b & 1)
            json_array_append_new(searches, json_string(names[b]));
    json_object_set_new(j, "searches", searches);
    json_object_set_new(j, "unit_rule", json_string(kiln_nearlink_verdict_name(l->verdict)));
    return j;
}

#define NEAR_LISTED 100

static json_t *near_record(const struct kiln_split_params *p, const struct kiln_nearlinks *l,
                           const struct kiln_catalog *cat)
{
    if (!p->near)
        return json_null();
    const struct kiln_nearlink_params *q = &p->near_params;
    json_t *j = json_object();
    json_object_set_new(j, "algorithm", json_string(KILN_NEAR_ALGORITHM));
    json_object_set_new(j, "radius_full", json_integer(q->radius_full));
    json_object_set_new(j, "radius_centre", json_integer(q->radius_centre));
    json_object_set_new(j, "radius_turned", json_integer(q->radius_turned));
    json_object_set_new(j, "radius_coarse", json_integer(q->radius_coarse));
    json_object_set_new(j, "coarse_confirm", json_integer(q->coarse_confirm));
    json_object_set_new(j, "max_pictures", json_integer(q->max_pictures));
    if (!l)
        return j;
    json_object_set_new(j, "pictures", json_integer((json_int_t)l->pictures));
    json_object_set_new(j, "low_information", json_integer((json_int_t)l->lowinfo));
    json_object_set_new(j, "candidates", json_integer((json_int_t)l->candidates));
    json_object_set_new(j, "links", json_integer((json_int_t)l->n));
    json_object_set_new(j, "linked",
                        json_integer((json_int_t)l->per_verdict[KILN_NEARLINK_LINKED]));
    json_object_set_new(j, "refused_different_labels",
                        json_integer((json_int_t)l->per_verdict[KILN_NEARLINK_REFUSED_LABEL]));
    json_object_set_new(j, "refused_too_many_pictures",
                        json_integer((json_int_t)l->per_verdict[KILN_NEARLINK_REFUSED_SIZE]));
    json_t *refused = json_array();
    size_t listed = 0, total = 0;
    for (size_t k = 0; k < l->n; k++)
        if (l->link[k].verdict != KILN_NEARLINK_LINKED && total++ < NEAR_LISTED) {
            json_array_append_new(refused, kiln_nearlink_record(&l->link[k], cat));
            listed++;
        }
    json_object_set_new(j, "refused", refused);
    json_object_set_new(j, "refused_not_listed", json_integer((json_int_t)(total - listed)));
    return j;
}

json_t *kiln_split_record(const struct kiln_split_params *p, const struct kiln_units *u,
                          const struct kiln_split_report *rep, const struct kiln_nearlinks *near,
                          const struct kiln_catalog *cat)
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
    json_object_set_new(j, "near_duplicates", near_record(p, near, cat));
    if (p->keep_manifest) {
        json_t *k = json_object();
        json_object_set_new(k, "manifest", text(p->keep_manifest ? p->keep_manifest : ""));
        json_object_set_new(k, "manifest_sha256", json_string(p->keep_sha256));
        json_object_set_new(k, "conflicts", json_string(p->keep_to_test ? "test" : "error"));
        json_object_set_new(k, "kept_units", json_integer((json_int_t)rep->kept_units));
        json_object_set_new(k, "kept_items", json_integer((json_int_t)rep->kept_items));
        json_object_set_new(k, "moved_items", json_integer((json_int_t)rep->moved_items));
        json_object_set_new(j, "keep", k);
    } else {
        json_object_set_new(j, "keep", json_null());
    }
    json_object_set_new(j, "units", json_integer((json_int_t)rep->units));
    json_object_set_new(j, "merged_by_group", json_integer((json_int_t)u->merged_groups));
    json_object_set_new(j, "merged_by_bytes", json_integer((json_int_t)u->merged_bytes));
    json_object_set_new(j, "merged_by_pixels", json_integer((json_int_t)u->merged_pixels));
    json_object_set_new(j, "merged_by_records", json_integer((json_int_t)u->merged_records));
    json_object_set_new(j, "merged_by_near_duplicates", json_integer((json_int_t)u->merged_near));
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
    const json_t *near = json_object_get(split, "near_duplicates");
    if (!json_is_null(near) && !json_is_object(near))
        return kiln_err_set(err, KILN_EINVAL, "bad recorded near_duplicates");
    const char *nalg = json_string_value(json_object_get(near, "algorithm"));
    if (json_is_object(near) && (!nalg || strcmp(nalg, KILN_NEAR_ALGORITHM) != 0))
        return kiln_err_set(err, KILN_EUNSUPPORTED, "near-duplicate algorithm %s is not %s",
                            nalg ? nalg : "(none)", KILN_NEAR_ALGORITHM);
    kiln_near_params_from_record(split, &p->near, &p->near_params);
    return KILN_OK;
}

void kiln_near_params_from_record(const json_t *split, bool *on, struct kiln_nearlink_params *p)
{
    kiln_nearlink_defaults(p);
    const json_t *near = json_object_get(split, "near_duplicates");
    *on = !json_is_null(near);
    if (!json_is_object(near))
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
        const json_t *v = json_object_get(near, f[k].key);
        if (json_is_integer(v) && json_integer_value(v) >= (json_int_t)f[k].lo &&
            (uint64_t)json_integer_value(v) <= f[k].hi)
            *f[k].v = (unsigned)json_integer_value(v);
    }
}

/* String fields of the scan and split records that never hold a name. */
static const char *const name_free[] = {"kiln_version", "labels",          "algorithm",
                                        "seed",         "ratios",          "mode",
                                        "conflicts",    "manifest_sha256"};

static bool is_name_free(const char *key)
{
    for (size_t i = 0; i < sizeof name_free / sizeof name_free[0]; i++)
        if (strcmp(key, name_free[i]) == 0)
            return true;
    return false;
}

/* Copies v; strings go through the names unless key says they cannot hold one. */
static json_t *public_value(const json_t *v, const char *key, const struct kiln_names *n,
                            struct kiln_err *err)
{
    if (json_is_string(v)) {
        if (key && is_name_free(key))
            return json_incref((json_t *)v);
        char buf[KILN_NAME_HASH_LEN];
        const char *out;
        return kiln_names_out(n, json_string_value(v), buf, &out, err) ? NULL : json_string(out);
    }
    if (json_is_array(v)) {
        json_t *a = json_array();
        size_t i;
        const json_t *e;
        json_array_foreach(v, i, e)
        {
            json_t *c = public_value(e, key, n, err);
            if (!c || json_array_append_new(a, c)) {
                json_decref(a);
                return NULL;
            }
        }
        return a;
    }
    if (json_is_object(v)) {
        json_t *o = json_object();
        const char *k;
        const json_t *e;
        json_object_foreach((json_t *)v, k, e)
        {
            json_t *c = public_value(e, k, n, err);
            if (!c || json_object_set_new(o, k, c)) {
                json_decref(o);
                return NULL;
            }
        }
        return o;
    }
    return json_deep_copy(v); /* numbers, booleans, null */
}

json_t *kiln_record_public(const json_t *record, const struct kiln_names *n, struct kiln_err *err)
{
    kiln_err_clear(err);
    json_t *out = json_object();
    static const char *const parts[] = {"scan", "split"};
    for (size_t i = 0; out && i < 2; i++) {
        const json_t *part = json_object_get(record, parts[i]);
        json_t *copy = part ? public_value(part, NULL, n, err) : json_null();
        if (!copy) {
            json_decref(out);
            if (err->code == KILN_OK) /* jansson could not allocate */
                kiln_err_set(err, KILN_ENOMEM, "cannot copy the %s record", parts[i]);
            return NULL;
        }
        json_object_del(copy, "audit");
        json_object_set_new(out, parts[i], copy);
    }
    return out;
}

#define AUDIT_LISTED 100

json_t *kiln_audit_record(const struct kiln_audit *a, const struct kiln_catalog *cat)
{
    json_t *j = json_object();
    json_object_set_new(j, "near_duplicates_checked", json_boolean(a->near_checked));
    json_object_set_new(j, "clean", json_boolean(a->nleaks == 0));
    json_t *counts = json_object();
    for (int k = 0; k < KILN_LEAK_KINDS; k++)
        json_object_set_new(counts, kiln_leak_kind_name(k), json_integer((json_int_t)a->per_kind[k]));
    json_object_set_new(j, "spanning_splits", counts);
    json_t *missing = json_array();
    for (int s = 0; s < KILN_NSPLITS; s++)
        for (size_t c = 0; c < a->nclasses; c++)
            if (a->missing[(size_t)s * a->nclasses + c]) {
                json_t *m = json_object();
                json_object_set_new(m, "split", json_string(kiln_split_name(s)));
                json_object_set_new(m, "class", text(cat->classes[c]));
                json_array_append_new(missing, m);
            }
    json_object_set_new(j, "classes_missing", missing);
    json_t *list = json_array();
    for (size_t l = 0; l < a->nleaks && l < AUDIT_LISTED; l++) {
        json_t *f = json_object(), *items = json_array();
        json_object_set_new(f, "kind", json_string(kiln_leak_kind_name(a->leaks[l].kind)));
        for (size_t k = 0; k < a->leaks[l].count; k++)
            json_array_append_new(items, item_entry(&cat->items[a->items[a->leaks[l].first + k]]));
        json_object_set_new(f, "items", items);
        if (a->leaks[l].kind == KILN_LEAK_NEAR)
            json_object_set_new(f, "link", kiln_nearlink_record(&a->leaks[l].near, cat));
        json_array_append_new(list, f);
    }
    json_object_set_new(j, "findings", list);
    json_object_set_new(j, "findings_not_listed",
                        json_integer((json_int_t)(a->nleaks > AUDIT_LISTED ? a->nleaks - AUDIT_LISTED : 0)));
    return j;
}
