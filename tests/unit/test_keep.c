/* Unit tests for formats/keep (split --keep): an earlier output is trusted only when its
 * items.csv matches the manifest's SHA-256, a header-only items.csv is an old output with no
 * packed items (no undefined behaviour on the way: qsort may not be given NULL), and an empty
 * file or one without the needed columns is refused by name. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../core/sha256.h"
#include "../../formats/files/keep.h"

static char tmpdir[64], manifest[128], items[128];

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-keep-XXXXXX");
    if (!mkdtemp(tmpdir))
        return -1;
    snprintf(manifest, sizeof manifest, "%s/manifest.json", tmpdir);
    snprintf(items, sizeof items, "%s/items.csv", tmpdir);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unlink(manifest);
    unlink(items);
    return rmdir(tmpdir);
}

/* Writes items.csv with the given text and a manifest listing its SHA-256. */
static void write_output(const char *items_text)
{
    FILE *f = fopen(items, "wb");
    assert_non_null(f);
    fputs(items_text, f);
    assert_int_equal(fclose(f), 0);
    uint8_t d[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    struct kiln_err err = {0};
    assert_int_equal(kiln_sha256_buf(items_text, strlen(items_text), d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
    f = fopen(manifest, "wb");
    assert_non_null(f);
    fprintf(f,
            "{\"format\": \"kiln output manifest\", \"outputs\": [{\"name\": \"items.csv\", "
            "\"sha256\": \"%s\"}]}\n",
            hex);
    assert_int_equal(fclose(f), 0);
}

static void test_header_only(void **state)
{
    (void)state;
    write_output("row,source,path,member,size,sha256,label,class,group,unit,split,index,status,"
                 "reason\r\n");
    struct kiln_keep k;
    struct kiln_err err = {0};
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_OK);
    assert_int_equal(k.n, 0);
    uint8_t any[KILN_SHA256_LEN] = {1};
    assert_int_equal(kiln_keep_lookup(&k, any), KILN_SPLIT_NONE);
    kiln_keep_free(&k);
}

static void test_rows(void **state)
{
    (void)state;
    /* Two rows of one digest in one split are one entry; the digest of "abc" is the FIPS 180-4
     * example (CHECKS.md s5), used here only as a well-formed value. */
    write_output("sha256,split\r\n"
                 "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad,test\r\n"
                 "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad,test\r\n"
                 "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855,train\r\n"
                 "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855,\r\n");
    struct kiln_keep k;
    struct kiln_err err = {0};
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_OK);
    assert_int_equal(k.n, 2);
    uint8_t d[KILN_SHA256_LEN];
    assert_int_equal(kiln_sha256_buf("abc", 3, d, &err), KILN_OK);
    assert_int_equal(kiln_keep_lookup(&k, d), KILN_SPLIT_TEST);
    assert_int_equal(kiln_sha256_buf("", 0, d, &err), KILN_OK);
    assert_int_equal(kiln_keep_lookup(&k, d), KILN_SPLIT_TRAIN);
    kiln_keep_free(&k);
}

static void test_refusals(void **state)
{
    (void)state;
    struct kiln_keep k;
    struct kiln_err err = {0};
    write_output("");
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, items));
    assert_non_null(strstr(err.msg, "empty"));
    write_output("row,path\r\n");
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "sha256"));
    /* one digest in two splits */
    write_output("sha256,split\r\n"
                 "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad,test\r\n"
                 "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad,train\r\n");
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_EMISMATCH);
    /* items.csv changed after the manifest was written */
    write_output("sha256,split\r\n");
    FILE *f = fopen(items, "ab");
    assert_non_null(f);
    fputs("e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855,train\r\n", f);
    assert_int_equal(fclose(f), 0);
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_EMISMATCH);
    assert_non_null(strstr(err.msg, "does not match"));
    /* a manifest.json that is not kiln's (a web project's) is named as such */
    f = fopen(manifest, "wb");
    assert_non_null(f);
    fputs("{\"manifest_version\": 3, \"name\": \"site\", \"outputs\": []}\n", f);
    assert_int_equal(fclose(f), 0);
    assert_int_equal(kiln_keep_load(manifest, &k, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "is not a kiln manifest: it has no \"format\": \"kiln output "
                                    "manifest\" (its keys: manifest_version, name, outputs)"));
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_header_only, setup, teardown),
        cmocka_unit_test_setup_teardown(test_rows, setup, teardown),
        cmocka_unit_test_setup_teardown(test_refusals, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
