/* Unit tests for core/convert: bit depth, BT.601 luma, alpha compositing, EXIF orientation. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/convert.h"

/* 16 -> 8: round(v * 255 / 65535), halves up. Since 65535 = 255 * 257 this is round(v / 257),
 * i.e. floor(v/257 + 1/2) = floor((2v + 257) / 514), computed here in exact integers by a
 * different route than kiln's. v/257 is never a half-integer (that would need 2v = 257(2k+1),
 * odd), so there are no ties to break. */
static void test_u16_to_u8_all(void **state)
{
    (void)state;
    for (uint32_t v = 0; v <= 65535; v++) {
        uint32_t want = (2 * v + 257) / 514;
        if (kiln_u16_to_u8(v) != want) {
            print_error("v=%u: got %u want %u\n", v, kiln_u16_to_u8(v), want);
            fail();
        }
        /* the same value from libm rounding of the real quotient (no ties, see above) */
        assert_int_equal(kiln_u16_to_u8(v), (uint32_t)floor((double)v * 255.0 / 65535.0 + 0.5));
    }
    /* hand-computed: 128/257 = 0.498 -> 0, 129/257 = 0.502 -> 1, 65535 -> 255 */
    assert_int_equal(kiln_u16_to_u8(128), 0);
    assert_int_equal(kiln_u16_to_u8(129), 1);
    assert_int_equal(kiln_u16_to_u8(65535), 255);
    assert_int_equal(kiln_u16_to_u8(32767), 127); /* 127.498 */
    assert_int_equal(kiln_u16_to_u8(32768), 128); /* 127.502 */
}

/* 8 -> 16: v * 257 = v * 65535 / 255 exactly (bit replication v<<8 | v, common practice, as in
 * libpng's 8-to-16 expansion), and 16 -> 8 maps it back exactly. */
static void test_u8_to_u16_all(void **state)
{
    (void)state;
    for (uint32_t v = 0; v < 256; v++) {
        assert_int_equal(kiln_u8_to_u16(v), (v << 8) | v);
        assert_int_equal(kiln_u8_to_u16(v) * 255u, v * 65535u);
        assert_int_equal(kiln_u16_to_u8(kiln_u8_to_u16(v)), v);
    }
}

static void test_convert_depth_image(void **state)
{
    (void)state;
    struct kiln_image a = {0}, b = {0}, c = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_image_reshape(&a, 256, 1, 1, 8, &err), KILN_OK);
    for (int i = 0; i < 256; i++)
        ((uint8_t *)a.data)[i] = (uint8_t)i;
    assert_int_equal(kiln_convert_depth(&a, 16, &b, &err), KILN_OK);
    assert_int_equal(b.depth, 16);
    for (int i = 0; i < 256; i++)
        assert_int_equal(((uint16_t *)b.data)[i], i * 257);
    assert_int_equal(kiln_convert_depth(&b, 8, &c, &err), KILN_OK);
    assert_memory_equal(c.data, a.data, 256);
    /* 16-bit values 0, 128, 129, 65535 -> 0, 0, 1, 255 (hand arithmetic, see above) */
    assert_int_equal(kiln_image_reshape(&b, 2, 2, 1, 16, &err), KILN_OK);
    const uint16_t v[4] = {0, 128, 129, 65535};
    memcpy(b.data, v, sizeof v);
    assert_int_equal(kiln_convert_depth(&b, 8, &c, &err), KILN_OK);
    const uint8_t want[4] = {0, 0, 1, 255};
    assert_memory_equal(c.data, want, 4);
    assert_int_equal(kiln_convert_depth(&b, 12, &c, &err), KILN_EINVAL);
    kiln_image_free(&a);
    kiln_image_free(&b);
    kiln_image_free(&c);
}

/* ITU-R BT.601-7 luma E'Y = 0.299 E'R + 0.587 E'G + 0.114 E'B (weights from memory of the
 * Recommendation), rounded to nearest. The reference is the real-valued formula in double
 * precision. BT.601 says nothing about rounding: exact ties (the sum ends in .500) go up by
 * kiln's documented rule (convert.h); they are caught by the 1e-6 window, and every other
 * value is at least 0.001 from a half-integer, far beyond the double rounding error. */
static uint32_t luma_ref(uint32_t r, uint32_t g, uint32_t b)
{
    double y = 0.299 * r + 0.587 * g + 0.114 * b;
    double f = floor(y);
    if (fabs(y - f - 0.5) < 1e-6)
        return (uint32_t)f + 1;
    return (uint32_t)floor(y + 0.5);
}

static void test_luma601(void **state)
{
    (void)state;
    /* primaries, white and black, by hand: 0.299*255 = 76.245, 0.587*255 = 149.685,
     * 0.114*255 = 29.07; 16-bit: 19594.965, 38469.045, 7470.99 */
    assert_int_equal(kiln_luma601(0, 0, 0), 0);
    assert_int_equal(kiln_luma601(255, 255, 255), 255);
    assert_int_equal(kiln_luma601(255, 0, 0), 76);
    assert_int_equal(kiln_luma601(0, 255, 0), 150);
    assert_int_equal(kiln_luma601(0, 0, 255), 29);
    assert_int_equal(kiln_luma601(65535, 65535, 65535), 65535);
    assert_int_equal(kiln_luma601(65535, 0, 0), 19595);
    assert_int_equal(kiln_luma601(0, 65535, 0), 38469);
    assert_int_equal(kiln_luma601(0, 0, 65535), 7471);
    /* the weights sum to 1 (0.299 + 0.587 + 0.114), so R = G = B = v gives v */
    for (uint32_t v = 0; v < 256; v++)
        assert_int_equal(kiln_luma601(v, v, v), v);
    /* 8-bit grid, step 5 in each channel (52^3 colours) */
    for (uint32_t r = 0; r < 256; r += 5)
        for (uint32_t g = 0; g < 256; g += 5)
            for (uint32_t b = 0; b < 256; b += 5)
                if (kiln_luma601(r, g, b) != luma_ref(r, g, b)) {
                    print_error("luma(%u,%u,%u) = %u, want %u\n", r, g, b, kiln_luma601(r, g, b),
                                luma_ref(r, g, b));
                    fail();
                }
    /* 16-bit grid, step 1285 = 65535/51 */
    for (uint32_t r = 0; r <= 65535; r += 1285)
        for (uint32_t g = 0; g <= 65535; g += 1285)
            for (uint32_t b = 0; b <= 65535; b += 1285)
                assert_int_equal(kiln_luma601(r, g, b), luma_ref(r, g, b));
}

/* Porter-Duff "over" onto an opaque background (Porter & Duff 1984): out = c*alpha +
 * bg*(1 - alpha), alpha = a/M, rounded to nearest; M = 255 or 65535 is odd, so
 * (c*a + bg*(M-a))/M is never a half-integer and double rounding is exact here. */
static uint32_t over_ref(uint32_t c, uint32_t a, uint32_t bg, uint32_t M)
{
    double alpha = (double)a / M;
    return (uint32_t)floor(c * alpha + bg * (1.0 - alpha) + 0.5);
}

static void test_alpha_over_background(void **state)
{
    (void)state;
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    const uint8_t white[3] = {255, 255, 255}, bg[3] = {10, 128, 250};
    /* grey+alpha, every (value, alpha) pair, over white, to 1 channel: background luma 255 */
    assert_int_equal(kiln_image_reshape(&in, 256, 256, 2, 8, &err), KILN_OK);
    uint8_t *p = in.data;
    for (int a = 0; a < 256; a++)
        for (int v = 0; v < 256; v++, p += 2) {
            p[0] = (uint8_t)v;
            p[1] = (uint8_t)a;
        }
    assert_int_equal(kiln_convert_channels(&in, 1, white, &out, &err), KILN_OK);
    assert_int_equal(out.channels, 1);
    const uint8_t *o = out.data;
    for (uint32_t a = 0; a < 256; a++)
        for (uint32_t v = 0; v < 256; v++)
            assert_int_equal(o[a * 256 + v], over_ref(v, a, 255, 255));
    /* chosen values by hand: black at alpha 128 over white = 255*127/255 = 127; 200 at alpha
     * 64 = 200*64/255 + 255*191/255 = 50.196 + 191 = 241.196 -> 241 */
    assert_int_equal(o[128 * 256 + 0], 127);
    assert_int_equal(o[64 * 256 + 200], 241);
    assert_int_equal(o[0 * 256 + 77], 255);   /* fully transparent: background */
    assert_int_equal(o[255 * 256 + 77], 77);  /* opaque: unchanged */

    /* RGBA over a coloured background, to RGB */
    assert_int_equal(kiln_image_reshape(&in, 4, 1, 4, 8, &err), KILN_OK);
    const uint8_t rgba[16] = {0, 0, 0, 0, 255, 255, 255, 255, 200, 100, 0, 64, 50, 60, 70, 191};
    memcpy(in.data, rgba, sizeof rgba);
    assert_int_equal(kiln_convert_channels(&in, 3, bg, &out, &err), KILN_OK);
    o = out.data;
    for (int i = 0; i < 4; i++)
        for (int c = 0; c < 3; c++)
            assert_int_equal(o[3 * i + c], over_ref(rgba[4 * i + c], rgba[4 * i + 3], bg[c], 255));
    assert_memory_equal(o, bg, 3); /* alpha 0 gives the background */
    /* keeping 4 channels leaves alpha and colour untouched */
    assert_int_equal(kiln_convert_channels(&in, 4, bg, &out, &err), KILN_OK);
    assert_memory_equal(out.data, rgba, sizeof rgba);
    /* RGBA to grey: composite, then BT.601 luma */
    assert_int_equal(kiln_convert_channels(&in, 1, bg, &out, &err), KILN_OK);
    for (int i = 0; i < 4; i++) {
        uint32_t r = over_ref(rgba[4 * i], rgba[4 * i + 3], bg[0], 255),
                 g = over_ref(rgba[4 * i + 1], rgba[4 * i + 3], bg[1], 255),
                 b = over_ref(rgba[4 * i + 2], rgba[4 * i + 3], bg[2], 255);
        assert_int_equal(((uint8_t *)out.data)[i], luma_ref(r, g, b));
    }

    /* 16-bit RGBA: the background is scaled by 257 (convert.h) */
    assert_int_equal(kiln_image_reshape(&in, 3, 1, 4, 16, &err), KILN_OK);
    const uint16_t rgba16[12] = {0, 0, 0, 32768, 65535, 1000, 40000, 1, 12345, 54321, 777, 65534};
    memcpy(in.data, rgba16, sizeof rgba16);
    assert_int_equal(kiln_convert_channels(&in, 3, white, &out, &err), KILN_OK);
    const uint16_t *o16 = out.data;
    for (int i = 0; i < 3; i++)
        for (int c = 0; c < 3; c++)
            assert_int_equal(o16[3 * i + c],
                             over_ref(rgba16[4 * i + c], rgba16[4 * i + 3], 65535, 65535));
    /* black at alpha 32768 over white: 65535 * 32767/65535 = 32767 exactly */
    assert_int_equal(o16[0], 32767);

    /* grey to RGB replicates; RGB to grey is luma */
    assert_int_equal(kiln_image_reshape(&in, 2, 1, 1, 8, &err), KILN_OK);
    ((uint8_t *)in.data)[0] = 9;
    ((uint8_t *)in.data)[1] = 250;
    assert_int_equal(kiln_convert_channels(&in, 3, white, &out, &err), KILN_OK);
    const uint8_t rep[6] = {9, 9, 9, 250, 250, 250};
    assert_memory_equal(out.data, rep, 6);
    assert_int_equal(kiln_convert_channels(&in, 2, white, &out, &err), KILN_EINVAL);
    kiln_image_free(&in);
    kiln_image_free(&out);
}

/* EXIF orientation, CIPA DC-008 (Exif 2.3) tag 0x0112, written out by hand for the stored
 * 3x2 image   a b c
 *             d e f
 * 1: 0th row top, 0th column left (as stored);   2: row top, column right (mirror);
 * 3: row bottom, column right (rotate 180);       4: row bottom, column left (flip);
 * 5: row left, column top (transpose);            6: row right, column top (display needs a
 * 90 degree clockwise rotation);                  7: row right, column bottom (transverse);
 * 8: row left, column bottom (90 degrees counter-clockwise). */
static const struct {
    unsigned w, h;
    const char *px; /* displayed image, row by row */
} exif_table[9] = {
    {0, 0, NULL},
    {3, 2, "abcdef"},
    {3, 2, "cbafed"},
    {3, 2, "fedcba"},
    {3, 2, "defabc"},
    {2, 3, "adbecf"},
    {2, 3, "daebfc"},
    {2, 3, "fcebda"},
    {2, 3, "cfbead"},
};

static void test_orient_table(void **state)
{
    (void)state;
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_image_reshape(&in, 3, 2, 1, 8, &err), KILN_OK);
    memcpy(in.data, "abcdef", 6);
    for (unsigned o = 1; o <= 8; o++) {
        assert_int_equal(kiln_orient(&in, o, &out, &err), KILN_OK);
        assert_int_equal(out.width, exif_table[o].w);
        assert_int_equal(out.height, exif_table[o].h);
        if (memcmp(out.data, exif_table[o].px, 6) != 0) {
            print_error("orientation %u: got %.6s, want %s\n", o, (const char *)out.data,
                        exif_table[o].px);
            fail();
        }
    }
    /* values outside 1-8 are treated as 1 (convert.h) */
    assert_int_equal(kiln_orient(&in, 0, &out, &err), KILN_OK);
    assert_memory_equal(out.data, "abcdef", 6);
    assert_int_equal(kiln_orient(&in, 9, &out, &err), KILN_OK);
    assert_memory_equal(out.data, "abcdef", 6);

    /* 16-bit RGB pixels move as whole pixels: pixel k has samples (1000k, 1000k+1, 1000k+2) */
    assert_int_equal(kiln_image_reshape(&in, 3, 2, 3, 16, &err), KILN_OK);
    uint16_t *s = in.data;
    for (int k = 0; k < 6; k++)
        for (int c = 0; c < 3; c++)
            s[3 * k + c] = (uint16_t)(1000 * k + c);
    for (unsigned o = 1; o <= 8; o++) {
        assert_int_equal(kiln_orient(&in, o, &out, &err), KILN_OK);
        assert_int_equal(out.width, exif_table[o].w);
        assert_int_equal(out.stride, (size_t)exif_table[o].w * 3 * 2);
        const uint16_t *d = out.data;
        for (int k = 0; k < 6; k++) {
            int src = exif_table[o].px[k] - 'a';
            for (int c = 0; c < 3; c++)
                assert_int_equal(d[3 * k + c], 1000 * src + c);
        }
    }
    kiln_image_free(&in);
    kiln_image_free(&out);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_u16_to_u8_all),       cmocka_unit_test(test_u8_to_u16_all),
        cmocka_unit_test(test_convert_depth_image), cmocka_unit_test(test_luma601),
        cmocka_unit_test(test_alpha_over_background), cmocka_unit_test(test_orient_table),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
