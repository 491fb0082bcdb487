/* From a decoded image to one fixed-size integer record: orient, convert channels, fit and
 * resample, convert depth, lay out as HWC or CHW. docs/pixels.md gives the order and rules. */
#ifndef KILN_PREPARE_H
#define KILN_PREPARE_H

#include <stdint.h>

#include "err.h"
#include "image.h"
#include "recipe.h"
#include "resize.h"

/* Per-worker scratch: two ping-pong images and a resampler. */
struct kiln_prep {
    struct kiln_image a, b;
    struct kiln_resizer rs;
};

void kiln_prep_init(struct kiln_prep *p);
void kiln_prep_free(struct kiln_prep *p);

/* The JPEG-style reduction (1, 2, 4 or 8, at most max_denom) to decode a stored w x h image
 * at: the largest that keeps the fit's source box at least as large as the resampled size on
 * both axes, so the resampler only ever reduces further. 1 when r->dct_scale is off. */
uint32_t kiln_prep_choose_denom(const struct kiln_recipe *r, uint32_t w, uint32_t h,
                                uint32_t orientation, uint32_t max_denom);

/* Turns img (as decoded; it may be consumed as scratch) into one record of
 * kiln_recipe_record_bytes(r) bytes at out, in r->depth integers (host order for 16-bit) and
 * r->layout. orientation is the stored EXIF value (ignored when r->orient is false). */
int kiln_prep_record(struct kiln_prep *p, const struct kiln_recipe *r, struct kiln_image *img,
                     uint32_t orientation, void *out, struct kiln_err *err);

#endif
