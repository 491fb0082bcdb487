/* PNG image data without libpng, for the common layouts (non-interlaced, 8 or 16 bits, grey,
 * grey+alpha, RGB or RGBA, no palette, no tRNS): the IDAT chunks gathered (their CRC-32s
 * checked unless the bytes are trusted), the zlib stream inflated by libdeflate (Adler-32
 * checked), the rows unfiltered here. libpng still reads the header and decides everything
 * else; anything unusual in the data makes this path decline, and libpng then decodes the file
 * and words the error, so pixels and messages are libpng's either way. */
#ifndef KILN_PNG_IDAT_H
#define KILN_PNG_IDAT_H

#include <stddef.h>
#include <stdint.h>

/* The largest inflated image (rows with their filter bytes) this path takes; larger pictures
 * are left to libpng, which needs no second buffer of that size. */
#define KILN_PNG_IDAT_MAX ((size_t)64 << 20)

struct kiln_png_layout {
    uint32_t width, height;
    unsigned channels; /* 1 to 4 */
    unsigned depth;    /* 8 or 16 */
    int trusted;       /* the CRC-32s may be skipped (struct kiln_image_info.trusted) */
};

/* The bytes of the inflated image data, filter bytes included (height x (stride + 1)), which
 * kiln_png_idat_decode needs at out; with as much again as the file's length past them it
 * joins the IDAT chunks there too. 0 when the layout is not one this path takes or the data
 * would exceed KILN_PNG_IDAT_MAX. */
size_t kiln_png_idat_room(const struct kiln_png_layout *l);

/* Decodes the image data of the PNG in data[0..len) into out (height rows of stride bytes,
 * 16-bit samples in host order), inflating and unfiltering in place; cap is the bytes out may
 * be written, which must be at least kiln_png_idat_room plus room to join the IDAT chunks, or
 * the path declines. Returns 0 when done, 1 when it declines (the caller decodes with libpng),
 * -1 when memory ran out. */
int kiln_png_idat_decode(const uint8_t *data, size_t len, const struct kiln_png_layout *l,
                         uint8_t *out, size_t stride, size_t cap);

#endif
