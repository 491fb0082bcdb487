/* Records of a .kten file read back as 8-bit pictures for the contact sheet and the report. */
#include "kten_view.h"

#include <fcntl.h>
#include <jansson.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../core/checked.h"

static int read_at(const struct kiln_kten_view *v, uint64_t off, void *buf, size_t len,
                   const char *path, struct kiln_err *err)
{
    uint8_t *p = buf;
    while (len) {
        ssize_t got = pread(v->fd, p, len, (off_t)off);
        if (got <= 0)
            return kiln_err_set(err, got == 0 ? KILN_ETRUNCATED : KILN_EIO,
                                "%s: cannot read %zu bytes at offset %llu", path, len,
                                (unsigned long long)off);
        p += got;
        off += (uint64_t)got;
        len -= (size_t)got;
    }
    return KILN_OK;
}

/* The metadata block's class map, split and normalisation. */
static int read_meta(struct kiln_kten_view *v, const char *path, struct kiln_err *err)
{
    json_error_t je;
    json_t *m = json_loads(v->info.metadata, 0, &je);
    if (!m)
        return kiln_err_set(err, KILN_ECORRUPT, "%s: the metadata block is not JSON: %s", path,
                            je.text);
    int rc = KILN_OK;
    const json_t *classes = json_object_get(m, "classes"), *split = json_object_get(m, "split");
    if (json_is_string(split))
        snprintf(v->split, sizeof v->split, "%s", json_string_value(split));
    v->nclasses = json_is_array(classes) ? json_array_size(classes) : 0;
    v->classes = kiln_alloc_array(v->nclasses ? v->nclasses : 1, sizeof *v->classes);
    if (!v->classes)
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t i = 0; i < v->nclasses && !rc; i++) {
        const char *s = json_string_value(json_array_get(classes, i));
        v->classes[i] = strdup(s ? s : "?");
        if (!v->classes[i]) {
            v->nclasses = i;
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
        }
    }
    if (!rc && v->dtype == KILN_DT_F32) {
        const json_t *nm = json_object_get(m, "normalisation");
        const json_t *mu = json_object_get(nm, "mean_unit"), *sd = json_object_get(nm, "std_unit");
        if (json_array_size(mu) != v->c || json_array_size(sd) != v->c)
            rc = kiln_err_set(err, KILN_ECORRUPT,
                              "%s: f32 records but no normalisation (mean_unit, std_unit) for "
                              "%u channels in the metadata block", path, v->c);
        for (uint32_t k = 0; k < v->c && !rc; k++) {
            v->mean_unit[k] = json_number_value(json_array_get(mu, k));
            v->std_unit[k] = json_number_value(json_array_get(sd, k));
        }
    }
    json_decref(m);
    return rc;
}

int kiln_kten_view_open(struct kiln_kten_view *v, const char *path, struct kiln_err *err)
{
    memset(v, 0, sizeof *v);
    v->fd = -1;
    int rc = kiln_kten_open(path, &v->info, err);
    if (rc)
        return rc;
    const int im = kiln_kten_find(&v->info, "images"), lb = kiln_kten_find(&v->info, "labels"),
              it = kiln_kten_find(&v->info, "item");
    const struct kiln_kten_array *a = im >= 0 ? &v->info.arrays[im] : NULL;
    if (!a || a->rank != 4 || lb < 0 || it < 0 || v->info.arrays[lb].dtype != KILN_DT_I32 ||
        v->info.arrays[it].dtype != KILN_DT_U32 || v->info.arrays[lb].dims[0] != a->dims[0] ||
        v->info.arrays[it].dims[0] != a->dims[0] ||
        (a->dtype != KILN_DT_U8 && a->dtype != KILN_DT_U16 && a->dtype != KILN_DT_F32)) {
        kiln_kten_info_free(&v->info);
        return kiln_err_set(err, KILN_ECORRUPT,
                            "%s: not a kiln output split (images [N,H,W,C] or [N,C,H,W], labels "
                            "and item arrays of N entries expected)", path);
    }
    v->n = a->dims[0];
    v->dtype = a->dtype;
    v->images_offset = a->offset;
    /* The layout, and so which axis holds the channels, is in the metadata block. */
    json_t *meta = json_loads(v->info.metadata, 0, NULL);
    const char *layout = json_string_value(json_object_get(meta, "layout"));
    v->nchw = layout && strcmp(layout, "nchw") == 0;
    json_decref(meta);
    const uint64_t d1 = a->dims[1], d2 = a->dims[2], d3 = a->dims[3];
    const uint64_t c = v->nchw ? d1 : d3;
    if (c < 1 || c > 4 || d1 > UINT32_MAX || d2 > UINT32_MAX || d3 > UINT32_MAX) {
        kiln_kten_info_free(&v->info);
        return kiln_err_set(err, KILN_ECORRUPT, "%s: records of %llu channels", path,
                            (unsigned long long)c);
    }
    v->c = (uint32_t)c;
    v->h = (uint32_t)(v->nchw ? d2 : d1);
    v->w = (uint32_t)(v->nchw ? d3 : d2);
    v->record_bytes = v->n ? a->length / v->n : 0;
    size_t n;
    rc = read_meta(v, path, err);
    if (!rc && !kiln_mul_size((size_t)v->n, 1, &n))
        rc = kiln_err_set(err, KILN_ENOMEM, "%s: too many records", path);
    if (!rc) {
        v->labels = kiln_alloc_array(v->n ? v->n : 1, sizeof *v->labels);
        v->item = kiln_alloc_array(v->n ? v->n : 1, sizeof *v->item);
        if (!v->labels || !v->item)
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory reading %s", path);
    }
    if (!rc && (v->fd = open(path, O_RDONLY | O_CLOEXEC)) < 0)
        rc = kiln_err_set(err, KILN_EIO, "%s: cannot open", path);
    uint8_t *raw = NULL;
    if (!rc && v->n) {
        raw = kiln_alloc_array(v->n, 4);
        if (!raw)
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory reading %s", path);
    }
    /* Little-endian on disk, whatever the host (docs/format.md). */
    if (!rc && v->n && !(rc = read_at(v, v->info.arrays[lb].offset, raw, v->n * 4, path, err)))
        for (uint64_t i = 0; i < v->n; i++)
            v->labels[i] = (int32_t)((uint32_t)raw[4 * i] | (uint32_t)raw[4 * i + 1] << 8 |
                                     (uint32_t)raw[4 * i + 2] << 16 | (uint32_t)raw[4 * i + 3] << 24);
    if (!rc && v->n && !(rc = read_at(v, v->info.arrays[it].offset, raw, v->n * 4, path, err)))
        for (uint64_t i = 0; i < v->n; i++)
            v->item[i] = (uint32_t)raw[4 * i] | (uint32_t)raw[4 * i + 1] << 8 |
                         (uint32_t)raw[4 * i + 2] << 16 | (uint32_t)raw[4 * i + 3] << 24;
    free(raw);
    if (rc)
        kiln_kten_view_close(v);
    return rc;
}

void kiln_kten_view_close(struct kiln_kten_view *v)
{
    if (v->fd >= 0)
        close(v->fd);
    for (size_t i = 0; i < v->nclasses; i++)
        free(v->classes[i]);
    free(v->classes);
    free(v->labels);
    free(v->item);
    kiln_kten_info_free(&v->info);
    memset(v, 0, sizeof *v);
    v->fd = -1;
}

/* One sample in the 8-bit scale people look at. */
static uint8_t to8(const struct kiln_kten_view *v, const uint8_t *p, uint32_t ch)
{
    switch (v->dtype) {
    case KILN_DT_U8: return p[0];
    case KILN_DT_U16: {
        const uint32_t s = (uint32_t)p[0] | (uint32_t)p[1] << 8;
        return (uint8_t)((s * 255u + 32767u) / 65535u); /* round(v * 255 / 65535), docs/pixels.md */
    }
    default: {
        uint32_t bits = (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 |
                        (uint32_t)p[3] << 24;
        float x;
        memcpy(&x, &bits, sizeof x);
        /* x = (u - mean_unit) / std_unit with u in [0, 1] (docs/statistics.md). */
        const double u = (double)x * v->std_unit[ch] + v->mean_unit[ch];
        if (!(u > 0))
            return 0;
        if (u >= 1)
            return 255;
        return (uint8_t)lround(u * 255.0);
    }
    }
}

int kiln_kten_view_record(const struct kiln_kten_view *v, uint64_t i, uint8_t *out,
                          struct kiln_err *err)
{
    if (i >= v->n)
        return kiln_err_set(err, KILN_EINVAL, "record %llu of %llu does not exist",
                            (unsigned long long)i, (unsigned long long)v->n);
    uint8_t *raw = malloc(v->record_bytes ? v->record_bytes : 1);
    if (!raw)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory reading a record");
    int rc = read_at(v, v->images_offset + i * v->record_bytes, raw, v->record_bytes, "record", err);
    if (!rc) {
        const size_t es = kiln_dtype_size(v->dtype), plane = (size_t)v->h * v->w;
        for (size_t px = 0; px < plane; px++)
            for (uint32_t ch = 0; ch < v->c; ch++) {
                const size_t at = v->nchw ? (size_t)ch * plane + px : px * v->c + ch;
                out[px * v->c + ch] = to8(v, raw + at * es, ch);
            }
    }
    free(raw);
    return rc;
}

size_t kiln_kten_view_sample(const struct kiln_kten_view *v, int32_t cls, size_t k, uint64_t *out)
{
    uint64_t m = 0;
    for (uint64_t i = 0; i < v->n; i++)
        m += v->labels[i] == cls;
    if (k > m)
        k = (size_t)m;
    size_t got = 0;
    uint64_t pos = 0;
    for (uint64_t i = 0; i < v->n && got < k; i++) {
        if (v->labels[i] != cls)
            continue;
        /* Is this the class's record at position floor((2 got + 1) m / (2 k))? */
        if (pos == ((2 * (uint64_t)got + 1) * m) / (2 * (uint64_t)k))
            out[got++] = i;
        pos++;
    }
    return got;
}
