/* Unit tests for core/catalog: the normalised names the label and group rules see
 * (docs/cli.md, "Relative name"). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

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

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_spellings),
        cmocka_unit_test(test_kept),
        cmocka_unit_test(test_truncation),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
