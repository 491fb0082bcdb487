/* From a decoded image to one fixed-size integer record: orient, convert channels, fit and
 * resample, convert depth, lay out as HWC or CHW. docs/pixels.md gives the order and rules. */
#ifndef KILN_PREPARE_H
#define KILN_PREPARE_H

#include <stdbool.h>
#include <stdint.h>

#include "err.h"
#include "image.h"
#include "recipe.h"
#include "resize.h"

/* Per-worker scratch: two ping-pong images and a resampler; and what a row-by-row preparation
 * (kiln_prep_stream_*) keeps between its calls. */
struct kiln_prep {
    struct kiln_image a, b;
    struct kiln_resizer rs;
    const struct kiln_recipe *s_recipe;
    uint32_t s_height;
    bool s_flip_x, s_flip_y, s_convert, s_widen_late;
    struct kiln_fit_geometry s_geom;
};

void kiln_prep_init(struct kiln_prep *p);
void kiln_prep_free(struct kiln_prep *p);

/* The JPEG-style reduction (1, 2, 4 or 8, at most max_denom) to decode a stored w x h image
 * at: the largest whose reduced fit box, after orientation, is still at least 1.5 times the
 * resampled size on both axes, so the resampler keeps reducing enough to hide the reduction
 * (docs/pixels.md 1a gives the rule, docs/resize.md the measured quality). 1 when r->dct_scale
 * is off and for the nearest and box filters. */
uint32_t kiln_prep_choose_denom(const struct kiln_recipe *r, uint32_t w, uint32_t h,
                                uint32_t orientation, uint32_t max_denom);

/* How the pixels given to kiln_prep_record relate to the stored picture. */
struct kiln_prep_source {
    uint32_t width, height; /* the stored picture at full size, before orientation */
    uint32_t denom;         /* decoded at 1/denom (JPEG DCT reduction, sides rounded up); or 1 */
    uint32_t orientation;   /* stored EXIF value; ignored when r->orient is false */
    bool oriented;          /* the pixels already have that orientation applied */
};

/* Turns img (pixels as src describes; it may be consumed as scratch) into one record of
 * kiln_recipe_record_bytes(r) bytes at out, in r->depth integers (host order for 16-bit) and
 * r->layout. The fit is computed on the full-size oriented picture whatever the reduction, so a
 * reduced decode changes no geometry. KILN_EINTERNAL when img's size does not match src. */
int kiln_prep_record(struct kiln_prep *p, const struct kiln_recipe *r, struct kiln_image *img,
                     const struct kiln_prep_source *src, void *out, struct kiln_err *err);

/* Row by row, for a picture too large to decode whole: the same record, bit for bit, as
 * kiln_prep_record on the whole decoded picture, holding about one row of it plus the
 * resampler's intermediate rows (out width x picture height samples). Possible when the pixels
 * are full size (denom 1) and the orientation applied needs no transpose (1 to 4): that is what
 * kiln_prep_streams says. _begin takes the stored picture's channels and depth; _row takes
 * stored row y (0 to height - 1, each once, in any order), packed; _end writes the record. */
bool kiln_prep_streams(const struct kiln_recipe *r, const struct kiln_prep_source *src);
int kiln_prep_stream_begin(struct kiln_prep *p, const struct kiln_recipe *r,
                           const struct kiln_prep_source *src, unsigned channels,
                           unsigned depth, struct kiln_err *err);
int kiln_prep_stream_row(struct kiln_prep *p, uint32_t y, const void *row, struct kiln_err *err);
int kiln_prep_stream_end(struct kiln_prep *p, void *out, struct kiln_err *err);

#endif
