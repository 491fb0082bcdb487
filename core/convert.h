/* Pixel conversions with exact integer rules: EXIF orientation, channel count, bit depth.
 * The formulas are in docs/pixels.md; every rule here is a pure function of the input samples. */
#ifndef KILN_CONVERT_H
#define KILN_CONVERT_H

#include <stdint.h>

#include "err.h"
#include "image.h"

/* 16 -> 8 bits: round(v * 255 / 65535), halves up (exact in integers). */
static inline uint8_t kiln_u16_to_u8(uint32_t v)
{
    return (uint8_t)((v * 255u + 32767u) / 65535u);
}

/* 8 -> 16 bits: v * 257, the exact inverse of kiln_u16_to_u8 on 8-bit values. */
static inline uint16_t kiln_u8_to_u16(uint32_t v)
{
    return (uint16_t)(v * 257u);
}

/* ITU-R BT.601 luma with weights 0.299, 0.587, 0.114 as 299/587/114 thousandths, rounded half
 * up: (299 R + 587 G + 114 B + 500) / 1000. Valid for 8- and 16-bit samples. */
static inline uint32_t kiln_luma601(uint32_t r, uint32_t g, uint32_t b)
{
    return (299u * r + 587u * g + 114u * b + 500u) / 1000u;
}

/* Writes into out the image as displayed for EXIF orientation 1-8 (CIPA DC-008 table).
 * Orientations 5-8 swap width and height. Values outside 1-8 are treated as 1. */
int kiln_orient(const struct kiln_image *in, unsigned orientation, struct kiln_image *out,
                struct kiln_err *err);

/* Converts in (1-4 channels) to channels (1, 3 or 4) at the same depth. Alpha is composited over
 * background (8-bit RGB, scaled by 257 for 16-bit images) unless 4 channels are kept; grey is
 * replicated to RGB; RGB becomes grey by kiln_luma601. */
int kiln_convert_channels(const struct kiln_image *in, unsigned channels,
                          const uint8_t background[3], struct kiln_image *out, struct kiln_err *err);

/* Converts in to depth 8 or 16 by the rules above. */
int kiln_convert_depth(const struct kiln_image *in, unsigned depth, struct kiln_image *out,
                       struct kiln_err *err);

#endif
