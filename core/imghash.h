/* What identifies a decoded picture: the canonical pixel digest (identical pictures),
 * docs/split.md "Pixel digest". Pure computation over an oriented decoded image; near-identical
 * pictures are nearfp.h's. */
#ifndef KILN_IMGHASH_H
#define KILN_IMGHASH_H

#include <stdint.h>

#include "err.h"
#include "image.h"

/* SHA-256 of width, height, channels and bits per sample (4-byte little-endian each), then
 * every sample row by row, 16-bit samples little-endian. */
int kiln_imghash_pixels(const struct kiln_image *img, uint8_t out[32], struct kiln_err *err);

#endif
