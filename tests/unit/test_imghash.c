/* Unit tests for core/imghash: the pixel digest, checked against values computed outside kiln
 * with /usr/bin/python3 (hashlib), following the definition in docs/split.md. The script is
 * quoted beside each value. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <string.h>

#include "../../core/imghash.h"
#include "../../core/sha256.h"

static void make(struct kiln_image *img, uint32_t w, uint32_t h, uint32_t c, uint32_t depth)
{
    struct kiln_err err;
    memset(img, 0, sizeof *img);
    assert_int_equal(kiln_image_reshape(img, w, h, c, depth, &err), KILN_OK);
}

static void digest_hex(const struct kiln_image *img, char hex[KILN_SHA256_HEX])
{
    uint8_t d[KILN_SHA256_LEN];
    struct kiln_err err;
    assert_int_equal(kiln_imghash_pixels(img, d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
}

/* 8-bit RGB 3x2, samples (i*37+11) % 256. Reference (hashlib):
 *   px = bytes((i*37+11) % 256 for i in range(18))
 *   hashlib.sha256(struct.pack('<4I', 3, 2, 3, 8) + px).hexdigest() */
static void test_digest_rgb8(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 3, 2, 3, 8);
    for (int i = 0; i < 18; i++)
        ((uint8_t *)img.data)[i] = (uint8_t)((i * 37 + 11) % 256);
    char hex[KILN_SHA256_HEX];
    digest_hex(&img, hex);
    assert_string_equal(hex, "da311199bbd59beb8b55971793d1e86285f2aef49edd9a66bace5262372fb6a9");
    kiln_image_free(&img);
}

/* 16-bit grey 2x2: samples are written little-endian whatever the host. Reference (hashlib):
 *   hashlib.sha256(struct.pack('<4I', 2, 2, 1, 16)
 *                  + struct.pack('<4H', 0x0102, 0xfffe, 0x8000, 0x00ff)).hexdigest() */
static void test_digest_grey16(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 2, 2, 1, 16);
    const uint16_t v[4] = {0x0102, 0xfffe, 0x8000, 0x00ff};
    memcpy(img.data, v, sizeof v);
    char hex[KILN_SHA256_HEX];
    digest_hex(&img, hex);
    assert_string_equal(hex, "ccf3cb60a9f443fbdba8a6acd82d1a434d95ceee5545ee1adf5c1e046a5f00dd");
    /* The digest covers the shape: the same bytes as 4x1 are another picture. */
    img.width = 4;
    img.height = 1;
    img.stride = 8;
    digest_hex(&img, hex);
    assert_string_not_equal(hex,
                            "ccf3cb60a9f443fbdba8a6acd82d1a434d95ceee5545ee1adf5c1e046a5f00dd");
    kiln_image_free(&img);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_digest_rgb8),
        cmocka_unit_test(test_digest_grey16),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
