/* What identifies a decoded picture: the canonical pixel digest (identical pictures) and the
 * 64-bit difference hash (near-identical ones), docs/split.md "Pixel digest" and "Difference
 * hash". Pure computation over an oriented decoded image. */
#ifndef KILN_IMGHASH_H
#define KILN_IMGHASH_H

#include <stdint.h>

#include "err.h"
#include "image.h"

struct kiln_resizer;

/* SHA-256 of width, height, channels and bits per sample (4-byte little-endian each), then
 * every sample row by row, 16-bit samples little-endian. */
int kiln_imghash_pixels(const struct kiln_image *img, uint8_t out[32], struct kiln_err *err);

/* Grey (BT.601 luma, alpha over white), 8 bits, box-resampled to 9x8; bit p[y][x+1] > p[y][x]
 * for y, x = 0..7, first bit most significant. scratch and rs are reused between calls. */
int kiln_imghash_dhash(const struct kiln_image *img, struct kiln_image scratch[2],
                       struct kiln_resizer *rs, uint64_t *out, struct kiln_err *err);

#endif
