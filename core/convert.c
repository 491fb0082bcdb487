/* Orientation, channel and depth conversion. Kept separate from resampling so each rule can be
 * tested exhaustively on its own. */
#include "convert.h"

#include <string.h>

int kiln_orient(const struct kiln_image *in, unsigned orientation, struct kiln_image *out,
                struct kiln_err *err)
{
    if (orientation < 1 || orientation > 8)
        orientation = 1;
    const uint32_t W = in->width, H = in->height;
    const int swap = orientation >= 5;
    int rc = kiln_image_reshape(out, swap ? H : W, swap ? W : H, in->channels, in->depth, err);
    if (rc)
        return rc;
    if (W == 0 || H == 0)
        return KILN_OK;
    /* Source pixel index = base + x' * dx + y' * dy for display pixel (x', y'); the eight rows
     * follow the CIPA DC-008 meaning of "row 0 / column 0" for each orientation value. */
    const int64_t w = W, h = H;
    int64_t base, dx, dy;
    switch (orientation) {
    case 2: base = w - 1; dx = -1; dy = w; break;
    case 3: base = (h - 1) * w + w - 1; dx = -1; dy = -w; break;
    case 4: base = (h - 1) * w; dx = 1; dy = -w; break;
    case 5: base = 0; dx = w; dy = 1; break;
    case 6: base = (h - 1) * w; dx = -w; dy = 1; break;
    case 7: base = (h - 1) * w + w - 1; dx = -w; dy = -1; break;
    case 8: base = w - 1; dx = w; dy = -1; break;
    default: base = 0; dx = 1; dy = w; break;
    }
    const size_t px = (size_t)in->channels * (in->depth / 8);
    const uint8_t *src = in->data;
    uint8_t *dst = out->data;
    for (uint32_t y = 0; y < out->height; y++) {
        int64_t s = base + (int64_t)y * dy;
        uint8_t *d = dst + (size_t)y * out->stride;
        for (uint32_t x = 0; x < out->width; x++, s += dx, d += px)
            memcpy(d, src + (size_t)s * px, px);
    }
    return KILN_OK;
}

/* Alpha compositing over a background value, rounded to nearest: (c*a + bg*(M-a) + M/2) / M. */
static inline uint32_t over(uint32_t c, uint32_t a, uint32_t bg, uint32_t maxv)
{
    return (uint32_t)(((uint64_t)c * a + (uint64_t)bg * (maxv - a) + maxv / 2) / maxv);
}

#define CONVERT_LOOP(T)                                                                            \
    do {                                                                                           \
        const T *s = (const T *)in->data;                                                          \
        T *d = (T *)out->data;                                                                     \
        for (size_t i = 0; i < npx; i++, s += ic, d += oc) {                                       \
            uint32_t r, g, b, a = maxv;                                                            \
            if (ic <= 2) {                                                                         \
                r = g = b = s[0];                                                                  \
                if (ic == 2)                                                                       \
                    a = s[1];                                                                      \
            } else {                                                                               \
                r = s[0];                                                                          \
                g = s[1];                                                                          \
                b = s[2];                                                                          \
                if (ic == 4)                                                                       \
                    a = s[3];                                                                      \
            }                                                                                      \
            if (oc == 4) {                                                                         \
                d[0] = (T)r;                                                                       \
                d[1] = (T)g;                                                                       \
                d[2] = (T)b;                                                                       \
                d[3] = (T)a;                                                                       \
                continue;                                                                          \
            }                                                                                      \
            if (a != maxv) {                                                                       \
                if (ic <= 2) {                                                                     \
                    r = g = b = over(r, a, bgy, maxv);                                             \
                } else {                                                                           \
                    r = over(r, a, bgr, maxv);                                                     \
                    g = over(g, a, bgg, maxv);                                                     \
                    b = over(b, a, bgb, maxv);                                                     \
                }                                                                                  \
            }                                                                                      \
            if (oc == 1) {                                                                         \
                d[0] = (T)(ic <= 2 ? r : kiln_luma601(r, g, b));                                   \
            } else {                                                                               \
                d[0] = (T)r;                                                                       \
                d[1] = (T)g;                                                                       \
                d[2] = (T)b;                                                                       \
            }                                                                                      \
        }                                                                                          \
    } while (0)

int kiln_convert_channels(const struct kiln_image *in, unsigned channels,
                          const uint8_t background[3], struct kiln_image *out, struct kiln_err *err)
{
    if (channels != 1 && channels != 3 && channels != 4)
        return kiln_err_set(err, KILN_EINVAL, "channels must be 1, 3 or 4, not %u", channels);
    int rc = kiln_image_reshape(out, in->width, in->height, channels, in->depth, err);
    if (rc)
        return rc;
    const size_t npx = (size_t)in->width * in->height;
    const unsigned ic = in->channels, oc = channels;
    const uint32_t maxv = in->depth == 16 ? 65535u : 255u;
    const uint32_t scale = in->depth == 16 ? 257u : 1u;
    const uint32_t bgr = background[0] * scale, bgg = background[1] * scale,
                   bgb = background[2] * scale;
    const uint32_t bgy = kiln_luma601(bgr, bgg, bgb);
    if (in->depth == 16)
        CONVERT_LOOP(uint16_t);
    else
        CONVERT_LOOP(uint8_t);
    return KILN_OK;
}

int kiln_convert_depth(const struct kiln_image *in, unsigned depth, struct kiln_image *out,
                       struct kiln_err *err)
{
    if (depth != 8 && depth != 16)
        return kiln_err_set(err, KILN_EINVAL, "depth must be 8 or 16, not %u", depth);
    int rc = kiln_image_reshape(out, in->width, in->height, in->channels, depth, err);
    if (rc)
        return rc;
    const size_t n = (size_t)in->width * in->height * in->channels;
    if (in->depth == depth) {
        memcpy(out->data, in->data, n * (depth / 8));
    } else if (depth == 8) {
        const uint16_t *s = in->data;
        uint8_t *d = out->data;
        for (size_t i = 0; i < n; i++)
            d[i] = kiln_u16_to_u8(s[i]);
    } else {
        const uint8_t *s = in->data;
        uint16_t *d = out->data;
        for (size_t i = 0; i < n; i++)
            d[i] = kiln_u8_to_u16(s[i]);
    }
    return KILN_OK;
}
