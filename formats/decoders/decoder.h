/* The image decoder interface. Each format module exports one const struct kiln_decoder;
 * registry.c lists them. Decoders work on bytes already in memory (the file was read once to
 * hash it), never print, and report problems through struct kiln_err with the codes of
 * core/err.h: KILN_ECORRUPT, KILN_ETRUNCATED, KILN_EUNSUPPORTED, KILN_ETOOLARGE, KILN_ENOMEM. */
#ifndef KILN_DECODER_H
#define KILN_DECODER_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/err.h"
#include "../../core/image.h"

struct kiln_image_info {
    uint32_t width, height;  /* as stored, before orientation */
    uint32_t channels;       /* what decode produces: 1 grey, 2 grey+alpha, 3 RGB, 4 RGBA */
    uint32_t depth;          /* what decode produces: 8 or 16 */
    uint32_t stored_depth;   /* bits per sample in the file */
    uint32_t orientation;    /* EXIF orientation 1-8; 1 when the file has none */
    uint32_t pages;          /* images in the file (decode reads the first) */
    uint32_t max_scale_denom; /* largest power-of-two reduction decode can do itself (1 = none) */
    char note[96];           /* facts worth recording that do not change pixels, e.g. "sRGB" */
    /* Set by the caller between read_info (which clears it) and decode when the bytes are known
     * to equal bytes that decoded cleanly before (pack, after checking the recorded SHA-256):
     * the decoder may then skip the format's own checksums. Pixels are the same either way. */
    uint32_t trusted;
    /* Set by tests (tests/tools/decode_check.c --library): decode with the library's own code
     * only, not kiln's faster path for the same data (formats/decoders/png_idat.h), so that the
     * two can be compared byte for byte. */
    uint32_t library_only;
};

/* Limits checked from the header, before any pixel memory is allocated. */
struct kiln_decode_limits {
    uint64_t max_pixels;
    uint32_t max_side;
};

#define KILN_DECODE_ROWS_DECLINED (-1)

struct kiln_decoder {
    const char *name; /* "png", "jpeg", ...: what catalog.csv records */
    /* Returns a bid: 0 = not this format, higher = more certain. Looks at the first bytes only
     * (len may be short); never at a file name. */
    int (*probe)(const uint8_t *head, size_t len);
    /* Reads the header in O(1) memory. */
    int (*read_info)(const uint8_t *data, size_t len, const struct kiln_decode_limits *lim,
                     struct kiln_image_info *info, struct kiln_err *err);
    /* Decodes the first image, reduced by scale_denom (1, 2, 4 or 8, at most
     * info->max_scale_denom), into out, which the caller has shaped with kiln_decoded_shape.
     * Rows are written straight into out->data. */
    int (*decode)(const uint8_t *data, size_t len, const struct kiln_image_info *info,
                  uint32_t scale_denom, struct kiln_image *out, struct kiln_err *err);
    /* Optional (NULL when the format has none): decodes the first image at full size one row
     * at a time, in order, each row shaped as decode's (info's channels and depth, packed),
     * handed to row(ctx, y, pixels), so a picture too large to hold whole costs one row. A
     * non-zero return of row stops the decode and is returned. KILN_DECODE_ROWS_DECLINED (out
     * of band, not a kiln_code) when this file cannot be read so (an interlaced PNG): decode
     * it whole instead. */
    int (*decode_rows)(const uint8_t *data, size_t len, const struct kiln_image_info *info,
                       int (*row)(void *ctx, uint32_t y, const void *pixels), void *ctx,
                       struct kiln_err *err);
    /* The library doing the work ("libpng") and its run-time version, or NULL for decoders
     * written in kiln itself. */
    const char *library;
    void (*library_version)(char *buf, size_t len);
};

/* Size of a decode at 1/denom scale: ceil(side / denom), as libjpeg computes it. */
static inline uint32_t kiln_scaled_side(uint32_t side, uint32_t denom)
{
    return (uint32_t)(((uint64_t)side + denom - 1) / denom);
}

/* Shapes out for decoder->decode at the given reduction. */
int kiln_decoded_shape(const struct kiln_image_info *info, uint32_t denom, struct kiln_image *out,
                       struct kiln_err *err);

/* The decoder with the highest bid for these first bytes, or NULL. */
const struct kiln_decoder *kiln_decoder_find(const uint8_t *head, size_t len);
/* Looks a decoder up by name, or NULL. */
const struct kiln_decoder *kiln_decoder_by_name(const char *name);
/* For content no decoder takes: the name of a recognised but unsupported format ("GIF",
 * "BMP", "WebP", ...), or NULL. Lets the catalogue say "unsupported: GIF" not "not an image". */
const char *kiln_format_sniff_other(const uint8_t *head, size_t len);

/* Versions of the decoding libraries linked at run time ("libpng 1.6.39"), for the manifest.
 * Each module that wraps a library fills one line; see registry.c. */
struct kiln_library_version {
    const char *library;
    char version[48];
};
size_t kiln_decoder_library_versions(struct kiln_library_version *out, size_t max);

#endif
