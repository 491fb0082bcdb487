/* Unit tests for formats/csv: the RFC 4180 writer and reader, hostile fields, malformed input. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/csv.h"

static char tmpdir[64];
static char path[128];

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-csv-XXXXXX");
    if (!mkdtemp(tmpdir))
        return -1;
    snprintf(path, sizeof path, "%s/t.csv", tmpdir);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unlink(path);
    return rmdir(tmpdir);
}

static void write_bytes(const char *bytes, size_t len)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(bytes, 1, len, f), len);
    assert_int_equal(fclose(f), 0);
}

static char *read_all(size_t *len)
{
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    char *buf = malloc(4096);
    assert_non_null(buf);
    *len = fread(buf, 1, 4095, f);
    buf[*len] = '\0';
    fclose(f);
    return buf;
}

/* Reads the file and checks it holds exactly the given rows. */
static void expect_rows(const char *const *const *rows, size_t nrows)
{
    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    assert_int_equal(kiln_csv_open(&r, path, &err), KILN_OK);
    for (size_t i = 0; i < nrows; i++) {
        int got = kiln_csv_next(&r, &err);
        if (got != 1)
            print_error("row %zu: %s\n", i, err.msg);
        assert_int_equal(got, 1);
        size_t n = 0;
        while (rows[i][n])
            n++;
        assert_int_equal(r.nfields, n);
        for (size_t k = 0; k < n; k++)
            assert_string_equal(r.fields[k], rows[i][k]);
    }
    assert_int_equal(kiln_csv_next(&r, &err), 0);
    kiln_csv_close(&r);
}

/* RFC 4180 section 2, rules 6 and 7: fields holding commas, double quotes and line breaks are
 * enclosed in double quotes and a quote inside is doubled; rule 4: spaces belong to the field;
 * rule 1: each record ends with CRLF. */
static void test_writer_bytes(void **state)
{
    (void)state;
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    kiln_csv_field(f, "aaa", 1);
    kiln_csv_field(f, "b\"bb", 0);
    kiln_csv_field(f, "ccc", 0);
    kiln_csv_end_row(f);
    kiln_csv_field(f, "b\r\nbb", 1);
    kiln_csv_field(f, "x,y", 0);
    kiln_csv_field(f, "", 0);
    kiln_csv_field(f, " sp ", 0);
    kiln_csv_end_row(f);
    assert_int_equal(fclose(f), 0);
    size_t len;
    char *got = read_all(&len);
    /* RFC 4180 rule 7's example "b""bb"; rule 6's "b CRLF bb" */
    const char want[] = "aaa,\"b\"\"bb\",ccc\r\n\"b\r\nbb\",\"x,y\",, sp \r\n";
    assert_int_equal(len, sizeof want - 1);
    assert_memory_equal(got, want, len);
    free(got);
}

/* The RFC 4180 section 2 examples, read back. */
static void test_rfc4180_examples(void **state)
{
    (void)state;
    /* rule 1: records separated by CRLF */
    const char *r1a[] = {"aaa", "bbb", "ccc", NULL}, *r1b[] = {"zzz", "yyy", "xxx", NULL};
    const char *const *rows1[] = {r1a, r1b};
    const char t1[] = "aaa,bbb,ccc\r\nzzz,yyy,xxx\r\n";
    write_bytes(t1, sizeof t1 - 1);
    expect_rows(rows1, 2);
    /* rule 2: the last record may lack a line break */
    const char t2[] = "aaa,bbb,ccc\r\nzzz,yyy,xxx";
    write_bytes(t2, sizeof t2 - 1);
    expect_rows(rows1, 2);
    /* rule 5: fields may be enclosed in double quotes */
    const char t5[] = "\"aaa\",\"bbb\",\"ccc\"\r\nzzz,yyy,xxx\r\n";
    write_bytes(t5, sizeof t5 - 1);
    expect_rows(rows1, 2);
    /* rule 6: a line break inside quotes is data */
    const char *r6a[] = {"aaa", "b\r\nbb", "ccc", NULL};
    const char *const *rows6[] = {r6a, r1b};
    const char t6[] = "\"aaa\",\"b\r\nbb\",\"ccc\"\r\nzzz,yyy,xxx";
    write_bytes(t6, sizeof t6 - 1);
    expect_rows(rows6, 2);
    /* rule 7: a doubled quote inside quotes is one quote */
    const char *r7[] = {"aaa", "b\"bb", "ccc", NULL};
    const char *const *rows7[] = {r7};
    const char t7[] = "\"aaa\",\"b\"\"bb\",\"ccc\"\r\n";
    write_bytes(t7, sizeof t7 - 1);
    expect_rows(rows7, 1);
}

/* LF-only line ends (common practice on Unix; csv.h accepts them), empty fields and an empty
 * line (one empty field). */
static void test_lf_only_and_empty(void **state)
{
    (void)state;
    const char *a[] = {"a", "b", NULL}, *b[] = {"", "", "", NULL}, *c[] = {"", NULL},
               *d[] = {"x", "", NULL}, *e[] = {"", "q", NULL};
    const char *const *rows[] = {a, b, c, d, e};
    const char t[] = "a,b\n,,\n\nx,\n\"\",q\n";
    write_bytes(t, sizeof t - 1);
    expect_rows(rows, 5);
    /* an empty file has no rows */
    write_bytes("", 0);
    expect_rows(NULL, 0);
}

/* Hostile fields survive kiln_csv_field + kiln_csv_next unchanged. */
static void test_round_trip_hostile(void **state)
{
    (void)state;
    static const char *const fields[] = {
        "plain",
        "",
        "comma,inside",
        ",",
        ",,",
        "\"",
        "\"\"",
        "say \"hi\"",
        "\"quoted\"",
        "line1\nline2",
        "cr\ronly",
        "crlf\r\ninside",
        "\r\n",
        "\n",
        " leading and trailing ",
        "trailing quote\"",
        "caf\xc3\xa9 \xe6\x97\xa5\xe6\x9c\xac \xf0\x9f\x98\x80", /* UTF-8 é, 日本, U+1F600 */
        "mixed ,\"\r\n\xc3\xa9\"",
    };
    const size_t n = sizeof fields / sizeof fields[0];
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    /* row 1: every field in order; row 2: reversed; then one row per field */
    for (size_t i = 0; i < n; i++)
        kiln_csv_field(f, fields[i], i == 0);
    kiln_csv_end_row(f);
    for (size_t i = 0; i < n; i++)
        kiln_csv_field(f, fields[n - 1 - i], i == 0);
    kiln_csv_end_row(f);
    for (size_t i = 0; i < n; i++) {
        kiln_csv_field(f, fields[i], 1);
        kiln_csv_end_row(f);
    }
    assert_int_equal(fclose(f), 0);

    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    assert_int_equal(kiln_csv_open(&r, path, &err), KILN_OK);
    assert_int_equal(kiln_csv_next(&r, &err), 1);
    assert_int_equal(r.nfields, n);
    for (size_t i = 0; i < n; i++)
        assert_string_equal(r.fields[i], fields[i]);
    assert_int_equal(kiln_csv_next(&r, &err), 1);
    assert_int_equal(r.nfields, n);
    for (size_t i = 0; i < n; i++)
        assert_string_equal(r.fields[i], fields[n - 1 - i]);
    for (size_t i = 0; i < n; i++) {
        assert_int_equal(kiln_csv_next(&r, &err), 1);
        assert_int_equal(r.nfields, 1);
        assert_string_equal(r.fields[0], fields[i]);
    }
    assert_int_equal(kiln_csv_next(&r, &err), 0);
    kiln_csv_close(&r);
}

static void expect_malformed(const char *bytes, size_t len, size_t good_rows, const char *where)
{
    write_bytes(bytes, len);
    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    assert_int_equal(kiln_csv_open(&r, path, &err), KILN_OK);
    for (size_t i = 0; i < good_rows; i++)
        assert_int_equal(kiln_csv_next(&r, &err), 1);
    int got = kiln_csv_next(&r, &err);
    assert_int_equal(got, -KILN_EINVAL);
    assert_int_equal(err.code, KILN_EINVAL);
    /* the message names file:line */
    if (!strstr(err.msg, where)) {
        print_error("message '%s' lacks '%s'\n", err.msg, where);
        fail();
    }
    kiln_csv_close(&r);
}

/* RFC 4180 rules 5-7 leave no meaning for these, so they are errors, not guesses. */
static void test_malformed(void **state)
{
    (void)state;
    char where[160];
    snprintf(where, sizeof where, "%s:1:", path);
    const char unclosed[] = "\"abc,def\r\n";
    expect_malformed(unclosed, sizeof unclosed - 1, 0, where);
    const char after[] = "\"abc\"x,def\r\n";
    expect_malformed(after, sizeof after - 1, 0, where);
    const char after_space[] = "\"abc\" ,def\r\n";
    expect_malformed(after_space, sizeof after_space - 1, 0, where);
    /* rule 5: a quote may not appear inside an unquoted field */
    const char inner[] = "ab\"c\r\n";
    expect_malformed(inner, sizeof inner - 1, 0, where);
    /* a NUL byte is not text */
    const char nul[] = "a\0b\r\n";
    expect_malformed(nul, sizeof nul - 1, 0, where);
    /* the line number is the physical line where the bad row starts: row 2 spans lines 2-3 */
    snprintf(where, sizeof where, "%s:4:", path);
    const char later[] = "a,b\r\n\"x\r\ny\",z\r\n\"never closed\r\n";
    expect_malformed(later, sizeof later - 1, 2, where);
    /* a bad row that itself spans lines is reported at its first line */
    snprintf(where, sizeof where, "%s:2:", path);
    const char spans[] = "a,b\n\"x\ny\"z\n";
    expect_malformed(spans, sizeof spans - 1, 1, where);
}

/* r->line is the 1-based line where the current row starts (csv.h). */
static void test_line_numbers(void **state)
{
    (void)state;
    const char t[] = "h1,h2\r\n\"two\r\nlines\",x\r\nthird,\"a\nb\nc\"\nlast\n";
    write_bytes(t, sizeof t - 1);
    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    assert_int_equal(kiln_csv_open(&r, path, &err), KILN_OK);
    static const size_t starts[] = {1, 2, 4, 7}; /* counted by hand from the text above */
    for (size_t i = 0; i < 4; i++) {
        assert_int_equal(kiln_csv_next(&r, &err), 1);
        assert_int_equal(r.line, starts[i]);
    }
    assert_string_equal(r.fields[0], "last");
    assert_int_equal(kiln_csv_next(&r, &err), 0);
    kiln_csv_close(&r);
}

/* A UTF-8 byte-order mark (EF BB BF, the encoding of U+FEFF; Unicode 15.0 section 23.8) at the
 * start of a file is not part of the first field; anywhere else, and any prefix of it that is
 * not the whole mark, is data. Spreadsheet programs write one when saving "CSV UTF-8". */
static void test_byte_order_mark(void **state)
{
    (void)state;
    const char *h[] = {"path", "label", NULL}, *r[] = {"a/x.png", "loam", NULL};
    const char *const *rows[] = {h, r};
    const char bom[] = "\xEF\xBB\xBFpath,label\r\na/x.png,loam\r\n";
    write_bytes(bom, sizeof bom - 1);
    expect_rows(rows, 2);
    /* a CR line end right after the mark still ends the row */
    const char bom_cr[] = "\xEF\xBB\xBFpath,label\ra/x.png,loam";
    write_bytes(bom_cr, sizeof bom_cr - 1);
    expect_rows(rows, 2);
    /* only the mark, or a prefix of it, is kept as data */
    const char *p1[] = {"\xEF\xBBx", NULL}, *p2[] = {"\xEF", NULL}, *e[] = {"", NULL};
    const char *const *rows1[] = {p1}, *const *rows2[] = {p2}, *const *rows3[] = {e};
    write_bytes("\xEF\xBBx\n", 4);
    expect_rows(rows1, 1);
    write_bytes("\xEF", 1);
    expect_rows(rows2, 1);
    write_bytes("\xEF\xBB\xBF\n", 4);
    expect_rows(rows3, 1);
    /* a second mark is data */
    const char *d[] = {"\xEF\xBB\xBFx", NULL};
    const char *const *rows4[] = {d};
    write_bytes("\xEF\xBB\xBF\xEF\xBB\xBFx\n", 8);
    expect_rows(rows4, 1);
}

static void test_open_missing(void **state)
{
    (void)state;
    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    char missing[160];
    snprintf(missing, sizeof missing, "%s/no-such.csv", tmpdir);
    assert_int_equal(kiln_csv_open(&r, missing, &err), KILN_EIO);
    assert_non_null(strstr(err.msg, "no-such.csv"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_writer_bytes),       cmocka_unit_test(test_rfc4180_examples),
        cmocka_unit_test(test_lf_only_and_empty),  cmocka_unit_test(test_round_trip_hostile),
        cmocka_unit_test(test_malformed),          cmocka_unit_test(test_line_numbers),
        cmocka_unit_test(test_open_missing),       cmocka_unit_test(test_byte_order_mark),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
