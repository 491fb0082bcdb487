/* The per-image transformation chain of pack. */
#include "prepare.h"

#include <stdbool.h>
#include <string.h>

#include "convert.h"

void kiln_prep_init(struct kiln_prep *p)
{
    memset(p, 0, sizeof *p);
    kiln_resizer_init(&p->rs);
}

void kiln_prep_free(struct kiln_prep *p)
{
    kiln_image_free(&p->a);
    kiln_image_free(&p->b);
    kiln_resizer_free(&p->rs);
}

/* A side decoded at 1/denom: ceil(side / denom), libjpeg's rounding. */
static uint32_t reduced_side(uint32_t side, uint32_t denom)
{
    return (uint32_t)(((uint64_t)side + denom - 1) / denom);
}

/* The orientation prep applies: the stored value when orienting, 1 otherwise (kiln_orient also
 * treats values outside 1..8 as 1). */
static uint32_t applied_orientation(const struct kiln_recipe *r, uint32_t orientation)
{
    return r->orient && orientation >= 1 && orientation <= 8 ? orientation : 1;
}

uint32_t kiln_prep_choose_denom(const struct kiln_recipe *r, uint32_t w, uint32_t h,
                                uint32_t orientation, uint32_t max_denom)
{
    /* Nearest takes one full-size pixel and box has a window with hard edges; a block average
     * can stand in for neither (docs/resize.md, "Reduced sources"). */
    if (!r->dct_scale || max_denom <= 1 || r->filter == KILN_FILTER_NEAREST ||
        r->filter == KILN_FILTER_BOX)
        return 1;
    if (applied_orientation(r, orientation) >= 5) {
        uint32_t t = w;
        w = h;
        h = t;
    }
    struct kiln_fit_geometry g;
    kiln_fit_compute(w, h, r->width, r->height, r->fit, &g);
    uint32_t best = 1;
    for (uint32_t d = 2; d <= 8 && d <= max_denom; d *= 2) {
        /* box / d >= 1.5 * inner on both axes, in integers. */
        if (2 * (uint64_t)g.src.w >= 3 * (uint64_t)d * g.inner_w &&
            2 * (uint64_t)g.src.h >= 3 * (uint64_t)d * g.inner_h)
            best = d;
        else
            break;
    }
    return best;
}

/* Where the pixels of a 1/denom decode lie on the full-size grid once oriented: orientations
 * that reverse an axis (CIPA DC-008: x for 2, 3, 6, 7; y for 3, 4, 7, 8) bring the partial
 * block of the stored image's far edge to the front, so the grid starts that part early. */
static struct kiln_grid oriented_grid(uint32_t orientation, uint32_t denom, uint32_t full_w,
                                      uint32_t full_h)
{
    const uint32_t over_w = (uint32_t)((uint64_t)reduced_side(full_w, denom) * denom - full_w);
    const uint32_t over_h = (uint32_t)((uint64_t)reduced_side(full_h, denom) * denom - full_h);
    const bool rev_x = orientation == 2 || orientation == 3 || orientation == 6 || orientation == 7;
    const bool rev_y = orientation == 3 || orientation == 4 || orientation == 7 || orientation == 8;
    return (struct kiln_grid){denom, rev_x ? over_w : 0, rev_y ? over_h : 0};
}

/* Writes the interleaved image into the record at (off_x, off_y), converting the layout. */
static void place(const struct kiln_image *src, const struct kiln_recipe *r, uint32_t off_x,
                  uint32_t off_y, void *out)
{
    const size_t bps = r->depth / 8, C = r->channels, W = r->width, H = r->height;
    if (r->layout == KILN_LAYOUT_NHWC) {
        for (uint32_t y = 0; y < src->height; y++)
            memcpy((uint8_t *)out + (((size_t)(y + off_y) * W + off_x) * C) * bps,
                   (const uint8_t *)src->data + (size_t)y * src->stride, src->stride);
        return;
    }
    for (size_t c = 0; c < C; c++)
        for (uint32_t y = 0; y < src->height; y++) {
            size_t base = (c * H + y + off_y) * W + off_x;
            if (bps == 1) {
                const uint8_t *s = (const uint8_t *)src->data + (size_t)y * src->stride + c;
                uint8_t *d = (uint8_t *)out + base;
                for (uint32_t x = 0; x < src->width; x++)
                    d[x] = s[(size_t)x * C];
            } else {
                const uint16_t *s =
                    (const uint16_t *)((const uint8_t *)src->data + (size_t)y * src->stride) + c;
                uint16_t *d = (uint16_t *)out + base;
                for (uint32_t x = 0; x < src->width; x++)
                    d[x] = s[(size_t)x * C];
            }
        }
}

static void fill_pad(const struct kiln_recipe *r, void *out)
{
    const size_t C = r->channels, n = (size_t)r->width * r->height;
    for (size_t c = 0; c < C; c++) {
        uint32_t v = r->pad_value[c];
        for (size_t i = 0; i < n; i++) {
            size_t k = r->layout == KILN_LAYOUT_NHWC ? i * C + c : c * n + i;
            if (r->depth == 8)
                ((uint8_t *)out)[k] = (uint8_t)v;
            else
                ((uint16_t *)out)[k] = kiln_u8_to_u16(v);
        }
    }
}

/* After resampling (cur is p->a or p->b): depth, a late grey-to-colour widening, the frame. */
static int finish(struct kiln_prep *p, const struct kiln_recipe *r, struct kiln_image *cur,
                  bool widen_late, const struct kiln_fit_geometry *g, void *out,
                  struct kiln_err *err)
{
    int rc;
    if (cur->depth != r->depth) {
        struct kiln_image *dst = cur == &p->a ? &p->b : &p->a;
        rc = kiln_convert_depth(cur, r->depth, dst, err);
        if (rc)
            return rc;
        cur = dst;
    }
    if (widen_late) {
        struct kiln_image *dst = cur == &p->a ? &p->b : &p->a;
        rc = kiln_convert_channels(cur, r->channels, r->background, dst, err);
        if (rc)
            return rc;
        cur = dst;
    }
    if (g->inner_w != r->width || g->inner_h != r->height)
        fill_pad(r, out);
    place(cur, r, g->off_x, g->off_y, out);
    return KILN_OK;
}

int kiln_prep_record(struct kiln_prep *p, const struct kiln_recipe *r, struct kiln_image *img,
                     const struct kiln_prep_source *src, void *out, struct kiln_err *err)
{
    int rc;
    struct kiln_image *cur = img;
    const uint32_t o = applied_orientation(r, src->orientation);
    const bool swap = o >= 5;
    const uint32_t full_w = swap ? src->height : src->width;
    const uint32_t full_h = swap ? src->width : src->height;
    if (o != 1 && !src->oriented) {
        rc = kiln_orient(cur, o, &p->a, err);
        if (rc)
            return rc;
        cur = &p->a;
    }
    if (src->denom < 1 || src->denom > 8 || cur->width != reduced_side(full_w, src->denom) ||
        cur->height != reduced_side(full_h, src->denom))
        return kiln_err_set(err, KILN_EINTERNAL,
                            "decoded %ux%u is not a 1/%u decode of %ux%u after orientation",
                            cur->width, cur->height, src->denom, full_w, full_h);
    /* Grey to RGB or RGBA only copies (and adds an opaque alpha, which resampling keeps exactly
     * constant), so it commutes with resampling and depth conversion bit for bit: doing it last
     * resamples one channel instead of three or four. */
    const bool widen_late = cur->channels == 1 && r->channels >= 3;
    if (cur->channels != r->channels && !widen_late) {
        struct kiln_image *dst = cur == &p->a ? &p->b : &p->a;
        rc = kiln_convert_channels(cur, r->channels, r->background, dst, err);
        if (rc)
            return rc;
        cur = dst;
    }
    struct kiln_fit_geometry g;
    kiln_fit_compute(full_w, full_h, r->width, r->height, r->fit, &g);
    {
        const struct kiln_grid grid = oriented_grid(o, src->denom, full_w, full_h);
        struct kiln_image *dst = cur == &p->a ? &p->b : &p->a;
        rc = kiln_resize_grid(&p->rs, cur, &grid, &g.src, g.inner_w, g.inner_h, r->filter, dst,
                              err);
        if (rc)
            return rc;
        cur = dst;
    }
    return finish(p, r, cur, widen_late, &g, out, err);
}

/* ---- row by row --------------------------------------------------------------------------- */

bool kiln_prep_streams(const struct kiln_recipe *r, const struct kiln_prep_source *src)
{
    return src->denom == 1 && !src->oriented && applied_orientation(r, src->orientation) <= 4;
}

int kiln_prep_stream_begin(struct kiln_prep *p, const struct kiln_recipe *r,
                           const struct kiln_prep_source *src, unsigned channels,
                           unsigned depth, struct kiln_err *err)
{
    if (!kiln_prep_streams(r, src))
        return kiln_err_set(err, KILN_EINTERNAL, "a %ux%u picture with orientation %u cannot be "
                                                 "prepared row by row",
                            src->width, src->height, src->orientation);
    const uint32_t o = applied_orientation(r, src->orientation);
    p->s_recipe = r;
    p->s_height = src->height;
    p->s_flip_x = o == 2 || o == 3;
    p->s_flip_y = o == 3 || o == 4;
    p->s_widen_late = channels == 1 && r->channels >= 3;
    p->s_convert = channels != r->channels && !p->s_widen_late;
    kiln_fit_compute(src->width, src->height, r->width, r->height, r->fit, &p->s_geom);
    /* One stored row, its mirror image and its channel conversion. */
    int rc = kiln_image_reshape(&p->a, src->width, 1, channels, depth, err);
    if (!rc)
        rc = kiln_image_reshape(&p->b, src->width, 1, p->s_convert ? r->channels : channels, depth,
                                err);
    if (!rc)
        rc = kiln_resize_rows_begin(&p->rs, src->width, src->height,
                                    p->s_convert ? r->channels : channels, depth, &p->s_geom.src,
                                    p->s_geom.inner_w, p->s_geom.inner_h, r->filter, err);
    return rc;
}

int kiln_prep_stream_row(struct kiln_prep *p, uint32_t y, const void *row, struct kiln_err *err)
{
    /* The orientations without a transpose move rows and pixels within rows, which commutes
     * with the per-pixel channel conversion and with the horizontal pass: each stored row is one
     * row of the oriented picture. */
    const struct kiln_image *cur = &p->a;
    const size_t px = (size_t)p->a.channels * (p->a.depth / 8);
    if (p->s_flip_x) {
        const uint8_t *s = row;
        uint8_t *d = p->a.data;
        for (uint32_t x = 0; x < p->a.width; x++)
            memcpy(d + (size_t)x * px, s + (size_t)(p->a.width - 1 - x) * px, px);
    } else {
        memcpy(p->a.data, row, p->a.stride);
    }
    if (p->s_convert) {
        int rc = kiln_convert_channels(cur, p->s_recipe->channels, p->s_recipe->background, &p->b,
                                       err);
        if (rc)
            return rc;
        cur = &p->b;
    }
    kiln_resize_rows_put(&p->rs, p->s_flip_y ? p->s_height - 1 - y : y, cur->data);
    return KILN_OK;
}

int kiln_prep_stream_end(struct kiln_prep *p, void *out, struct kiln_err *err)
{
    int rc = kiln_resize_rows_end(&p->rs, &p->a, err);
    if (!rc)
        rc = finish(p, p->s_recipe, &p->a, p->s_widen_late, &p->s_geom, out, err);
    return rc;
}
