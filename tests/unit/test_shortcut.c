/* Unit tests for core/shortcut: the association statistics against tables worked by hand from
 * their published definitions, and the attribute check on generated catalogues where an
 * attribute gives the label away and where it does not. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "../../core/shortcut.h"

static void assert_close(double got, double want, double tol)
{
    if (!(fabs(got - want) <= tol)) {
        print_error("got %.17g, want %.17g (tolerance %g)\n", got, want, tol);
        fail();
    }
}

/* Worked by hand. Cramér's V (Cramér 1946, Mathematical Methods of Statistics, 21.9):
 * V = sqrt(chi2 / n / min(r-1, k-1)). Bergsma (2013), "A bias-correction for Cramér's V and
 * Tschuprow's T", Journal of the Korean Statistical Society 42: phi~2 = max(0, phi2 -
 * (k-1)(r-1)/(n-1)), r~ = r - (r-1)^2/(n-1), k~ likewise, V~ = sqrt(phi~2 / min(k~-1, r~-1)).
 * Goodman and Kruskal (1954), "Measures of association for cross classifications", JASA 49:
 * lambda = (sum of row maxima - largest column total) / (n - largest column total).
 *
 * Table {{20, 10}, {5, 15}}: n = 50, row totals 30 and 20, column totals 25 and 25; expected
 * counts 15, 15, 10, 10; chi2 = 25/15 + 25/15 + 25/10 + 25/10 = 25/3; phi2 = 1/6;
 * V = sqrt(1/6) = 0.408248...; phi~2 = 1/6 - 1/49 = 43/294; r~ = k~ = 2 - 1/49 = 97/49;
 * V~ = sqrt((43/294) / (48/49)) = sqrt(43/288) = 0.386401...; lambda = (20 + 15 - 25) / 25
 * = 0.4. */
static void test_assoc_2x2(void **state)
{
    (void)state;
    const uint64_t t[] = {20, 10, 5, 15};
    struct kiln_assoc a;
    assert_int_equal(kiln_assoc_compute(t, 2, 2, &a), KILN_OK);
    assert_int_equal(a.n, 50);
    assert_close(a.chi2, 25.0 / 3.0, 1e-12);
    assert_close(a.v, sqrt(1.0 / 6.0), 1e-12);
    assert_close(a.v_corrected, sqrt(43.0 / 288.0), 1e-12);
    assert_close(a.lambda, 0.4, 1e-12);
}

/* A 3 x 2 table with an empty row and an empty column, which are dropped: {{6, 0, 0}, {0, 0,
 * 0}, {2, 0, 4}, {0, 0, 0}} is the 2 x 2 table {{6, 0}, {2, 4}}: n = 12, rows 6 and 6,
 * columns 8 and 4; expected 4, 2, 4, 2; chi2 = 4/4 + 4/2 + 4/4 + 4/2 = 6; phi2 = 1/2;
 * V = sqrt(1/2); phi~2 = 1/2 - 1/11 = 9/22; r~ = k~ = 2 - 1/11 = 21/11; V~ = sqrt((9/22) /
 * (10/11)) = sqrt(9/20); lambda = (6 + 4 - 8) / (12 - 8) = 0.5. */
static void test_assoc_empty_lines(void **state)
{
    (void)state;
    const uint64_t t[] = {6, 0, 0, 0, 0, 0, 2, 0, 4, 0, 0, 0};
    struct kiln_assoc a;
    assert_int_equal(kiln_assoc_compute(t, 4, 3, &a), KILN_OK);
    assert_int_equal(a.rows, 2);
    assert_int_equal(a.cols, 2);
    assert_close(a.chi2, 6.0, 1e-12);
    assert_close(a.v, sqrt(0.5), 1e-12);
    assert_close(a.v_corrected, sqrt(9.0 / 20.0), 1e-12);
    assert_close(a.lambda, 0.5, 1e-12);
}

/* Perfect association gives 1 for all three; independence (equal rows) gives 0; a table with
 * one row has nothing to measure. */
static void test_assoc_limits(void **state)
{
    (void)state;
    struct kiln_assoc a;
    const uint64_t perfect[] = {7, 0, 0, 0, 5, 0, 0, 0, 9};
    assert_int_equal(kiln_assoc_compute(perfect, 3, 3, &a), KILN_OK);
    assert_close(a.v, 1.0, 1e-12);
    assert_close(a.v_corrected, 1.0, 1e-12);
    assert_close(a.lambda, 1.0, 1e-12);
    const uint64_t indep[] = {10, 20, 30, 10, 20, 30};
    assert_int_equal(kiln_assoc_compute(indep, 2, 3, &a), KILN_OK);
    assert_close(a.v, 0.0, 1e-12);
    assert_close(a.v_corrected, 0.0, 1e-12);
    assert_close(a.lambda, 0.0, 1e-12);
    const uint64_t one_row[] = {3, 4};
    assert_int_equal(kiln_assoc_compute(one_row, 1, 2, &a), KILN_OK);
    assert_int_equal(a.n, 7);
    assert_close(a.v, 0.0, 0);
}

/* n items, two classes, every fourth in test; format is "png" for class 0 and "jpeg" for
 * class 1 when tied, else alternates independently of the class. Sizes are unique per item
 * (every value seen once), which must not look like a shortcut. */
static void make_catalog(struct kiln_catalog *cat, size_t n, int tied)
{
    kiln_catalog_init(cat);
    struct kiln_err err;
    for (size_t i = 0; i < n; i++) {
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        const int cls = (int)(i % 2);
        it.source = "src";
        char path[64];
        snprintf(path, sizeof path, "%s/%05zu.img", cls ? "b" : "a", i);
        it.path = path;
        it.label = cls ? "b" : "a";
        it.format = tied ? (cls ? "jpeg" : "png") : ((i / 2) % 2 ? "jpeg" : "png");
        it.notes = strcmp(it.format, "jpeg") == 0 ? "baseline" : "";
        it.width = 100 + (uint32_t)i;
        it.height = 80;
        it.channels = 3;
        it.depth = it.stored_depth = 8;
        it.orientation = 1;
        it.size = 40000 + 13 * i;
        it.status = KILN_ST_OK;
        it.split = (int8_t)((i / 2) % 4 == 3 ? KILN_SPLIT_TEST : KILN_SPLIT_TRAIN);
        assert_int_equal(kiln_catalog_add(cat, &it, &err), KILN_OK);
    }
    assert_int_equal(kiln_catalog_index_classes(cat, &err), KILN_OK);
}

static void test_format_gives_label_away(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    make_catalog(&cat, 200, 1);
    struct kiln_shortcuts s;
    struct kiln_err err;
    assert_int_equal(kiln_shortcuts_run(&cat, &s, &err), KILN_OK);
    const struct kiln_shortcut *f = &s.attrs[KILN_ATTR_FORMAT];
    assert_true(f->fires);
    assert_int_equal(f->nvalues, 2);
    assert_string_equal(f->values[0], "jpeg"); /* byte-wise order */
    assert_int_equal(f->majority[0], 1);
    assert_int_equal(f->majority[1], 0);
    assert_int_equal(f->held_split, KILN_SPLIT_TEST);
    assert_int_equal(f->held_n, 50);
    assert_int_equal(f->held_rule_hits, 50);
    assert_close(f->held_lambda, 1.0, 1e-12);
    /* Unique sizes: V~ is 0 (Bergsma's correction) and every test size is unseen. */
    assert_false(s.attrs[KILN_ATTR_STORED_SIZE].fires);
    assert_close(s.attrs[KILN_ATTR_STORED_SIZE].train.v_corrected, 0.0, 1e-12);
    assert_false(s.attrs[KILN_ATTR_DEPTH].fires);
    assert_false(s.attrs[KILN_ATTR_SOURCE].fires);
    /* JPEG coding applies to the JPEGs only: all one class, nothing to measure. */
    assert_false(s.attrs[KILN_ATTR_JPEG_CODING].fires);
    assert_int_equal(s.fired, 1);
    kiln_shortcuts_free(&s);
    kiln_catalog_free(&cat);
}

static void test_format_independent(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    make_catalog(&cat, 200, 0);
    struct kiln_shortcuts s;
    struct kiln_err err;
    assert_int_equal(kiln_shortcuts_run(&cat, &s, &err), KILN_OK);
    assert_false(s.attrs[KILN_ATTR_FORMAT].fires);
    assert_close(s.attrs[KILN_ATTR_FORMAT].train.v, 0.0, 1e-12);
    assert_int_equal(s.fired, 0);
    kiln_shortcuts_free(&s);
    kiln_catalog_free(&cat);
}

static void test_values(void **state)
{
    (void)state;
    struct kiln_item it;
    memset(&it, 0, sizeof it);
    it.source = "in";
    it.path = "./crazing/batch.zip";
    it.member = "x.jpg";
    it.label = "crazing";
    it.format = "jpeg";
    it.notes = "progressive; arithmetic; CMYK";
    it.width = 30;
    it.height = 20;
    it.orientation = 6;
    it.size = 20000;
    char buf[256];
    assert_true(kiln_shortcut_value(KILN_ATTR_STORED_SIZE, &it, buf, sizeof buf));
    assert_string_equal(buf, "20x30"); /* orientation 6 turned a 20x30 picture */
    assert_true(kiln_shortcut_value(KILN_ATTR_JPEG_CODING, &it, buf, sizeof buf));
    assert_string_equal(buf, "progressive, arithmetic");
    assert_true(kiln_shortcut_value(KILN_ATTR_SIZE_BAND, &it, buf, sizeof buf));
    assert_string_equal(buf, "16-32 KiB"); /* 2^14 <= 20000 < 2^15 bytes */
    /* The archive sits in the folder its label names: the label's place is not a hint. */
    assert_true(kiln_shortcut_value(KILN_ATTR_SOURCE, &it, buf, sizeof buf));
    assert_string_equal(buf, "in");
    it.path = "lab2/delivery.zip";
    assert_true(kiln_shortcut_value(KILN_ATTR_SOURCE, &it, buf, sizeof buf));
    assert_string_equal(buf, "in/lab2/delivery.zip");
    it.format = "png";
    assert_false(kiln_shortcut_value(KILN_ATTR_JPEG_CODING, &it, buf, sizeof buf));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_assoc_2x2),
        cmocka_unit_test(test_assoc_empty_lines),
        cmocka_unit_test(test_assoc_limits),
        cmocka_unit_test(test_format_gives_label_away),
        cmocka_unit_test(test_format_independent),
        cmocka_unit_test(test_values),
    };
    return cmocka_run_group_tests_name("shortcut", tests, NULL, NULL);
}
