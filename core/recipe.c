/* Recipe defaults and the option parser shared by every command that packs. */
#include "recipe.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "resize.h"

void kiln_recipe_defaults(struct kiln_recipe *r)
{
    memset(r, 0, sizeof *r);
    r->width = r->height = 0; /* required */
    r->fit = KILN_FIT_STRETCH;
    r->filter = KILN_FILTER_BILINEAR;
    r->channels = 3;
    r->depth = 8;
    r->dtype = -1;
    r->layout = KILN_LAYOUT_NHWC;
    r->dct_scale = true;
    r->orient = true;
    memset(r->background, 255, sizeof r->background);
    r->max_pixels = KILN_DEFAULT_MAX_PIXELS;
    r->max_side = KILN_DEFAULT_MAX_SIDE;
}

static const char *const out_names[] = {"u8", "u16", "f32"};
static const char *const layout_names[] = {"nhwc", "nchw"};

const char *kiln_out_type_name(int t)
{
    return t >= 0 && t <= 2 ? out_names[t] : "unknown";
}

const char *kiln_layout_name(int l)
{
    return l >= 0 && l <= 1 ? layout_names[l] : "unknown";
}

static int parse_uint(const char *s, uint64_t max, uint64_t *out)
{
    if (!*s || *s == '-' || *s == '+' || *s == ' ')
        return -1;
    char *end;
    errno = 0;
    unsigned long long v = strtoull(s, &end, 10);
    if (*end || errno || v > max)
        return -1;
    *out = v;
    return 0;
}

int kiln_parse_size(const char *text, uint32_t *w, uint32_t *h, struct kiln_err *err)
{
    const char *x = strchr(text, 'x');
    if (!x)
        x = strchr(text, 'X');
    uint64_t a, b;
    if (x) {
        char first[32];
        size_t n = (size_t)(x - text);
        if (n == 0 || n >= sizeof first)
            goto bad;
        memcpy(first, text, n);
        first[n] = '\0';
        if (parse_uint(first, 65535, &a) || parse_uint(x + 1, 65535, &b))
            goto bad;
    } else {
        if (parse_uint(text, 65535, &a))
            goto bad;
        b = a;
    }
    if (a == 0 || b == 0)
        goto bad;
    *w = (uint32_t)a;
    *h = (uint32_t)b;
    return KILN_OK;
bad:
    return kiln_err_set(err, KILN_EINVAL, "bad --size '%s': expected WxH or S, 1 to 65535", text);
}

/* Parses 1 or n comma-separated 0-255 values; one value fills all n. */
static int parse_levels(const char *text, uint8_t *out, unsigned n)
{
    uint8_t v[4];
    unsigned k = 0;
    const char *s = text;
    for (;;) {
        char part[16];
        size_t len = strcspn(s, ",");
        uint64_t x;
        if (k == n || len == 0 || len >= sizeof part)
            return -1;
        memcpy(part, s, len);
        part[len] = '\0';
        if (parse_uint(part, 255, &x))
            return -1;
        v[k++] = (uint8_t)x;
        if (!s[len])
            break;
        s += len + 1;
    }
    /* One value fills every channel; for the four pad channels three values are R,G,B with an
     * opaque alpha. */
    if (k != 1 && k != n && !(n == 4 && k == 3))
        return -1;
    for (unsigned i = 0; i < n; i++)
        out[i] = k == 1 ? v[0] : i < k ? v[i] : 255;
    return 0;
}

static int parse_switch(const char *v, bool *out)
{
    if (strcmp(v, "on") == 0 || strcmp(v, "true") == 0 || strcmp(v, "1") == 0)
        *out = true;
    else if (strcmp(v, "off") == 0 || strcmp(v, "false") == 0 || strcmp(v, "0") == 0)
        *out = false;
    else
        return -1;
    return 0;
}

int kiln_recipe_set(struct kiln_recipe *r, const char *key, const char *v, struct kiln_err *err)
{
    uint64_t x;
    int e;
    if (strcmp(key, "size") == 0)
        return kiln_parse_size(v, &r->width, &r->height, err);
    if (strcmp(key, "fit") == 0) {
        if ((e = kiln_fit_parse(v)) < 0)
            return kiln_err_set(err, KILN_EINVAL, "bad --fit '%s': use stretch, pad or crop", v);
        r->fit = e;
    } else if (strcmp(key, "filter") == 0) {
        if ((e = kiln_filter_parse(v)) < 0)
            return kiln_err_set(err, KILN_EINVAL,
                                "bad --filter '%s': use nearest, box, bilinear, bicubic or "
                                "lanczos3",
                                v);
        r->filter = e;
    } else if (strcmp(key, "channels") == 0) {
        if (parse_uint(v, 4, &x) || x == 2 || x == 0)
            return kiln_err_set(err, KILN_EINVAL, "bad --channels '%s': use 1, 3 or 4", v);
        r->channels = (uint32_t)x;
    } else if (strcmp(key, "depth") == 0) {
        if (parse_uint(v, 16, &x) || (x != 8 && x != 16))
            return kiln_err_set(err, KILN_EINVAL, "bad --depth '%s': use 8 or 16", v);
        r->depth = (uint32_t)x;
    } else if (strcmp(key, "dtype") == 0) {
        for (e = 0; e < 3 && strcmp(v, out_names[e]) != 0; e++)
            ;
        if (e == 3)
            return kiln_err_set(err, KILN_EINVAL, "bad --dtype '%s': use u8, u16 or f32", v);
        r->dtype = e;
    } else if (strcmp(key, "layout") == 0) {
        for (e = 0; e < 2 && strcmp(v, layout_names[e]) != 0; e++)
            ;
        if (e == 2)
            return kiln_err_set(err, KILN_EINVAL, "bad --layout '%s': use nhwc or nchw", v);
        r->layout = e;
    } else if (strcmp(key, "pad-value") == 0) {
        if (parse_levels(v, r->pad_value, 4))
            return kiln_err_set(err, KILN_EINVAL,
                                "bad --pad-value '%s': one 0-255 value, R,G,B or R,G,B,A", v);
    } else if (strcmp(key, "background") == 0) {
        if (parse_levels(v, r->background, 3))
            return kiln_err_set(err, KILN_EINVAL,
                                "bad --background '%s': one 0-255 value or R,G,B", v);
    } else if (strcmp(key, "max-pixels") == 0) {
        if (parse_uint(v, UINT64_MAX, &x) || x == 0)
            return kiln_err_set(err, KILN_EINVAL, "bad --max-pixels '%s'", v);
        r->max_pixels = x;
    } else if (strcmp(key, "max-side") == 0) {
        if (parse_uint(v, 0x7fffffff, &x) || x == 0)
            return kiln_err_set(err, KILN_EINVAL, "bad --max-side '%s'", v);
        r->max_side = (uint32_t)x;
    } else if (strcmp(key, "dct-scale") == 0) {
        if (parse_switch(v, &r->dct_scale))
            return kiln_err_set(err, KILN_EINVAL, "bad dct-scale value '%s'", v);
    } else if (strcmp(key, "orient") == 0) {
        if (parse_switch(v, &r->orient))
            return kiln_err_set(err, KILN_EINVAL, "bad orient value '%s'", v);
    } else {
        return kiln_err_set(err, KILN_EINVAL, "unknown recipe option '%s'", key);
    }
    return KILN_OK;
}

int kiln_recipe_finish(struct kiln_recipe *r, struct kiln_err *err)
{
    if (!r->width || !r->height)
        return kiln_err_set(err, KILN_EINVAL, "--size is required (e.g. --size 224x224)");
    if (r->dtype < 0)
        r->dtype = r->depth == 16 ? KILN_OUT_U16 : KILN_OUT_U8;
    if (r->dtype == KILN_OUT_U8 && r->depth != 8)
        return kiln_err_set(err, KILN_EINVAL, "--dtype u8 needs --depth 8");
    if (r->dtype == KILN_OUT_U16 && r->depth != 16) {
        if (r->depth == 8)
            r->depth = 16; /* u16 output implies 16-bit records */
    }
    const size_t bytes = kiln_recipe_record_bytes(r);
    if (!bytes || bytes > KILN_MAX_RECORD_BYTES)
        return kiln_err_set(err, KILN_EINVAL,
                            "--size %ux%u gives records of %ux%ux%u %s samples, %.1f MB each, "
                            "more than the limit of %zu MiB a record",
                            r->width, r->height, r->width, r->height, r->channels,
                            kiln_out_type_name(r->dtype),
                            (double)r->width * r->height * r->channels *
                                (r->dtype == KILN_OUT_F32 ? 4 : r->depth / 8) / 1e6,
                            KILN_MAX_RECORD_BYTES >> 20);
    return KILN_OK;
}

size_t kiln_recipe_sample_bytes(const struct kiln_recipe *r)
{
    return r->dtype == KILN_OUT_F32 ? 4 : r->depth / 8;
}

size_t kiln_recipe_record_bytes(const struct kiln_recipe *r)
{
    size_t n;
    size_t s = r->dtype < 0 ? r->depth / 8 : kiln_recipe_sample_bytes(r);
    if (!kiln_mul3_size(r->width, r->height, r->channels, &n) || !kiln_mul_size(n, s, &n))
        return 0;
    return n;
}
