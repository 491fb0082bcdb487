/* IDAT gathering, inflate (libdeflate) and unfiltering (PNG specification, section 9:
 * filter types None, Sub, Up, Average, Paeth on bytes, bpp = bytes per complete pixel). */
#include "png_idat.h"

#include <libdeflate.h>
#include <stdlib.h>
#include <string.h>

static uint32_t be32(const uint8_t *p)
{
    return (uint32_t)p[0] << 24 | (uint32_t)p[1] << 16 | (uint32_t)p[2] << 8 | p[3];
}

/* The run of IDAT chunks: the first one's data (*one, *one_len) when there is only one, else
 * their data concatenated into spare (spare_len bytes; the file's length always suffices).
 * Returns 0 or 1 (decline). */
static int gather(const uint8_t *d, size_t len, int trusted, const uint8_t **one, size_t *one_len,
                  uint8_t *spare, size_t spare_len)
{
    size_t pos = 8, first = 0, total = 0, count = 0;
    for (int seen_end = 0; !seen_end;) {
        if (len - pos < 12)
            return 1;
        const uint32_t n = be32(d + pos);
        if (n > 0x7fffffffu || len - pos - 12 < n)
            return 1;
        const int idat = memcmp(d + pos + 4, "IDAT", 4) == 0;
        if (idat) {
            if (!trusted && libdeflate_crc32(0, d + pos + 4, (size_t)n + 4) != be32(d + pos + 8 + n))
                return 1;
            if (!count++)
                first = pos;
            total += n;
        } else if (count) {
            seen_end = 1; /* the run is over (the specification keeps IDATs together) */
        } else if (memcmp(d + pos + 4, "IEND", 4) == 0) {
            return 1;
        }
        pos += 12 + (size_t)n;
    }
    if (count == 1) {
        *one = d + first + 8;
        *one_len = total;
        return 0;
    }
    if (total > spare_len)
        return 1;
    size_t at = 0;
    for (pos = first; at < total; pos += 12 + (size_t)be32(d + pos)) {
        const uint32_t n = be32(d + pos);
        memcpy(spare + at, d + pos + 8, n);
        at += n;
    }
    *one = spare;
    *one_len = total;
    return 0;
}

/* The Paeth predictor with the distances written as |b - c|, |a - c| and |a + b - 2c| (the same
 * as |p - a|, |p - b|, |p - c| for p = a + b - c), which compilers turn into conditional moves. */
static inline uint8_t paeth(int a, int b, int c)
{
    const int pa = abs(b - c), pb = abs(a - c), pc = abs(a + b - 2 * c);
    return (uint8_t)(pa <= pb && pa <= pc ? a : pb <= pc ? b : c);
}

/* Unfilters row (n bytes, a whole number of bpp-byte pixels, after its filter byte f) against
 * prev (zeros for the first row). Inlined once per pixel size, so the left and upper-left pixel
 * stay in registers through Sub, Average and Paeth, whose every byte waits on its left one. */
static inline __attribute__((always_inline)) int unfilter_bpp(uint8_t f, uint8_t *row,
                                                              const uint8_t *prev, size_t n,
                                                              const size_t bpp)
{
    uint8_t left[8] = {0}, corner[8] = {0};
    switch (f) {
    case 0:
        return 0;
    case 1:
        for (size_t i = 0; i < n; i += bpp)
            for (size_t k = 0; k < bpp; k++)
                row[i + k] = left[k] = (uint8_t)(row[i + k] + left[k]);
        return 0;
    case 2:
        for (size_t i = 0; i < n; i++)
            row[i] = (uint8_t)(row[i] + prev[i]);
        return 0;
    case 3:
        for (size_t i = 0; i < n; i += bpp)
            for (size_t k = 0; k < bpp; k++)
                row[i + k] = left[k] = (uint8_t)(row[i + k] + ((left[k] + prev[i + k]) >> 1));
        return 0;
    case 4:
        for (size_t i = 0; i < n; i += bpp)
            for (size_t k = 0; k < bpp; k++) {
                const uint8_t up = prev[i + k];
                row[i + k] = left[k] = (uint8_t)(row[i + k] + paeth(left[k], up, corner[k]));
                corner[k] = up;
            }
        return 0;
    default:
        return 1;
    }
}

static int unfilter(uint8_t f, uint8_t *row, const uint8_t *prev, size_t n, size_t bpp)
{
    switch (bpp) {
    case 1: return unfilter_bpp(f, row, prev, n, 1);
    case 2: return unfilter_bpp(f, row, prev, n, 2);
    case 3: return unfilter_bpp(f, row, prev, n, 3);
    case 4: return unfilter_bpp(f, row, prev, n, 4);
    case 6: return unfilter_bpp(f, row, prev, n, 6);
    default: return unfilter_bpp(f, row, prev, n, 8);
    }
}

static void swap16(uint8_t *p, size_t n)
{
    for (size_t i = 0; i < n; i += 2) {
        const uint8_t t = p[i];
        p[i] = p[i + 1];
        p[i + 1] = t;
    }
}

size_t kiln_png_idat_room(const struct kiln_png_layout *l)
{
    const size_t bpp = (size_t)l->channels * (l->depth / 8);
    if ((l->depth != 8 && l->depth != 16) || l->channels < 1 || l->channels > 4 ||
        l->height == 0 || l->width == 0 || (size_t)l->width > KILN_PNG_IDAT_MAX / bpp)
        return 0;
    const size_t stride = (size_t)l->width * bpp;
    if ((size_t)l->height > KILN_PNG_IDAT_MAX / (stride + 1))
        return 0;
    return (size_t)l->height * (stride + 1);
}

int kiln_png_idat_decode(const uint8_t *data, size_t len, const struct kiln_png_layout *l,
                         uint8_t *out, size_t stride, size_t cap)
{
    const size_t bpp = (size_t)l->channels * (l->depth / 8);
    const size_t need = kiln_png_idat_room(l);
    if (need == 0 || stride != (size_t)l->width * bpp || cap < need)
        return 1;
    /* In place: row y's filtered bytes sit at y (stride + 1) + 1, at or past where the
     * unfiltered row goes (y stride), and the row above is already in place; the IDAT chunks'
     * data, when there are several, are joined in the room past that. */
    uint8_t *const raw = out;
    const uint8_t *z;
    size_t zlen;
    int rc = gather(data, len, l->trusted, &z, &zlen, out + need, cap - need);
    if (rc)
        return rc;
    uint8_t *zero = calloc(stride, 1); /* the row above the first (PNG specification 9.2) */
    struct libdeflate_decompressor *dec = zero ? libdeflate_alloc_decompressor() : NULL;
    if (!zero || !dec) {
        free(zero);
        return -1;
    }
    /* Exactly the rows' size: a stream that is shorter or longer is libpng's to judge. */
    rc = libdeflate_zlib_decompress(dec, z, zlen, raw, need, NULL) == LIBDEFLATE_SUCCESS ? 0 : 1;
    libdeflate_free_decompressor(dec);
    const uint16_t one = 1;
    const int swap = l->depth == 16 && *(const uint8_t *)&one == 1;
    for (uint32_t y = 0; y < l->height && !rc; y++) {
        uint8_t *row = raw + (size_t)y * (stride + 1);
        uint8_t *dst = out + (size_t)y * stride;
        rc = unfilter(row[0], row + 1, y ? dst - stride : zero, stride, bpp);
        memmove(dst, row + 1, stride);
        /* 16-bit samples to host order one row behind: the row above is unfiltered against
         * in PNG's byte order. */
        if (swap && y)
            swap16(dst - stride, stride);
    }
    if (swap && !rc)
        swap16(out + (size_t)(l->height - 1) * stride, stride);
    free(zero);
    return rc;
}
