/* Unit tests for core/catalog: the normalised names the label and group rules see
 * (docs/cli.md, "Relative name"), and rows that share their repeated strings. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <string.h>

#include "../../core/catalog.h"

static void check(const char *name, const char *want)
{
    char out[64];
    kiln_name_normalise(name, out, sizeof out);
    if (strcmp(out, want) != 0) {
        print_error("'%s' gave '%s', want '%s'\n", name, out, want);
        fail();
    }
}

/* Every spelling of one path that tar, zip and users produce gives the same name. */
static void test_spellings(void **state)
{
    (void)state;
    check("class/x.png", "class/x.png");
    check("./class/x.png", "class/x.png");      /* tar -C dir -cf x.tar . */
    check(".//./class//x.png", "class/x.png");
    check("/class/x.png", "class/x.png");       /* tar -P keeps the leading slash */
    check("class/./x.png", "class/x.png");
    check("class/x.png/", "class/x.png");
    check("x.png", "x.png");
    check("", "");
    check(".", "");
    check("./", "");
}

/* What is not a spelling stays: ".." (recorded, never resolved), names that merely start
 * with a dot, backslashes (an ordinary byte outside zip), bytes that are not UTF-8. */
static void test_kept(void **state)
{
    (void)state;
    check("../class/x.png", "../class/x.png");
    check("a/../b/x.png", "a/../b/x.png");
    check("./.hidden/x.png", ".hidden/x.png");
    check("..x/y", "..x/y");
    check("a\\b/x.png", "a\\b/x.png");
    check("caf\xe9/x.png", "caf\xe9/x.png");
}

/* A name longer than the buffer is cut, never overrun, and stays terminated. */
static void test_truncation(void **state)
{
    (void)state;
    char out[8];
    memset(out, 'z', sizeof out);
    kiln_name_normalise("./abcdef/ghijkl", out, sizeof out);
    assert_string_equal(out, "abcdef/");
    kiln_name_normalise("abc", out, 1);
    assert_string_equal(out, "");
}

static struct kiln_item row(const char *path, const char *label, const char *group)
{
    struct kiln_item it;
    memset(&it, 0, sizeof it);
    it.source = "lab/delivery-1";
    it.path = path;
    it.format = "png";
    it.label = label;
    it.group = group;
    it.reason = "";
    it.notes = "interlaced";
    return it;
}

/* Repeated short values are stored once, paths never; every row still reads back its own
 * values, also once the table of shared strings is full and for values longer than it takes. */
static void test_shared_strings(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_err err = {0};
    char path[32], label[32], group[96];
    enum { N = 3 * KILN_CATALOG_INTERN_SLOTS };
    for (int i = 0; i < N; i++) {
        snprintf(path, sizeof path, "c%d/x%d.png", i % 7, i);
        snprintf(label, sizeof label, "c%d", i % 7);
        /* distinct groups: more than the table holds; every 50th longer than it takes */
        snprintf(group, sizeof group, i % 50 ? "g%d" : "g%d-%080d", i, 0);
        struct kiln_item it = row(path, label, group);
        assert_int_equal(kiln_catalog_add(&cat, &it, &err), KILN_OK);
    }
    for (int i = 0; i < N; i++) {
        const struct kiln_item *it = &cat.items[i];
        snprintf(path, sizeof path, "c%d/x%d.png", i % 7, i);
        snprintf(label, sizeof label, "c%d", i % 7);
        snprintf(group, sizeof group, i % 50 ? "g%d" : "g%d-%080d", i, 0);
        assert_string_equal(it->path, path);
        assert_string_equal(it->label, label);
        assert_string_equal(it->group, group);
        assert_string_equal(it->notes, "interlaced");
        assert_ptr_equal(it->label, cat.items[i % 7].label);
        assert_ptr_equal(it->source, cat.items[0].source);
        assert_ptr_equal(it->format, cat.items[0].format);
        if (i >= 7)
            assert_ptr_not_equal(it->path, cat.items[i - 7].path);
        assert_null(it->from);
    }
    assert_true(cat.ninterned <= KILN_CATALOG_INTERN_SLOTS / 2);
    /* A read-from location lives in the arena, aligned for its pointers. */
    struct kiln_item *it = &cat.items[5];
    assert_int_equal(kiln_catalog_set_from(&cat, it, "moved", "c5/y.png", "", &err), KILN_OK);
    assert_non_null(it->from);
    assert_int_equal((uintptr_t)it->from % _Alignof(struct kiln_location), 0);
    assert_string_equal(it->from->path, "c5/y.png");
    assert_string_equal(it->path, "c5/x5.png");
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spellings),
        cmocka_unit_test(test_kept),
        cmocka_unit_test(test_truncation),
        cmocka_unit_test(test_shared_strings),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
