/* Unit tests for core/recipe: the --size parser and the option setter accept exactly the
 * documented forms, and finish derives the dtype and record size. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <string.h>

#include "../../core/recipe.h"
#include "../../core/resize.h"

/* "WxH" or "S", each side 1..65535 (recipe.h). */
static void test_parse_size(void **state)
{
    (void)state;
    static const struct {
        const char *text;
        uint32_t w, h;
    } ok[] = {
        {"224x224", 224, 224}, {"640x480", 640, 480}, {"640X480", 640, 480},
        {"224", 224, 224},     {"1x65535", 1, 65535}, {"65535", 65535, 65535},
        {"1", 1, 1},           {"007x08", 7, 8}, /* leading zeros are plain decimal */
    };
    struct kiln_err err = {0};
    for (size_t i = 0; i < sizeof ok / sizeof ok[0]; i++) {
        uint32_t w = 0, h = 0;
        assert_int_equal(kiln_parse_size(ok[i].text, &w, &h, &err), KILN_OK);
        assert_int_equal(w, ok[i].w);
        assert_int_equal(h, ok[i].h);
    }
    static const char *const bad[] = {
        "", "0", "0x10", "10x0", "224x", "x224", "224x224x3", "-5", "+5", " 224", "224 ",
        "224 x 224", "65536", "1x65536", "99999999999999999999", "12.5", "abc", "0x1F",
        "224*224", "x",
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        uint32_t w = 77, h = 77;
        if (kiln_parse_size(bad[i], &w, &h, &err) != KILN_EINVAL) {
            print_error("size '%s' was accepted as %ux%u\n", bad[i], w, h);
            fail();
        }
        assert_non_null(strstr(err.msg, "--size"));
        assert_int_equal(w, 77); /* outputs untouched on error */
    }
}

static void set_ok(struct kiln_recipe *r, const char *key, const char *value)
{
    struct kiln_err err = {0};
    int rc = kiln_recipe_set(r, key, value, &err);
    if (rc != KILN_OK) {
        print_error("%s=%s refused: %s\n", key, value, err.msg);
        fail();
    }
}

static void set_bad(struct kiln_recipe *r, const char *key, const char *value)
{
    struct kiln_err err = {0};
    struct kiln_recipe before;
    memcpy(&before, r, sizeof before);
    if (kiln_recipe_set(r, key, value, &err) != KILN_EINVAL) {
        print_error("%s=%s accepted\n", key, value);
        fail();
    }
    /* the message names the option */
    char name[48];
    snprintf(name, sizeof name, "%s", key);
    assert_non_null(strstr(err.msg, name));
    assert_memory_equal(&before, r, sizeof before); /* nothing changed */
}

static void test_defaults(void **state)
{
    (void)state;
    struct kiln_recipe r;
    kiln_recipe_defaults(&r);
    /* SPEC section 4: --max-pixels defaults to 2^28 = 268435456 */
    assert_int_equal(r.max_pixels, 268435456u);
    assert_int_equal(r.width, 0); /* --size is required */
    assert_true(r.orient);        /* orientation applied by default (SPEC section 4) */
    assert_true(r.dct_scale);     /* DCT scaling on by default (SPEC section 4) */
    assert_int_equal(r.dtype, -1);
    struct kiln_err err = {0};
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "--size"));
}

static void test_set_accepts(void **state)
{
    (void)state;
    struct kiln_recipe r;
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "320x240");
    assert_int_equal(r.width, 320);
    assert_int_equal(r.height, 240);
    static const char *const fits[] = {"stretch", "pad", "crop"};
    for (int i = 0; i < 3; i++) {
        set_ok(&r, "fit", fits[i]);
        assert_int_equal(r.fit, kiln_fit_parse(fits[i]));
    }
    static const char *const filters[] = {"nearest", "box", "bilinear", "bicubic", "lanczos3"};
    for (int i = 0; i < 5; i++) {
        set_ok(&r, "filter", filters[i]);
        assert_int_equal(r.filter, kiln_filter_parse(filters[i]));
    }
    static const char *const ch[] = {"1", "3", "4"};
    for (int i = 0; i < 3; i++) {
        set_ok(&r, "channels", ch[i]);
        assert_int_equal(r.channels, (uint32_t)(ch[i][0] - '0'));
    }
    set_ok(&r, "depth", "16");
    assert_int_equal(r.depth, 16);
    set_ok(&r, "depth", "8");
    assert_int_equal(r.depth, 8);
    set_ok(&r, "dtype", "f32");
    assert_int_equal(r.dtype, KILN_OUT_F32);
    set_ok(&r, "dtype", "u16");
    assert_int_equal(r.dtype, KILN_OUT_U16);
    set_ok(&r, "layout", "nchw");
    assert_int_equal(r.layout, KILN_LAYOUT_NCHW);
    set_ok(&r, "pad-value", "7");
    const uint8_t seven[4] = {7, 7, 7, 7};
    assert_memory_equal(r.pad_value, seven, 4);
    set_ok(&r, "pad-value", "0,128,255,9");
    const uint8_t pv[4] = {0, 128, 255, 9};
    assert_memory_equal(r.pad_value, pv, 4);
    set_ok(&r, "pad-value", "128,0,255"); /* R,G,B: alpha opaque (docs/cli.md) */
    const uint8_t rgb[4] = {128, 0, 255, 255};
    assert_memory_equal(r.pad_value, rgb, 4);
    set_ok(&r, "background", "10,20,30");
    const uint8_t bg[3] = {10, 20, 30};
    assert_memory_equal(r.background, bg, 3);
    set_ok(&r, "background", "0");
    const uint8_t black[3] = {0, 0, 0};
    assert_memory_equal(r.background, black, 3);
    set_ok(&r, "max-pixels", "18446744073709551615"); /* 2^64 - 1 */
    assert_int_equal(r.max_pixels, UINT64_MAX);
    set_ok(&r, "max-side", "2147483647");
    assert_int_equal(r.max_side, 2147483647u);
    static const char *const on[] = {"on", "true", "1"}, *const off[] = {"off", "false", "0"};
    for (int i = 0; i < 3; i++) {
        set_ok(&r, "orient", off[i]);
        assert_false(r.orient);
        set_ok(&r, "orient", on[i]);
        assert_true(r.orient);
        set_ok(&r, "dct-scale", off[i]);
        assert_false(r.dct_scale);
        set_ok(&r, "dct-scale", on[i]);
        assert_true(r.dct_scale);
    }
}

static void test_set_rejects(void **state)
{
    (void)state;
    struct kiln_recipe r;
    kiln_recipe_defaults(&r);
    set_bad(&r, "size", "0x0");
    set_bad(&r, "fit", "letterbox");
    set_bad(&r, "fit", "");
    set_bad(&r, "filter", "cubic");
    set_bad(&r, "filter", "Bilinear"); /* names are case-sensitive */
    set_bad(&r, "channels", "2");
    set_bad(&r, "channels", "0");
    set_bad(&r, "channels", "5");
    set_bad(&r, "channels", "3 ");
    set_bad(&r, "depth", "12");
    set_bad(&r, "depth", "32");
    set_bad(&r, "depth", "-8");
    set_bad(&r, "dtype", "f64");
    set_bad(&r, "dtype", "U8");
    set_bad(&r, "layout", "hwc");
    set_bad(&r, "pad-value", "256");
    set_bad(&r, "pad-value", "1,2"); /* one value, R,G,B or R,G,B,A */
    set_bad(&r, "pad-value", "1,2,3,4,5");
    set_bad(&r, "pad-value", "1,");
    set_bad(&r, "pad-value", ",1");
    set_bad(&r, "pad-value", "");
    set_bad(&r, "background", "1,2");
    set_bad(&r, "background", "1,2,3,4");
    set_bad(&r, "background", "-1");
    set_bad(&r, "max-pixels", "0");
    set_bad(&r, "max-pixels", "18446744073709551616"); /* 2^64 */
    set_bad(&r, "max-pixels", "1e6");
    set_bad(&r, "max-side", "0");
    set_bad(&r, "max-side", "2147483648");
    set_bad(&r, "orient", "yes");
    set_bad(&r, "dct-scale", "");
    set_bad(&r, "no-such-option", "1");
}

static void test_finish(void **state)
{
    (void)state;
    struct kiln_recipe r;
    struct kiln_err err = {0};
    /* dtype follows depth; 224x224x3 u8 records are 224*224*3 = 150528 bytes */
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "224");
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_OK);
    assert_int_equal(r.dtype, KILN_OUT_U8);
    assert_int_equal(kiln_recipe_record_bytes(&r), 150528);
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "224");
    set_ok(&r, "depth", "16");
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_OK);
    assert_int_equal(r.dtype, KILN_OUT_U16);
    assert_int_equal(kiln_recipe_record_bytes(&r), 301056);
    /* u16 output implies 16-bit records; u8 output with 16-bit records is refused */
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "10x20");
    set_ok(&r, "dtype", "u16");
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_OK);
    assert_int_equal(r.depth, 16);
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "10x20");
    set_ok(&r, "depth", "16");
    set_ok(&r, "dtype", "u8");
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_EINVAL);
    /* f32: 4 bytes a sample, 10*20*1*4 = 800 */
    kiln_recipe_defaults(&r);
    set_ok(&r, "size", "10x20");
    set_ok(&r, "channels", "1");
    set_ok(&r, "dtype", "f32");
    assert_int_equal(kiln_recipe_finish(&r, &err), KILN_OK);
    assert_int_equal(kiln_recipe_sample_bytes(&r), 4);
    assert_int_equal(kiln_recipe_record_bytes(&r), 800);
    assert_string_equal(kiln_out_type_name(r.dtype), "f32");
    assert_string_equal(kiln_layout_name(KILN_LAYOUT_NHWC), "nhwc");
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_parse_size),  cmocka_unit_test(test_defaults),
        cmocka_unit_test(test_set_accepts), cmocka_unit_test(test_set_rejects),
        cmocka_unit_test(test_finish),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
