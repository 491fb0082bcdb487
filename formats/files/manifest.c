/* The one place kiln's JSON is written and read (jansson): manifest.json, catalog.json (the
 * scan and split records), the .kten metadata block, and the recipe and statistics they hold. */
#include "manifest.h"

#include <archive.h>
#include <errno.h>
#include <libdeflate.h>
#include <openssl/crypto.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <zlib.h>

#include "../../core/resize.h"
#include "../../core/split.h"
#include "../../core/textesc.h"
#include "../../core/version.h"
#include "../decoders/decoder.h"
#include "outfile.h"
#include "owner.h"
#include "../sources/source.h"

const char *const kiln_manifest_split_files[3] = {KILN_FILE_TRAIN, KILN_FILE_VAL, KILN_FILE_TEST};

char *kiln_json_dump(const json_t *doc)
{
    return json_dumps(doc, KILN_JSON_FLAGS);
}

int kiln_json_save(const char *path, const json_t *doc, struct kiln_err *err)
{
    char *text = kiln_json_dump(doc);
    if (!text)
        return kiln_err_set(err, KILN_ENOMEM, "cannot serialise %s", path);
    struct kiln_outfile of;
    int rc = kiln_outfile_open(&of, path, err);
    if (rc) {
        free(text);
        return rc;
    }
    size_t len = strlen(text);
    rc = kiln_outfile_write_at(&of, text, len, 0, err);
    if (!rc)
        rc = kiln_outfile_write_at(&of, "\n", 1, len, err);
    free(text);
    if (rc) {
        kiln_outfile_abort(&of);
        return rc;
    }
    return kiln_outfile_commit(&of, err);
}

int kiln_json_load(const char *path, json_t **doc, struct kiln_err *err)
{
    /* Opened here, not by jansson, so that a missing file or a folder is named as such
     * (jansson reports those with line -1). */
    *doc = NULL;
    FILE *f = fopen(path, "rb");
    if (!f)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path);
    struct stat st;
    if (fstat(fileno(f), &st) != 0) {
        int e = errno;
        fclose(f);
        return kiln_err_sys(err, KILN_EIO, e, "cannot read %s", path);
    }
    if (!S_ISREG(st.st_mode)) {
        fclose(f);
        return kiln_err_set(err, KILN_EINVAL, "%s is %s, not a JSON file", path,
                            S_ISDIR(st.st_mode) ? "a folder" : "not a regular file");
    }
    json_error_t je;
    *doc = json_loadf(f, JSON_REJECT_DUPLICATES, &je);
    const bool read_error = ferror(f);
    fclose(f);
    if (!*doc && read_error)
        return kiln_err_sys(err, KILN_EIO, EIO, "cannot read %s", path);
    if (!*doc)
        return kiln_err_set(err, KILN_EINVAL, "%s is not valid JSON: %s (line %d, column %d)",
                            path, je.text, je.line, je.column);
    if (!json_is_object(*doc)) {
        json_decref(*doc);
        *doc = NULL;
        return kiln_err_set(err, KILN_EINVAL, "%s: top level is not a JSON object", path);
    }
    return KILN_OK;
}

int kiln_manifest_load(const char *path, json_t **doc, struct kiln_err *err)
{
    int rc = kiln_json_load(path, doc, err);
    if (rc)
        return rc;
    const char *format = kiln_json_str(*doc, KILN_MANIFEST_FORMAT_KEY);
    if (format && strcmp(format, KILN_MANIFEST_FORMAT) == 0)
        return KILN_OK;
    /* kiln 0.1.0 wrote no identifier: "manifest_version": 1 and "kiln_version" say it is its. */
    const json_t *v = json_object_get(*doc, "manifest_version");
    if (!format && json_is_integer(v) && json_integer_value(v) == 1 &&
        kiln_json_str(*doc, "kiln_version"))
        return KILN_OK;
    char keys[160] = "";
    size_t used = 0, k = 0;
    const char *key;
    json_t *val;
    json_object_foreach(*doc, key, val)
    {
        if (k++ == 4 || used + strlen(key) + 8 >= sizeof keys) {
            snprintf(keys + used, sizeof keys - used, ", ...");
            break;
        }
        used += (size_t)snprintf(keys + used, sizeof keys - used, "%s%s", k > 1 ? ", " : "", key);
    }
    /* format points into the document: the message is made before it is freed. */
    if (format)
        rc = kiln_err_set(err, KILN_EINVAL, "%s is not a kiln manifest: its \"%s\" is \"%.60s\"",
                          path, KILN_MANIFEST_FORMAT_KEY, format);
    else
        rc = kiln_err_set(err, KILN_EINVAL,
                          "%s is not a kiln manifest: it has no \"%s\": \"%s\" (its keys: %s)",
                          path, KILN_MANIFEST_FORMAT_KEY, KILN_MANIFEST_FORMAT,
                          keys[0] ? keys : "none");
    json_decref(*doc);
    *doc = NULL;
    return rc;
}

const char *kiln_json_str(const json_t *obj, const char *key)
{
    return json_string_value(json_object_get(obj, key));
}

static json_t *levels(const uint8_t *v, unsigned n)
{
    json_t *a = json_array();
    for (unsigned i = 0; i < n; i++)
        json_array_append_new(a, json_integer(v[i]));
    return a;
}

json_t *kiln_recipe_to_json(const struct kiln_recipe *r)
{
    char size[32];
    snprintf(size, sizeof size, "%ux%u", r->width, r->height);
    json_t *j = json_object();
    json_object_set_new(j, "size", json_string(size));
    json_object_set_new(j, "fit", json_string(kiln_fit_name(r->fit)));
    json_object_set_new(j, "filter", json_string(kiln_filter_name(r->filter)));
    json_object_set_new(j, "channels", json_integer(r->channels));
    json_object_set_new(j, "depth", json_integer(r->depth));
    json_object_set_new(j, "dtype", json_string(kiln_out_type_name(r->dtype)));
    json_object_set_new(j, "layout", json_string(kiln_layout_name(r->layout)));
    json_object_set_new(j, "dct_scale", json_boolean(r->dct_scale));
    json_object_set_new(j, "orient", json_boolean(r->orient));
    json_object_set_new(j, "pad_value", levels(r->pad_value, 4));
    json_object_set_new(j, "background", levels(r->background, 3));
    json_object_set_new(j, "max_pixels", json_integer((json_int_t)r->max_pixels));
    json_object_set_new(j, "max_side", json_integer(r->max_side));
    json_object_set_new(j, "resample_bits", json_integer(KILN_RESIZE_BITS));
    json_object_set_new(j, "hash_paths", json_boolean(r->hash_paths));
    return j;
}

static int levels_from(const json_t *a, unsigned n, char *buf, size_t len)
{
    if (!json_is_array(a) || json_array_size(a) != n)
        return -1;
    size_t used = 0;
    for (unsigned i = 0; i < n; i++) {
        const json_t *v = json_array_get(a, i);
        if (!json_is_integer(v))
            return -1;
        used += (size_t)snprintf(buf + used, len - used, "%s%lld", i ? "," : "",
                                 (long long)json_integer_value(v));
        if (used >= len)
            return -1;
    }
    return 0;
}

int kiln_recipe_from_json(const json_t *j, struct kiln_recipe *r, struct kiln_err *err)
{
    kiln_recipe_defaults(r);
    if (!json_is_object(j))
        return kiln_err_set(err, KILN_EINVAL, "recipe is not a JSON object");
    static const char *const strings[] = {"size", "fit", "filter", "dtype", "layout"};
    for (size_t i = 0; i < sizeof strings / sizeof strings[0]; i++) {
        const char *v = kiln_json_str(j, strings[i]);
        if (!v)
            return kiln_err_set(err, KILN_EINVAL, "recipe has no '%s'", strings[i]);
        int rc = kiln_recipe_set(r, strings[i], v, err);
        if (rc)
            return rc;
    }
    static const char *const ints[] = {"channels", "depth", "max_pixels", "max_side"};
    static const char *const keys[] = {"channels", "depth", "max-pixels", "max-side"};
    for (size_t i = 0; i < 4; i++) {
        const json_t *v = json_object_get(j, ints[i]);
        if (!json_is_integer(v))
            return kiln_err_set(err, KILN_EINVAL, "recipe has no integer '%s'", ints[i]);
        char buf[32];
        snprintf(buf, sizeof buf, "%lld", (long long)json_integer_value(v));
        int rc = kiln_recipe_set(r, keys[i], buf, err);
        if (rc)
            return rc;
    }
    const json_t *dct = json_object_get(j, "dct_scale"), *orient = json_object_get(j, "orient");
    if (!json_is_boolean(dct) || !json_is_boolean(orient))
        return kiln_err_set(err, KILN_EINVAL, "recipe has no dct_scale or orient switch");
    r->dct_scale = json_is_true(dct);
    r->orient = json_is_true(orient);
    r->hash_paths = json_is_true(json_object_get(j, "hash_paths"));
    char buf[64];
    if (levels_from(json_object_get(j, "pad_value"), 4, buf, sizeof buf) ||
        kiln_recipe_set(r, "pad-value", buf, err))
        return kiln_err_set(err, KILN_EINVAL, "recipe has a bad pad_value");
    if (levels_from(json_object_get(j, "background"), 3, buf, sizeof buf) ||
        kiln_recipe_set(r, "background", buf, err))
        return kiln_err_set(err, KILN_EINVAL, "recipe has a bad background");
    const json_t *bits = json_object_get(j, "resample_bits");
    if (bits && json_integer_value(bits) != KILN_RESIZE_BITS)
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "recipe used %lld-bit resampling; this kiln uses %d",
                            (long long)json_integer_value(bits), KILN_RESIZE_BITS);
    return kiln_recipe_finish(r, err);
}

static json_t *u128_string(unsigned __int128 v)
{
    char buf[48], *p = buf + sizeof buf - 1;
    *p = '\0';
    do {
        *--p = (char)('0' + (int)(v % 10));
        v /= 10;
    } while (v);
    return json_string(p);
}

json_t *kiln_stats_to_json(const struct kiln_stats *s, double maxval, struct kiln_err *err)
{
    json_t *chans = json_array();
    for (unsigned c = 0; c < s->channels; c++) {
        struct kiln_stats_summary out, unit;
        if (kiln_stats_summarize(&s->ch[c], 1.0, &out, err) ||
            kiln_stats_summarize(&s->ch[c], maxval, &unit, err)) {
            json_decref(chans);
            return NULL;
        }
        /* Undefined values are null, never 0: an empty split has no mean, minimum or spread,
         * and one sample has no sample standard deviation (docs/statistics.md). */
        const bool any = out.count > 0, two = out.count > 1;
        json_t *o = json_object();
        json_object_set_new(o, "count", json_integer((json_int_t)s->ch[c].count));
        json_object_set_new(o, "sum", u128_string(s->ch[c].sum));
        json_object_set_new(o, "sum_of_squares", u128_string(s->ch[c].sumsq));
        json_object_set_new(o, "min", any ? json_integer(out.min) : json_null());
        json_object_set_new(o, "max", any ? json_integer(out.max) : json_null());
        json_object_set_new(o, "mean", any ? json_real(out.mean) : json_null());
        json_object_set_new(o, "std", any ? json_real(out.std_pop) : json_null());
        json_object_set_new(o, "std_sample", two ? json_real(out.std_sample) : json_null());
        json_object_set_new(o, "mean_unit", any ? json_real(unit.mean) : json_null());
        json_object_set_new(o, "std_unit", any ? json_real(unit.std_pop) : json_null());
        json_object_set_new(o, "std_sample_unit", two ? json_real(unit.std_sample) : json_null());
        json_array_append_new(chans, o);
    }
    return chans;
}

size_t kiln_library_versions(struct kiln_library_version *out, size_t max)
{
    size_t n = kiln_decoder_library_versions(out, max);
    /* The numbers the loaded libraries report, without names or dates, so that a record
     * compares with a package version (docs/formats.md, "libraries"). */
    const int a = archive_version_number();
    static const char *const names[5] = {"zlib", "libdeflate", "libarchive", "openssl",
                                         "jansson"};
    char numbers[5][48];
    snprintf(numbers[0], sizeof numbers[0], "%s", zlibVersion());
    /* libdeflate reports no version at run time; the header's is the installed package's. */
    snprintf(numbers[1], sizeof numbers[1], "%s", LIBDEFLATE_VERSION_STRING);
    snprintf(numbers[2], sizeof numbers[2], "%d.%d.%d", a / 1000000, a / 1000 % 1000, a % 1000);
    snprintf(numbers[3], sizeof numbers[3], "%s", OpenSSL_version(OPENSSL_VERSION_STRING));
    snprintf(numbers[4], sizeof numbers[4], "%s", jansson_version_str());
    for (size_t i = 0; i < 5 && n < max; i++, n++) {
        out[n].library = names[i];
        memcpy(out[n].version, numbers[i], sizeof out[n].version);
    }
    return n;
}

json_t *kiln_library_versions_json(void)
{
    json_t *j = json_object();
    struct kiln_library_version v[KILN_MAX_LIBRARIES];
    size_t n = kiln_library_versions(v, KILN_MAX_LIBRARIES);
    for (size_t i = 0; i < n; i++)
        json_object_set_new(j, v[i].library, json_string(v[i].version));
    return j;
}

/* ---- typed records ------------------------------------------------------------------------ */

/* A name or other user text in its recorded form: escaped (core/textesc.h). */
static json_t *text(const char *s)
{
    char *e = kiln_text_escape(s);
    json_t *j = json_string(e ? e : "");
    free(e);
    return j;
}

static json_t *count(size_t n)
{
    return json_integer((json_int_t)n);
}

static json_t *string_or_null(const char *s)
{
    return s ? json_string(s) : json_null();
}

void kiln_scan_record_free(struct kiln_scan_record *r)
{
    if (!r)
        return;
    for (size_t i = 0; i < r->nsources; i++)
        free(r->sources[i]);
    free(r->sources);
    free(r->labels_csv);
    free(r->group_regex);
    memset(r, 0, sizeof *r);
}

void kiln_split_record_free(struct kiln_split_record *r)
{
    if (!r)
        return;
    free(r->keep_manifest);
    json_decref(r->near);
    memset(r, 0, sizeof *r);
}

static json_t *scan_json(const struct kiln_scan_record *r)
{
    json_t *j = json_object(), *src = json_array(), *st = json_object();
    for (size_t i = 0; i < r->nsources; i++)
        json_array_append_new(src, json_string(r->sources[i]));
    json_object_set_new(j, "kiln_version", json_string(r->kiln_version));
    json_object_set_new(j, "sources", src);
    json_object_set_new(j, "labels", json_string(r->labels));
    json_object_set_new(j, "labels_csv", string_or_null(r->labels_csv));
    json_object_set_new(j, "group_regex", string_or_null(r->group_regex));
    json_object_set_new(j, "follow_links", json_boolean(r->follow_links));
    json_object_set_new(j, "max_pixels", json_integer((json_int_t)r->max_pixels));
    json_object_set_new(j, "max_side", json_integer(r->max_side));
    if (r->max_file_bytes)
        json_object_set_new(j, "max_file_bytes", json_integer((json_int_t)r->max_file_bytes));
    json_object_set_new(j, "rows", count(r->rows));
    for (int s = 0; s < KILN_ST_COUNT; s++)
        if (r->status[s])
            json_object_set_new(st, kiln_status_name(s), count(r->status[s]));
    json_object_set_new(j, "status_counts", st);
    json_object_set_new(j, "hidden_skipped", count(r->hidden));
    json_object_set_new(j, "system_files_skipped", count(r->junk));
    if (r->outputs_skipped)
        json_object_set_new(j, "kiln_outputs_skipped", count(r->outputs_skipped));
    if (r->has_group_counts) {
        json_object_set_new(j, "group_matched", count(r->group_matched));
        json_object_set_new(j, "group_unmatched", count(r->group_unmatched));
    }
    if (r->has_csv_counts) {
        json_object_set_new(j, "labels_csv_rows", count(r->csv_rows));
        json_object_set_new(j, "labels_csv_rows_without_file", count(r->csv_rows_unused));
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

json_t *kiln_manifest_nearlink_json(const struct kiln_nearlink *l, const struct kiln_catalog *cat)
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

/* Links the unit rule refused, listed with their evidence; the rest are counted. */
#define NEAR_LISTED 100

json_t *kiln_manifest_near_json(const struct kiln_split_params *p, const struct kiln_nearlinks *l,
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
    json_object_set_new(j, "pictures", count(l->pictures));
    json_object_set_new(j, "low_information", count(l->lowinfo));
    json_object_set_new(j, "candidates", count(l->candidates));
    json_object_set_new(j, "links", count(l->n));
    json_object_set_new(j, "linked", count(l->per_verdict[KILN_NEARLINK_LINKED]));
    json_object_set_new(j, "refused_different_labels",
                        count(l->per_verdict[KILN_NEARLINK_REFUSED_LABEL]));
    json_object_set_new(j, "refused_too_many_pictures",
                        count(l->per_verdict[KILN_NEARLINK_REFUSED_SIZE]));
    json_t *refused = json_array();
    size_t listed = 0, total = 0;
    for (size_t k = 0; k < l->n; k++)
        if (l->link[k].verdict != KILN_NEARLINK_LINKED && total++ < NEAR_LISTED) {
            json_array_append_new(refused, kiln_manifest_nearlink_json(&l->link[k], cat));
            listed++;
        }
    json_object_set_new(j, "refused", refused);
    json_object_set_new(j, "refused_not_listed", count(total - listed));
    return j;
}

static json_t *split_json(const struct kiln_split_record *r)
{
    json_t *j = json_object();
    char seed[32];
    snprintf(seed, sizeof seed, "%llu", (unsigned long long)r->seed);
    json_object_set_new(j, "algorithm", json_string(r->algorithm));
    json_object_set_new(j, "seed", json_string(seed));
    json_object_set_new(j, "ratios", json_string(r->ratios));
    json_object_set_new(j, "parts", json_integer(r->parts));
    json_object_set_new(j, "mode", json_string(r->mode));
    json_object_set_new(j, "stratify", json_boolean(r->stratify));
    json_object_set_new(j, "near_duplicates", r->near ? json_deep_copy(r->near) : json_null());
    if (r->keep) {
        json_t *k = json_object();
        json_object_set_new(k, "manifest", json_string(r->keep_manifest ? r->keep_manifest : ""));
        json_object_set_new(k, "manifest_sha256", json_string(r->keep_sha256));
        json_object_set_new(k, "conflicts", json_string(r->keep_to_test ? "test" : "error"));
        json_object_set_new(k, "kept_units", count(r->kept_units));
        json_object_set_new(k, "kept_items", count(r->kept_items));
        json_object_set_new(k, "moved_items", count(r->moved_items));
        json_object_set_new(j, "keep", k);
    } else {
        json_object_set_new(j, "keep", json_null());
    }
    json_object_set_new(j, "units", count(r->units));
    json_object_set_new(j, "merged_by_group", count(r->merged_by_group));
    json_object_set_new(j, "merged_by_bytes", count(r->merged_by_bytes));
    json_object_set_new(j, "merged_by_pixels", count(r->merged_by_pixels));
    json_object_set_new(j, "merged_by_records", count(r->merged_by_records));
    json_object_set_new(j, "merged_by_near_duplicates", count(r->merged_by_near));
    json_object_set_new(j, "mixed_label_units", count(r->mixed_units));
    json_object_set_new(j, "oversized_units", count(r->oversized_units));
    json_t *items = json_object();
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (s != KILN_SPLIT_VAL || r->parts == 3)
            json_object_set_new(items, kiln_split_name(s), count(r->items[s]));
    json_object_set_new(j, "items", items);
    return j;
}

/* Findings listed by name; the rest are counted (findings_not_listed). */
#define AUDIT_LISTED 100

static json_t *audit_json(const struct kiln_audit *a, const struct kiln_catalog *cat)
{
    json_t *j = json_object(), *counts = json_object(), *missing = json_array();
    json_object_set_new(j, "near_duplicates_checked", json_boolean(a->near_checked));
    json_object_set_new(j, "clean", json_boolean(a->nleaks == 0));
    for (int k = 0; k < KILN_LEAK_KINDS; k++)
        json_object_set_new(counts, kiln_leak_kind_name(k), count(a->per_kind[k]));
    json_object_set_new(j, "spanning_splits", counts);
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
            json_object_set_new(f, "link", kiln_manifest_nearlink_json(&a->leaks[l].near, cat));
        json_array_append_new(list, f);
    }
    json_object_set_new(j, "findings", list);
    json_object_set_new(j, "findings_not_listed",
                        count(a->nleaks > AUDIT_LISTED ? a->nleaks - AUDIT_LISTED : 0));
    return j;
}

int kiln_manifest_save_catalog_record(const char *path, const struct kiln_catalog_record *r,
                                      struct kiln_err *err)
{
    json_t *doc = json_object();
    json_object_set_new(doc, "catalog", json_string(r->catalog));
    json_object_set_new(doc, "scan", r->scan ? scan_json(r->scan) : json_null());
    json_t *split = r->split ? split_json(r->split) : json_null();
    if (r->split && r->audit)
        json_object_set_new(split, "audit", audit_json(r->audit, r->audit_cat));
    json_object_set_new(doc, "split", split);
    int rc = kiln_json_save(path, doc, err);
    json_decref(doc);
    return rc;
}

/* ---- reading the records back ------------------------------------------------------------- */

/* Reads a typed field of a record object; the first missing or mistyped field names itself. */
struct reader {
    const json_t *obj;
    const char *what; /* "scan record" */
    struct kiln_err *err;
    int rc;
};

static const json_t *field(struct reader *r, const char *key, int type)
{
    const json_t *v = json_object_get(r->obj, key);
    if (r->rc)
        return NULL;
    if (!v || json_typeof(v) != (json_type)type) {
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has no %s '%s'", r->what,
                             type == JSON_STRING ? "text" : type == JSON_INTEGER ? "number"
                             : type == JSON_ARRAY ? "list" : "object", key);
        return NULL;
    }
    return v;
}

static size_t read_count(struct reader *r, const char *key)
{
    const json_t *v = field(r, key, JSON_INTEGER);
    if (v && json_integer_value(v) < 0)
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has a negative '%s'", r->what, key);
    return v && !r->rc ? (size_t)json_integer_value(v) : 0;
}

static bool read_bool(struct reader *r, const char *key)
{
    const json_t *v = json_object_get(r->obj, key);
    if (!r->rc && !json_is_boolean(v))
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has no switch '%s'", r->what, key);
    return json_is_true(v);
}

static void read_text(struct reader *r, const char *key, char *buf, size_t len)
{
    const json_t *v = field(r, key, JSON_STRING);
    if (v && json_string_length(v) >= len)
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has a '%s' too long", r->what, key);
    if (v && !r->rc)
        memcpy(buf, json_string_value(v), json_string_length(v) + 1);
}

/* A string or null: *out is a malloc'ed copy, or NULL for null. */
static void read_optional(struct reader *r, const char *key, char **out)
{
    const json_t *v = json_object_get(r->obj, key);
    *out = NULL;
    if (r->rc || json_is_null(v))
        return;
    if (!json_is_string(v)) {
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has no text or null '%s'", r->what,
                             key);
        return;
    }
    if (!(*out = strdup(json_string_value(v))))
        r->rc = kiln_err_set(r->err, KILN_ENOMEM, "out of memory");
}

static void read_scan(struct reader *r, struct kiln_scan_record *s)
{
    read_text(r, "kiln_version", s->kiln_version, sizeof s->kiln_version);
    const json_t *src = field(r, "sources", JSON_ARRAY);
    if (src && !(s->sources = calloc(json_array_size(src) + 1, sizeof *s->sources)))
        r->rc = kiln_err_set(r->err, KILN_ENOMEM, "out of memory");
    for (size_t i = 0; !r->rc && src && i < json_array_size(src); i++) {
        const char *v = json_string_value(json_array_get(src, i));
        if (!v)
            r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s lists a source that is not text",
                                 r->what);
        else if (!(s->sources[s->nsources++] = strdup(v)))
            r->rc = kiln_err_set(r->err, KILN_ENOMEM, "out of memory");
    }
    read_text(r, "labels", s->labels, sizeof s->labels);
    read_optional(r, "labels_csv", &s->labels_csv);
    read_optional(r, "group_regex", &s->group_regex);
    s->follow_links = read_bool(r, "follow_links");
    s->max_pixels = read_count(r, "max_pixels");
    s->max_side = (uint32_t)read_count(r, "max_side");
    if (json_object_get(r->obj, "max_file_bytes")) /* recorded since kiln 0.1.0's catalogues */
        s->max_file_bytes = read_count(r, "max_file_bytes");
    s->rows = read_count(r, "rows");
    const json_t *st = field(r, "status_counts", JSON_OBJECT);
    const char *name;
    const json_t *v;
    json_object_foreach((json_t *)st, name, v)
    {
        const int k = kiln_status_parse(name);
        if (k < 0 || !json_is_integer(v) || json_integer_value(v) < 0) {
            r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s counts an unknown status '%s'",
                                 r->what, name);
            break;
        }
        s->status[k] = (size_t)json_integer_value(v);
    }
    s->hidden = read_count(r, "hidden_skipped");
    s->junk = read_count(r, "system_files_skipped");
    if (json_object_get(r->obj, "kiln_outputs_skipped"))
        s->outputs_skipped = read_count(r, "kiln_outputs_skipped");
    if ((s->has_group_counts = json_object_get(r->obj, "group_matched") != NULL)) {
        s->group_matched = read_count(r, "group_matched");
        s->group_unmatched = read_count(r, "group_unmatched");
    }
    if ((s->has_csv_counts = json_object_get(r->obj, "labels_csv_rows") != NULL)) {
        s->csv_rows = read_count(r, "labels_csv_rows");
        s->csv_rows_unused = read_count(r, "labels_csv_rows_without_file");
    }
}

static void read_keep(struct reader *r, struct kiln_split_record *s)
{
    const json_t *keep = json_object_get(r->obj, "keep");
    if (r->rc || json_is_null(keep))
        return;
    struct reader k = {keep, "split record's keep", r->err, 0};
    if (!json_is_object(keep))
        k.rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has no object or null 'keep'", r->what);
    s->keep = true;
    read_optional(&k, "manifest", &s->keep_manifest);
    read_text(&k, "manifest_sha256", s->keep_sha256, sizeof s->keep_sha256);
    char conflicts[8] = "";
    read_text(&k, "conflicts", conflicts, sizeof conflicts);
    s->keep_to_test = strcmp(conflicts, "test") == 0;
    s->kept_units = read_count(&k, "kept_units");
    s->kept_items = read_count(&k, "kept_items");
    s->moved_items = read_count(&k, "moved_items");
    r->rc = k.rc;
}

static void read_split(struct reader *r, struct kiln_split_record *s)
{
    read_text(r, "algorithm", s->algorithm, sizeof s->algorithm);
    const json_t *seed = field(r, "seed", JSON_STRING);
    char *end = NULL;
    if (seed)
        s->seed = strtoull(json_string_value(seed), &end, 10);
    if (seed && (!json_string_value(seed)[0] || *end || json_string_value(seed)[0] == '-'))
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "bad recorded seed '%s'",
                             json_string_value(seed));
    read_text(r, "ratios", s->ratios, sizeof s->ratios);
    s->parts = (unsigned)read_count(r, "parts");
    read_text(r, "mode", s->mode, sizeof s->mode);
    s->stratify = read_bool(r, "stratify");
    const json_t *near = json_object_get(r->obj, "near_duplicates");
    if (json_is_object(near))
        s->near = json_deep_copy(near);
    else if (!json_is_null(near) && !r->rc)
        r->rc = kiln_err_set(r->err, KILN_EINVAL, "the %s has no object or null 'near_duplicates'",
                             r->what);
    read_keep(r, s);
    s->units = read_count(r, "units");
    s->merged_by_group = read_count(r, "merged_by_group");
    s->merged_by_bytes = read_count(r, "merged_by_bytes");
    s->merged_by_pixels = read_count(r, "merged_by_pixels");
    s->merged_by_records = read_count(r, "merged_by_records");
    s->merged_by_near = read_count(r, "merged_by_near_duplicates");
    s->mixed_units = read_count(r, "mixed_label_units");
    s->oversized_units = read_count(r, "oversized_units");
    struct reader items = {field(r, "items", JSON_OBJECT), "split record's items", r->err, r->rc};
    for (int k = 0; k < KILN_NSPLITS && !items.rc; k++)
        if (k != KILN_SPLIT_VAL || s->parts == 3)
            s->items[k] = read_count(&items, kiln_split_name(k));
    r->rc = items.rc;
}

int kiln_manifest_read_records(const json_t *doc, struct kiln_scan_record **scan,
                               struct kiln_split_record **split, struct kiln_err *err)
{
    *scan = NULL;
    *split = NULL;
    const json_t *sj = json_object_get(doc, "scan"), *pj = json_object_get(doc, "split");
    struct reader r = {sj, "scan record", err, 0};
    if (sj && !json_is_null(sj)) {
        if (!json_is_object(sj))
            r.rc = kiln_err_set(err, KILN_EINVAL, "the scan record is not an object");
        else if (!(*scan = calloc(1, sizeof **scan)))
            r.rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
        else
            read_scan(&r, *scan);
    }
    r.obj = pj;
    r.what = "split record";
    if (!r.rc && pj && !json_is_null(pj)) {
        if (!json_is_object(pj))
            r.rc = kiln_err_set(err, KILN_EINVAL, "the split record is not an object");
        else if (!(*split = calloc(1, sizeof **split)))
            r.rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
        else
            read_split(&r, *split);
    }
    if (r.rc) {
        kiln_scan_record_free(*scan);
        kiln_split_record_free(*split);
        free(*scan);
        free(*split);
        *scan = NULL;
        *split = NULL;
    }
    return r.rc;
}

/* ---- manifest.json and the .kten metadata ------------------------------------------------- */

static json_t *classes_json(const struct kiln_catalog *cat)
{
    json_t *a = json_array();
    for (size_t c = 0; c < cat->nclasses; c++)
        json_array_append_new(a, text(cat->classes[c]));
    return a;
}

static json_t *class_counts(const struct kiln_catalog *cat, int split)
{
    json_t *per = json_object();
    size_t *n = calloc(cat->nclasses + 1, sizeof *n);
    if (!n)
        return per;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].split == split)
            n[cat->items[i].class_index + 1]++;
    for (size_t c = 0; c < cat->nclasses; c++)
        json_object_set_new(per, cat->classes[c], count(n[c + 1]));
    if (n[0])
        json_object_set_new(per, "(unlabelled)", count(n[0]));
    free(n);
    return per;
}

/* The statistics object of split s (manifest "statistics", .kten "statistics"). */
static json_t *split_stats(const struct kiln_manifest *m, int s, struct kiln_err *err)
{
    const bool deep = m->recipe->depth == 16;
    json_t *ch = kiln_stats_to_json(&m->stats[s], deep ? 65535.0 : 255.0, err);
    if (!ch)
        return NULL;
    json_t *st = json_object();
    json_object_set_new(st, "used_for_normalisation", json_boolean(s == KILN_SPLIT_TRAIN));
    json_object_set_new(st, "scale", json_string(deep ? "0-65535" : "0-255"));
    json_object_set_new(st, "records", count(m->records[s]));
    json_object_set_new(st, "channels", ch);
    return st;
}

static json_t *skipped_json(const struct kiln_catalog *cat)
{
    json_t *a = json_array();
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status == KILN_ST_OK)
            continue;
        json_t *o = json_object();
        json_object_set_new(o, "source", text(it->source));
        json_object_set_new(o, "path", text(it->path));
        json_object_set_new(o, "member", text(it->member));
        json_object_set_new(o, "status", json_string(kiln_status_name(it->status)));
        json_object_set_new(o, "reason", text(it->reason));
        json_array_append_new(a, o);
    }
    return a;
}

/* The manifest's middle: counts and statistics per present split. NULL after setting err. */
static int add_splits(json_t *doc, const struct kiln_manifest *m, struct kiln_err *err)
{
    json_t *counts = json_object(), *stats = json_object();
    json_object_set_new(doc, "counts", counts);
    json_object_set_new(doc, "statistics", stats);
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!m->present[s])
            continue;
        json_t *c = json_object(), *st = split_stats(m, s, err);
        json_object_set_new(c, "records", count(m->records[s]));
        json_object_set_new(c, "per_class", class_counts(m->cat, s));
        json_object_set_new(counts, kiln_split_name(s), c);
        if (!st)
            return err->code;
        json_object_set_new(stats, kiln_split_name(s), st);
    }
    return KILN_OK;
}

int kiln_manifest_save(const char *path, const struct kiln_manifest *m, struct kiln_err *err)
{
    json_t *doc = json_object();
    /* First, so a folder is known to be kiln's from the first bytes (formats/files/owner.h). */
    json_object_set_new(doc, KILN_MANIFEST_FORMAT_KEY, json_string(KILN_MANIFEST_FORMAT));
    json_object_set_new(doc, "manifest_version", json_integer(KILN_MANIFEST_VERSION));
    json_object_set_new(doc, "kiln_version", json_string(KILN_VERSION));
    json_object_set_new(doc, "libraries", kiln_library_versions_json());
    json_object_set_new(doc, "recipe", kiln_recipe_to_json(m->recipe));
    json_object_set_new(doc, "recipe_sha256", json_string(m->recipe_sha256));
    json_object_set_new(doc, "scan", m->scan ? scan_json(m->scan) : json_null());
    json_object_set_new(doc, "split", m->split ? split_json(m->split) : json_null());
    json_object_set_new(doc, "classes", classes_json(m->cat));
    int rc = add_splits(doc, m, err);
    json_object_set_new(doc, "dct_reduced_items", count(m->dct_reduced));
    json_object_set_new(doc, "audit", audit_json(m->audit, m->cat));
    json_t *outputs = json_array();
    for (size_t i = 0; i < m->noutputs; i++) {
        json_t *o = json_object();
        json_object_set_new(o, "name", json_string(m->outputs[i].name));
        json_object_set_new(o, "bytes", json_integer((json_int_t)m->outputs[i].bytes));
        json_object_set_new(o, "sha256", json_string(m->outputs[i].sha256));
        json_array_append_new(outputs, o);
    }
    json_object_set_new(doc, "outputs", outputs);
    json_object_set_new(doc, "skipped", skipped_json(m->cat));
    if (!rc)
        rc = kiln_json_save(path, doc, err);
    json_decref(doc);
    return rc;
}

char *kiln_manifest_kten_meta(const struct kiln_kten_meta *km, struct kiln_err *err)
{
    const struct kiln_manifest *m = km->m;
    const struct kiln_recipe *r = m->recipe;
    const int s = km->split;
    json_t *meta = json_object();
    json_object_set_new(meta, "format", json_string("kiln tensor file"));
    json_object_set_new(meta, "split", json_string(kiln_split_name(s)));
    json_object_set_new(meta, "records", count(m->records[s]));
    json_object_set_new(meta, "layout", json_string(kiln_layout_name(r->layout)));
    json_object_set_new(meta, "dtype", json_string(kiln_out_type_name(r->dtype)));
    json_object_set_new(meta, "record_depth", json_integer(r->depth));
    json_object_set_new(meta, "classes", classes_json(m->cat));
    json_object_set_new(meta, "recipe_sha256", json_string(m->recipe_sha256));
    json_t *st = split_stats(m, s, err);
    json_t *train = st && s != KILN_SPLIT_TRAIN && m->present[KILN_SPLIT_TRAIN]
                        ? split_stats(m, KILN_SPLIT_TRAIN, err)
                        : NULL;
    if (!st || (s != KILN_SPLIT_TRAIN && m->present[KILN_SPLIT_TRAIN] && !train)) {
        json_decref(st);
        json_decref(meta);
        return NULL;
    }
    json_object_set_new(meta, "statistics", st);
    if (train)
        json_object_set_new(meta, "training_statistics", train);
    if (km->mean_unit) {
        json_t *norm = json_object(), *mean = json_array(), *sd = json_array();
        for (unsigned c = 0; c < r->channels; c++) {
            json_array_append_new(mean, json_real(km->mean_unit[c]));
            json_array_append_new(sd, json_real(km->std_unit[c]));
        }
        json_object_set_new(norm, "mean_unit", mean);
        json_object_set_new(norm, "std_unit", sd);
        json_object_set_new(meta, "normalisation", norm);
    }
    char *out = kiln_json_dump(meta);
    json_decref(meta);
    if (!out)
        kiln_err_set(err, KILN_ENOMEM, "cannot serialise metadata");
    return out;
}

int kiln_manifest_recipe_sha256(const struct kiln_recipe *r, char hex[KILN_SHA256_HEX],
                                struct kiln_err *err)
{
    json_t *j = kiln_recipe_to_json(r);
    char *text = kiln_json_dump(j);
    json_decref(j);
    if (!text)
        return kiln_err_set(err, KILN_ENOMEM, "cannot serialise the recipe");
    uint8_t d[KILN_SHA256_LEN];
    int rc = kiln_sha256_buf(text, strlen(text), d, err);
    free(text);
    if (!rc)
        kiln_sha256_hex(d, hex);
    return rc;
}

int kiln_manifest_save_sums(const char *path, const struct kiln_manifest_output *out, size_t n,
                            struct kiln_err *err)
{
    struct kiln_outfile of;
    FILE *f = kiln_outfile_open_stream(&of, path, err);
    if (!f)
        return err->code;
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%s  %s\n", out[i].sha256, out[i].name);
    return kiln_outfile_commit(&of, err);
}
