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

uint32_t kiln_prep_choose_denom(const struct kiln_recipe *r, uint32_t w, uint32_t h,
                                uint32_t orientation, uint32_t max_denom)
{
    if (!r->dct_scale || max_denom <= 1)
        return 1;
    const int swap = r->orient && orientation >= 5 && orientation <= 8;
    uint32_t best = 1;
    for (uint32_t d = 2; d <= 8 && d <= max_denom; d *= 2) {
        uint32_t sw = (uint32_t)(((uint64_t)w + d - 1) / d), sh = (uint32_t)(((uint64_t)h + d - 1) / d);
        if (swap) {
            uint32_t t = sw;
            sw = sh;
            sh = t;
        }
        struct kiln_fit_geometry g;
        kiln_fit_compute(sw, sh, r->width, r->height, r->fit, &g);
        if (g.src.w >= g.inner_w && g.src.h >= g.inner_h)
            best = d;
        else
            break;
    }
    return best;
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

int kiln_prep_record(struct kiln_prep *p, const struct kiln_recipe *r, struct kiln_image *img,
                     uint32_t orientation, void *out, struct kiln_err *err)
{
    int rc;
    struct kiln_image *cur = img;
    if (r->orient && orientation >= 2 && orientation <= 8) {
        rc = kiln_orient(cur, orientation, &p->a, err);
        if (rc)
            return rc;
        cur = &p->a;
    }
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
    kiln_fit_compute(cur->width, cur->height, r->width, r->height, r->fit, &g);
    {
        struct kiln_image *dst = cur == &p->a ? &p->b : &p->a;
        rc = kiln_resize(&p->rs, cur, &g.src, g.inner_w, g.inner_h, r->filter, dst, err);
        if (rc)
            return rc;
        cur = dst;
    }
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
    if (g.inner_w != r->width || g.inner_h != r->height)
        fill_pad(r, out);
    place(cur, r, g.off_x, g.off_y, out);
    return KILN_OK;
}
