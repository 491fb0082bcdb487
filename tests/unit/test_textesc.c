/* Unit tests for core/textesc: %XX escaping of names that are not valid UTF-8 (RFC 3629). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/textesc.h"

/* Escapes raw, checks the text, and checks that unescaping gives raw back byte for byte. */
static void check(const char *raw, const char *want)
{
    char *e = kiln_text_escape(raw);
    assert_non_null(e);
    if (strcmp(e, want) != 0) {
        print_error("escape gave '%s', want '%s'\n", e, want);
        fail();
    }
    assert_int_equal(kiln_text_is_plain(raw), strcmp(raw, want) == 0);
    char *back = NULL;
    size_t len = 0;
    assert_int_equal(kiln_text_unescape(e, &back, &len), 0);
    assert_int_equal(len, strlen(raw));
    assert_memory_equal(back, raw, len + 1);
    free(back);
    free(e);
}

/* RFC 3629 section 4 syntax: valid sequences are kept as they are. The examples are those of
 * RFC 3629 section 7, byte values from memory ("A<NOT IDENTICAL TO><ALPHA>." = 41 E2 89 A2 CE 91 2E, Korean "hangugeo"
 * = ED 95 9C EA B5 AD EC 96 B4, Japanese "nihongo" = E6 97 A5 E6 9C AC E8 AA 9E, and the BOM
 * EF BB BF before U+233B4 = F0 A3 8E B4), plus U+1F600 = F0 9F 98 80 (from memory). */
static void test_valid_utf8_kept(void **state)
{
    (void)state;
    static const char *const valid[] = {
        "plain-name_01.png",
        "A\xe2\x89\xa2\xce\x91.",
        "\xed\x95\x9c\xea\xb5\xad\xec\x96\xb4",
        "\xe6\x97\xa5\xe6\x9c\xac\xe8\xaa\x9e",
        "\xef\xbb\xbf\xf0\xa3\x8e\xb4",
        "\xf0\x9f\x98\x80",
        "\xc2\x80",         /* U+0080, smallest 2-byte */
        "\xdf\xbf",         /* U+07FF */
        "\xe0\xa0\x80",     /* U+0800, smallest 3-byte */
        "\xed\x9f\xbf",     /* U+D7FF, just below the surrogates */
        "\xee\x80\x80",     /* U+E000, just above */
        "\xef\xbf\xbf",     /* U+FFFF */
        "\xf0\x90\x80\x80", /* U+10000, smallest 4-byte */
        "\xf4\x8f\xbf\xbf", /* U+10FFFF, the largest code point (RFC 3629 section 3) */
        " ,\"'~!#$&()[]{}", /* printable ASCII other than '%' */
    };
    for (size_t i = 0; i < sizeof valid / sizeof valid[0]; i++) {
        check(valid[i], valid[i]);
        assert_true(kiln_text_is_plain(valid[i]));
    }
}

/* RFC 3629 sections 3 and 10: overlong forms, surrogates (U+D800-DFFF), values above
 * U+10FFFF, stray continuation bytes, bytes C0, C1, F5-FF and truncated sequences are not
 * UTF-8, so each such byte is escaped on its own and the rest kept. */
static void test_invalid_utf8_escaped(void **state)
{
    (void)state;
    /* overlong '/' C0 AF (from memory); RFC 3629 section 10's examples: overlong NUL C0 80
     * and "/../" hidden as 2F C0 AE 2E 2F (from memory) */
    check("a\xc0\xaf" "b", "a%C0%AFb");
    check("\xc0\x80", "%C0%80");
    check("/\xc0\xae./", "/%C0%AE./");
    check("\xc1\xbf", "%C1%BF");
    /* overlong 3- and 4-byte forms: E0 80 AF (U+002F), F0 80 80 AF */
    check("\xe0\x80\xaf", "%E0%80%AF");
    check("\xf0\x80\x80\xaf", "%F0%80%80%AF");
    /* UTF-16 surrogates encoded as UTF-8 (CESU-8): ED A0 80 = U+D800, ED BF BF = U+DFFF */
    check("\xed\xa0\x80", "%ED%A0%80");
    check("\xed\xbf\xbf", "%ED%BF%BF");
    /* beyond U+10FFFF: F4 90 80 80 = U+110000; F5..FF never appear */
    check("\xf4\x90\x80\x80", "%F4%90%80%80");
    check("\xf5\x80\x80\x80", "%F5%80%80%80");
    check("\xff\xfe", "%FF%FE");
    /* lone continuation bytes and truncated sequences */
    check("\x80", "%80");
    check("x\xbfy", "x%BFy");
    check("\xc3", "%C3");
    check("\xe6\x97", "%E6%97");
    check("\xf0\x9f\x98", "%F0%9F%98");
    check("\xe6\x97" "A", "%E6%97A");
    /* Latin-1 "café" (E9 is not UTF-8 on its own) next to a valid UTF-8 "é" */
    check("caf\xe9 caf\xc3\xa9", "caf%E9 caf\xc3\xa9");
}

/* '%' itself and control bytes (C0 controls and DEL, common practice: they break terminals and
 * line-oriented tools) are escaped so the escaping can be undone. */
static void test_percent_and_controls(void **state)
{
    (void)state;
    check("100%", "100%25");
    check("%41", "%2541"); /* must not later unescape to "A" */
    check("%%", "%25%25");
    check("a\nb", "a%0Ab");
    check("\r\n", "%0D%0A");
    check("\t", "%09");
    check("\x01\x1f", "%01%1F");
    check("\x7f", "%7F");
    check("x\x1b[31m", "x%1B[31m");
}

static void test_unescape_rejects(void **state)
{
    (void)state;
    char *out = NULL;
    size_t len;
    /* '%' not followed by two hex digits */
    assert_int_equal(kiln_text_unescape("%", &out, &len), -1);
    assert_int_equal(kiln_text_unescape("%4", &out, &len), -1);
    assert_int_equal(kiln_text_unescape("a%4", &out, &len), -1);
    assert_int_equal(kiln_text_unescape("%G0", &out, &len), -1);
    assert_int_equal(kiln_text_unescape("%0g", &out, &len), -1);
    assert_int_equal(kiln_text_unescape("ok%zz", &out, &len), -1);
    /* a NUL byte cannot be part of a C string name */
    assert_int_equal(kiln_text_unescape("%00", &out, &len), -1);
    assert_null(out);
    /* lower-case hex is accepted, and "%41" at the very end is complete */
    assert_int_equal(kiln_text_unescape("%e9%41", &out, &len), 0);
    assert_int_equal(len, 2);
    assert_memory_equal(out, "\xe9" "A", 3);
    free(out);
    /* text without '%' comes back as is; len may be NULL */
    assert_int_equal(kiln_text_unescape("plain", &out, NULL), 0);
    assert_string_equal(out, "plain");
    free(out);
}

/* Every single byte 1..255 and every pair round-trips. */
static void test_all_bytes_round_trip(void **state)
{
    (void)state;
    char raw[3] = {0, 0, 0};
    for (int a = 1; a < 256; a++)
        for (int b = 0; b < 256; b++) {
            raw[0] = (char)a;
            raw[1] = (char)b;
            char *e = kiln_text_escape(raw);
            assert_non_null(e);
            /* The escaped text is valid UTF-8 without controls: escaping it again changes
             * nothing but its '%' signs. */
            char *e2 = kiln_text_escape(e), want2[32];
            size_t k = 0;
            for (const char *p = e; *p; p++)
                k += (size_t)snprintf(want2 + k, sizeof want2 - k, *p == '%' ? "%%25" : "%c", *p);
            assert_non_null(e2);
            assert_string_equal(e2, want2);
            free(e2);
            char *back;
            size_t len;
            assert_int_equal(kiln_text_unescape(e, &back, &len), 0);
            assert_int_equal(len, b ? 2 : 1);
            assert_memory_equal(back, raw, len + 1);
            free(back);
            free(e);
        }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_valid_utf8_kept),      cmocka_unit_test(test_invalid_utf8_escaped),
        cmocka_unit_test(test_percent_and_controls), cmocka_unit_test(test_unescape_rejects),
        cmocka_unit_test(test_all_bytes_round_trip),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
