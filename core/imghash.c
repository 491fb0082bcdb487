/* The pixel digest and the difference hash of a decoded picture (docs/split.md). */
#include "imghash.h"

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
