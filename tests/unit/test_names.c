/* Unit tests for core/names: the hashed form of a name is HMAC-SHA256 under the key (checked
 * against Python's hmac module), hashing is idempotent, empty names stay empty, and the
 * catalogue pass hashes every name field and every whole-token occurrence of a name in a
 * reason, keeping the raw names for reading. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <string.h>

#include "../../core/names.h"

/* Expected values: hmac.new(key, name.encode(), hashlib.sha256).hexdigest()[:32] in Python. */
static void test_hash_values(void **state)
{
    (void)state;
    struct kiln_names pub, secret;
    kiln_names_init(&pub, true, NULL, 0);
    kiln_names_init(&secret, true, (const uint8_t *)"lab secret", 10);
    char buf[KILN_NAME_HASH_LEN];
    const char *out;
    struct kiln_err err = {0};
    assert_int_equal(kiln_names_out(&pub, "Patient Müller", buf, &out, &err), KILN_OK);
    assert_string_equal(out, "h:95fcd309c0570eaa25b0c0e61b22265c");
    assert_int_equal(kiln_names_out(&secret, "b", buf, &out, &err), KILN_OK);
    assert_string_equal(out, "h:44efa78f384d8a0882938cbf026e63ac");
    /* idempotent: a hashed name passes unchanged */
    const char *h = "h:44efa78f384d8a0882938cbf026e63ac";
    assert_true(kiln_names_is_hashed(h));
    assert_int_equal(kiln_names_out(&pub, h, buf, &out, &err), KILN_OK);
    assert_ptr_equal(out, h);
    assert_false(kiln_names_is_hashed("h:44EFA78F384D8A0882938CBF026E63AC"));
    assert_false(kiln_names_is_hashed("h:44efa78f384d8a0882938cbf026e63a"));
    assert_false(kiln_names_is_hashed("x:44efa78f384d8a0882938cbf026e63ac"));
    /* empty stays empty; hashing off leaves names as they are */
    assert_int_equal(kiln_names_out(&pub, "", buf, &out, &err), KILN_OK);
    assert_string_equal(out, "");
    struct kiln_names off;
    kiln_names_init(&off, false, NULL, 0);
    assert_int_equal(kiln_names_out(&off, "x1.png", buf, &out, &err), KILN_OK);
    assert_string_equal(out, "x1.png");
}

static void test_catalogue(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_item it;
    memset(&it, 0, sizeof it);
    it.source = "Klinik";
    it.path = "malignant/b/x1.png";
    it.member = "";
    it.group = "";
    it.label = "malignant";
    it.reason = "x1.png: cannot read malignant/b/x1.png (b is busy; x1.pngs differ)";
    struct kiln_err err = {0};
    assert_int_equal(kiln_catalog_add(&cat, &it, &err), KILN_OK);
    struct kiln_names pub;
    kiln_names_init(&pub, true, NULL, 0);
    assert_int_equal(kiln_names_catalog(&pub, &cat, &err), KILN_OK);
    const struct kiln_item *x = &cat.items[0];
    assert_string_equal(x->path, "h:20658101d3a3b4bb7775c600df01b8ef");
    assert_string_equal(x->member, "");
    assert_string_equal(x->group, "");
    assert_string_equal(x->label, "malignant"); /* class names are kept */
    assert_non_null(x->from);
    assert_string_equal(x->from->path, "malignant/b/x1.png");
    assert_string_equal(x->from->source, "Klinik");
    /* whole tokens only: "x1.pngs" and the "b" inside words stay */
    assert_string_equal(x->reason, "h:d03e0f8ae413959dffc3ef449140b72f: cannot read "
                                   "h:20658101d3a3b4bb7775c600df01b8ef (b is busy; x1.pngs "
                                   "differ)");
    /* a second pass changes nothing */
    assert_int_equal(kiln_names_catalog(&pub, &cat, &err), KILN_OK);
    assert_string_equal(cat.items[0].path, "h:20658101d3a3b4bb7775c600df01b8ef");
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_hash_values),
        cmocka_unit_test(test_catalogue),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
