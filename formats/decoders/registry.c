/* The one list of image decoders. Probes are ordered cheapest and most specific first; the
 * highest bid wins, so order only breaks ties. Adding a format: see DEVELOPERS.md. */
#include <stdio.h>
#include <string.h>

#include "decoder.h"

extern const struct kiln_decoder kiln_decoder_png;
extern const struct kiln_decoder kiln_decoder_jpeg;
extern const struct kiln_decoder kiln_decoder_tiff;
extern const struct kiln_decoder kiln_decoder_pnm;

static const struct kiln_decoder *const decoders[] = {
    &kiln_decoder_png,  /* 8-byte signature */
    &kiln_decoder_jpeg, /* 3-byte SOI + marker prefix */
    &kiln_decoder_tiff, /* 4-byte byte order + version */
    &kiln_decoder_pnm,  /* "P1"-"P6" + whitespace: the weakest signature, so the lowest bid */
};

#define NDECODERS (sizeof decoders / sizeof decoders[0])

const struct kiln_decoder *kiln_decoder_find(const uint8_t *head, size_t len)
{
    const struct kiln_decoder *best = NULL;
    int best_bid = 0;
    for (size_t i = 0; i < NDECODERS; i++) {
        int bid = decoders[i]->probe(head, len);
        if (bid > best_bid) {
            best = decoders[i];
            best_bid = bid;
        }
    }
    return best;
}

const struct kiln_decoder *kiln_decoder_by_name(const char *name)
{
    for (size_t i = 0; i < NDECODERS; i++)
        if (strcmp(decoders[i]->name, name) == 0)
            return decoders[i];
    return NULL;
}

const char *kiln_format_sniff_other(const uint8_t *h, size_t n)
{
    if (n >= 6 && (memcmp(h, "GIF87a", 6) == 0 || memcmp(h, "GIF89a", 6) == 0))
        return "GIF";
    if (n >= 2 && h[0] == 'B' && h[1] == 'M')
        return "BMP";
    if (n >= 12 && memcmp(h, "RIFF", 4) == 0 && memcmp(h + 8, "WEBP", 4) == 0)
        return "WebP";
    if (n >= 12 && memcmp(h + 4, "ftyp", 4) == 0)
        return "ISO media (HEIF/AVIF)";
    if (n >= 12 && memcmp(h, "\0\0\0\x0cjP  ", 8) == 0)
        return "JPEG 2000";
    if (n >= 3 && h[0] == 'P' && h[1] == '7')
        return "PAM (P7)";
    if (n >= 4 && memcmp(h, "\x8aMNG", 4) == 0)
        return "MNG";
    if (n >= 2 && h[0] == 0xFF && h[1] == 0xD8)
        return "JPEG (incomplete start of image)";
    return NULL;
}

int kiln_decoded_shape(const struct kiln_image_info *info, uint32_t denom, struct kiln_image *out,
                       struct kiln_err *err)
{
    if (denom < 1 || denom > info->max_scale_denom)
        return kiln_err_set(err, KILN_EINTERNAL, "reduction 1/%u not available", denom);
    return kiln_image_reshape(out, kiln_scaled_side(info->width, denom),
                              kiln_scaled_side(info->height, denom), info->channels, info->depth,
                              err);
}

size_t kiln_decoder_library_versions(struct kiln_library_version *out, size_t max)
{
    size_t n = 0;
    for (size_t i = 0; i < NDECODERS && n < max; i++) {
        if (!decoders[i]->library)
            continue;
        out[n].library = decoders[i]->library;
        decoders[i]->library_version(out[n].version, sizeof out[n].version);
        n++;
    }
    return n;
}
