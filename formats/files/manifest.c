/* jansson-based stage files. */
#include "manifest.h"

#include <archive.h>
#include <errno.h>
#include <openssl/crypto.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <zlib.h>

#include "../../core/resize.h"
#include "../decoders/decoder.h"
#include "outfile.h"
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
    rc = kiln_pwrite_all(of.fd, text, len, 0, err);
    if (!rc)
        rc = kiln_pwrite_all(of.fd, "\n", 1, (long long)len, err);
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
    char numbers[4][48];
    snprintf(numbers[0], sizeof numbers[0], "%s", zlibVersion());
    snprintf(numbers[1], sizeof numbers[1], "%d.%d.%d", a / 1000000, a / 1000 % 1000, a % 1000);
    snprintf(numbers[2], sizeof numbers[2], "%s", OpenSSL_version(OPENSSL_VERSION_STRING));
    snprintf(numbers[3], sizeof numbers[3], "%s", jansson_version_str());
    static const char *const names[4] = {"zlib", "libarchive", "openssl", "jansson"};
    for (size_t i = 0; i < 4 && n < max; i++, n++) {
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
