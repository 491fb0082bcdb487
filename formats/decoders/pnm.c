/* PNM decoder, written by hand (the format is small): P1-P6, i.e. bitmaps, grey maps and pixel
 * maps, ASCII and binary, maxval 1-65535. A strict parser: header tokens must be plain decimal
 * numbers within range, samples must not exceed maxval, and a short raster is "truncated". */
#include <stdio.h>
#include <string.h>

#include "../../core/checked.h"
#include "decoder.h"

struct pnm_header {
    int kind;        /* 1-6 */
    uint32_t w, h, maxval;
    size_t raster;   /* offset of the first raster byte */
};

static int pnm_probe(const uint8_t *h, size_t n)
{
    if (n < 3 || h[0] != 'P' || h[1] < '1' || h[1] > '6')
        return 0;
    /* "P5" must be followed by whitespace or a comment. */
    return h[2] == ' ' || h[2] == '\t' || h[2] == '\n' || h[2] == '\r' || h[2] == '#' ? 90 : 0;
}

static int is_space(uint8_t c)
{
    return c == ' ' || c == '\t' || c == '\n' || c == '\r' || c == '\v' || c == '\f';
}

/* Skips whitespace and '#' comments (to the end of the line). */
static void skip_space(const uint8_t *d, size_t len, size_t *pos)
{
    while (*pos < len) {
        if (is_space(d[*pos])) {
            (*pos)++;
        } else if (d[*pos] == '#') {
            while (*pos < len && d[*pos] != '\n' && d[*pos] != '\r')
                (*pos)++;
        } else {
            break;
        }
    }
}

/* Reads a decimal number of at most max; returns -1 on bad syntax or range, -2 at end. */
static int read_number(const uint8_t *d, size_t len, size_t *pos, uint32_t max, uint32_t *out)
{
    skip_space(d, len, pos);
    if (*pos >= len)
        return -2;
    if (d[*pos] < '0' || d[*pos] > '9')
        return -1;
    uint64_t v = 0;
    while (*pos < len && d[*pos] >= '0' && d[*pos] <= '9') {
        v = v * 10 + (uint64_t)(d[*pos] - '0');
        if (v > max)
            return -1;
        (*pos)++;
    }
    *out = (uint32_t)v;
    return 0;
}

static int parse_header(const uint8_t *d, size_t len, struct pnm_header *hd, struct kiln_err *err)
{
    if (len < 3 || d[0] != 'P' || d[1] < '1' || d[1] > '6')
        return kiln_err_set(err, KILN_ECORRUPT, "PNM magic missing");
    hd->kind = d[1] - '0';
    size_t pos = 2;
    int r;
    if ((r = read_number(d, len, &pos, 0x7fffffffu, &hd->w)) || (r = read_number(d, len, &pos, 0x7fffffffu, &hd->h)))
        return kiln_err_set(err, r == -2 ? KILN_ETRUNCATED : KILN_ECORRUPT,
                            "PNM header has no valid width and height");
    if (hd->w == 0 || hd->h == 0)
        return kiln_err_set(err, KILN_ECORRUPT, "PNM image has zero width or height (%ux%u)",
                            hd->w, hd->h);
    hd->maxval = 1;
    if (hd->kind != 1 && hd->kind != 4) {
        if ((r = read_number(d, len, &pos, 65535u, &hd->maxval)) || hd->maxval == 0)
            return kiln_err_set(err, r == -2 ? KILN_ETRUNCATED : KILN_ECORRUPT,
                                "PNM maxval must be 1 to 65535");
    }
    /* Exactly one whitespace byte separates the header from a binary raster. */
    if (pos >= len)
        return kiln_err_set(err, KILN_ETRUNCATED, "PNM header ends without a raster");
    if (!is_space(d[pos]))
        return kiln_err_set(err, KILN_ECORRUPT, "PNM header is not followed by whitespace");
    hd->raster = pos + 1;
    return KILN_OK;
}

static uint32_t channels_of(int kind)
{
    return kind == 3 || kind == 6 ? 3u : 1u;
}

static int pnm_read_info_fn(const uint8_t *data, size_t len, const struct kiln_decode_limits *lim,
                            struct kiln_image_info *info, struct kiln_err *err)
{
    (void)lim;
    struct pnm_header hd;
    int rc = parse_header(data, len, &hd, err);
    if (rc)
        return rc;
    memset(info, 0, sizeof *info);
    info->width = hd.w;
    info->height = hd.h;
    info->channels = channels_of(hd.kind);
    info->depth = hd.maxval > 255 ? 16 : 8;
    uint32_t bits = 0;
    while ((1u << bits) - 1u < hd.maxval)
        bits++;
    info->stored_depth = bits;
    info->orientation = 1;
    info->pages = 1;
    info->max_scale_denom = 1;
    snprintf(info->note, sizeof info->note, "P%d, maxval %u%s", hd.kind, hd.maxval,
             hd.kind <= 3 ? ", ASCII" : "");
    return KILN_OK;
}

/* Rescales v in [0, maxval] to the full range of the output depth, rounded half up. */
static inline uint32_t rescale(uint32_t v, uint32_t maxval, uint32_t full)
{
    if (maxval == full)
        return v;
    return (uint32_t)(((uint64_t)v * full + maxval / 2) / maxval);
}

static void put_sample(struct kiln_image *out, size_t i, uint32_t v)
{
    if (out->depth == 8)
        ((uint8_t *)out->data)[i] = (uint8_t)v;
    else
        ((uint16_t *)out->data)[i] = (uint16_t)v;
}

static int pnm_decode_fn(const uint8_t *d, size_t len, const struct kiln_image_info *want,
                         uint32_t denom, struct kiln_image *out, struct kiln_err *err)
{
    (void)want;
    if (denom != 1)
        return kiln_err_set(err, KILN_EINTERNAL, "PNM cannot decode at 1/%u scale", denom);
    struct pnm_header hd;
    int rc = parse_header(d, len, &hd, err);
    if (rc)
        return rc;
    const uint32_t full = out->depth == 16 ? 65535u : 255u;
    size_t n;
    if (!kiln_mul3_size(hd.w, hd.h, channels_of(hd.kind), &n))
        return kiln_err_set(err, KILN_ETOOLARGE, "PNM image is too large");
    if (hd.kind == 4) {
        /* Bitmaps: rows of ceil(w/8) bytes, most significant bit first, 1 = black. */
        const size_t row = ((size_t)hd.w + 7) / 8;
        size_t need;
        if (!kiln_mul_size(row, hd.h, &need) || len - hd.raster < need)
            return kiln_err_set(err, KILN_ETRUNCATED, "PNM bitmap ends after %zu of %zu bytes",
                                len - hd.raster, need);
        for (uint32_t y = 0; y < hd.h; y++)
            for (uint32_t x = 0; x < hd.w; x++) {
                uint8_t byte = d[hd.raster + (size_t)y * row + x / 8];
                put_sample(out, (size_t)y * hd.w + x, (byte >> (7 - x % 8)) & 1 ? 0 : full);
            }
        return KILN_OK;
    }
    if (hd.kind >= 5) {
        const size_t bps = hd.maxval > 255 ? 2 : 1;
        size_t need;
        if (!kiln_mul_size(n, bps, &need) || len - hd.raster < need)
            return kiln_err_set(err, KILN_ETRUNCATED, "PNM raster ends after %zu of %zu bytes",
                                len - hd.raster, n * bps);
        const uint8_t *p = d + hd.raster;
        for (size_t i = 0; i < n; i++) {
            uint32_t v = bps == 2 ? (uint32_t)p[2 * i] << 8 | p[2 * i + 1] : p[i];
            if (v > hd.maxval)
                return kiln_err_set(err, KILN_ECORRUPT, "PNM sample %u exceeds maxval %u", v,
                                    hd.maxval);
            put_sample(out, i, rescale(v, hd.maxval, full));
        }
        return KILN_OK;
    }
    /* ASCII rasters: P1 digits may run together ("0101"), P2/P3 need separators. */
    size_t pos = hd.raster;
    for (size_t i = 0; i < n; i++) {
        uint32_t v;
        if (hd.kind == 1) {
            skip_space(d, len, &pos);
            if (pos >= len)
                return kiln_err_set(err, KILN_ETRUNCATED, "PNM ends after %zu of %zu samples", i, n);
            if (d[pos] != '0' && d[pos] != '1')
                return kiln_err_set(err, KILN_ECORRUPT, "PNM bitmap sample is not 0 or 1");
            put_sample(out, i, d[pos++] == '1' ? 0 : full);
            continue;
        }
        int r = read_number(d, len, &pos, hd.maxval, &v);
        if (r == -2)
            return kiln_err_set(err, KILN_ETRUNCATED, "PNM ends after %zu of %zu samples", i, n);
        if (r)
            return kiln_err_set(err, KILN_ECORRUPT, "PNM sample %zu is not a number up to %u", i,
                                hd.maxval);
        put_sample(out, i, rescale(v, hd.maxval, full));
    }
    return KILN_OK;
}

const struct kiln_decoder kiln_decoder_pnm = {
    .name = "pnm",
    .probe = pnm_probe,
    .read_info = pnm_read_info_fn,
    .decode = pnm_decode_fn,
};
