/* The pixel digest and the difference hash of a decoded picture (docs/split.md). */
#include "imghash.h"

#include "convert.h"
#include "resize.h"
#include "sha256.h"

static int host_little_endian(void)
{
    const uint16_t one = 1;
    return *(const uint8_t *)&one == 1;
}

int kiln_imghash_pixels(const struct kiln_image *img, uint8_t out[32], struct kiln_err *err)
{
    struct kiln_sha256 ctx;
    int rc = kiln_sha256_init(&ctx, err);
    if (rc)
        return rc;
    uint8_t head[16];
    const uint32_t v[4] = {img->width, img->height, img->channels, img->depth};
    for (int i = 0; i < 4; i++)
        for (int b = 0; b < 4; b++)
            head[4 * i + b] = (uint8_t)(v[i] >> (8 * b));
    kiln_sha256_update(&ctx, head, sizeof head);
    if (img->depth == 8 || host_little_endian()) {
        kiln_sha256_update(&ctx, img->data, (size_t)img->height * img->stride);
    } else {
        uint8_t buf[4096];
        const uint16_t *s = img->data;
        size_t n = (size_t)img->height * img->stride / 2, k = 0;
        for (size_t i = 0; i < n; i++) {
            buf[k++] = (uint8_t)s[i];
            buf[k++] = (uint8_t)(s[i] >> 8);
            if (k == sizeof buf) {
                kiln_sha256_update(&ctx, buf, k);
                k = 0;
            }
        }
        kiln_sha256_update(&ctx, buf, k);
    }
    rc = kiln_sha256_final(&ctx, out, err);
    kiln_sha256_free(&ctx);
    return rc;
}

int kiln_imghash_dhash(const struct kiln_image *img, struct kiln_image scratch[2],
                       struct kiln_resizer *rs, uint64_t *out, struct kiln_err *err)
{
    static const uint8_t white[3] = {255, 255, 255};
    const struct kiln_image *cur = img;
    int rc;
    if (cur->channels != 1) {
        rc = kiln_convert_channels(cur, 1, white, &scratch[0], err);
        if (rc)
            return rc;
        cur = &scratch[0];
    }
    if (cur->depth != 8) {
        struct kiln_image *dst = cur == &scratch[0] ? &scratch[1] : &scratch[0];
        rc = kiln_convert_depth(cur, 8, dst, err);
        if (rc)
            return rc;
        cur = dst;
    }
    struct kiln_image *small = cur == &scratch[0] ? &scratch[1] : &scratch[0];
    rc = kiln_resize(rs, cur, NULL, 9, 8, KILN_FILTER_BOX, small, err);
    if (rc)
        return rc;
    const uint8_t *p = small->data;
    uint64_t h = 0;
    for (int y = 0; y < 8; y++)
        for (int x = 0; x < 8; x++)
            h = h << 1 | (p[y * 9 + x + 1] > p[y * 9 + x]);
    *out = h;
    return KILN_OK;
}
