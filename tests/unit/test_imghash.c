/* Unit tests for core/imghash: the pixel digest and the difference hash, each checked against
 * values computed outside kiln with /usr/bin/python3 (hashlib, numpy, PIL), following the
 * definitions in docs/split.md. The script is quoted beside each value. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <string.h>

#include "../../core/imghash.h"
#include "../../core/resize.h"
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

static uint64_t dhash(const struct kiln_image *img)
{
    struct kiln_image scratch[2];
    memset(scratch, 0, sizeof scratch);
    struct kiln_resizer rs;
    kiln_resizer_init(&rs);
    struct kiln_err err;
    uint64_t h = 0;
    assert_int_equal(kiln_imghash_dhash(img, scratch, &rs, &h, &err), KILN_OK);
    kiln_image_free(&scratch[0]);
    kiln_image_free(&scratch[1]);
    kiln_resizer_free(&rs);
    return h;
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

/* 18x16 grey whose 2x2 blocks are constant, value ((x//2)*37 + (y//2)*91) % 256: the box
 * filter's 9x8 thumbnail is exact. Reference (PIL and numpy):
 *   t = np.asarray(Image.fromarray(g).resize((9, 8), Image.BOX)).astype(int)
 *   bits = (t[:, 1:] > t[:, :-1]).flatten()   # row by row, first bit most significant
 * gives 0xfdf7bffdefbffbef. */
static void test_dhash_grey_box(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 18, 16, 1, 8);
    uint8_t *p = img.data;
    for (int y = 0; y < 16; y++)
        for (int x = 0; x < 18; x++)
            p[y * 18 + x] = (uint8_t)(((x / 2) * 37 + (y / 2) * 91) % 256);
    assert_true(dhash(&img) == 0xfdf7bffdefbffbefull);
    kiln_image_free(&img);
}

/* 9x8 RGB, pixel (x, y) = ((x*53+y*29) % 256, (x*17+y*101) % 256, (x*71+y*7) % 256). Reference:
 * PIL's convert('L') (ITU-R 601-2 luma) then the bits as above: 0xf7f7efefdc5dbd6b. Adjacent
 * lumas differ by at least 4, so rounding differences between the two luma formulas cannot
 * flip a bit. */
static void test_dhash_rgb(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 9, 8, 3, 8);
    uint8_t *p = img.data;
    for (int y = 0; y < 8; y++)
        for (int x = 0; x < 9; x++) {
            p[(y * 9 + x) * 3 + 0] = (uint8_t)((x * 53 + y * 29) % 256);
            p[(y * 9 + x) * 3 + 1] = (uint8_t)((x * 17 + y * 101) % 256);
            p[(y * 9 + x) * 3 + 2] = (uint8_t)((x * 71 + y * 7) % 256);
        }
    assert_true(dhash(&img) == 0xf7f7efefdc5dbd6bull);
    kiln_image_free(&img);
}

/* 9x8 16-bit grey, v * 257 for v = (x*53+y*29) % 256: the 8-bit form is v exactly. Reference
 * (numpy, bits as above on v): 0xf7f7efefdeddbd7b. */
static void test_dhash_grey16(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 9, 8, 1, 16);
    uint16_t *p = img.data;
    for (int y = 0; y < 8; y++)
        for (int x = 0; x < 9; x++)
            p[y * 9 + x] = (uint16_t)(((x * 53 + y * 29) % 256) * 257);
    assert_true(dhash(&img) == 0xf7f7efefdeddbd7bull);
    kiln_image_free(&img);
}

/* Equal neighbours give 0 bits: 9x8 grey ((x//3)*50 + y*7) % 256, steps every third column.
 * Reference (numpy, bits as above): 0x2424242424242424. */
static void test_dhash_ties(void **state)
{
    (void)state;
    struct kiln_image img;
    make(&img, 9, 8, 1, 8);
    uint8_t *p = img.data;
    for (int y = 0; y < 8; y++)
        for (int x = 0; x < 9; x++)
            p[y * 9 + x] = (uint8_t)(((x / 3) * 50 + y * 7) % 256);
    assert_true(dhash(&img) == 0x2424242424242424ull);
    kiln_image_free(&img);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_digest_rgb8),    cmocka_unit_test(test_digest_grey16),
        cmocka_unit_test(test_dhash_grey_box), cmocka_unit_test(test_dhash_rgb),
        cmocka_unit_test(test_dhash_grey16),   cmocka_unit_test(test_dhash_ties),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
