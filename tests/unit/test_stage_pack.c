/* Unit tests for core/stage_pack's error paths, with fault injection (unit/faults.h): a pack
 * that stops early returns every lock and digest context it took, and a SHA-256 that libcrypto
 * refuses stops the pack instead of recording an empty digest in a complete-looking output. */
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

#include "../../core/pipeline/stage_pack.h"
#include "../../core/pipeline/stage_scan.h"
#include "../../core/split.h"
#include "../../core/units.h"
#include "../../formats/files/manifest.h"
#include "faults.h"

static char tmpdir[64], srcdir[96], outdir[96];

static void write_pgm(const char *cls, int n, unsigned w, unsigned h)
{
    char p[192];
    snprintf(p, sizeof p, "%s/%s", srcdir, cls);
    mkdir(p, 0755);
    snprintf(p, sizeof p, "%s/%s/img%d.pgm", srcdir, cls, n);
    FILE *f = fopen(p, "wb");
    assert_non_null(f);
    fprintf(f, "P5\n%u %u\n255\n", w, h);
    for (unsigned i = 0; i < w * h; i++)
        fputc((int)((i * 7u + (unsigned)n * 31u) & 255u), f);
    assert_int_equal(fclose(f), 0);
}

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-pack-XXXXXX");
    if (!mkdtemp(tmpdir))
        return -1;
    snprintf(srcdir, sizeof srcdir, "%s/src", tmpdir);
    snprintf(outdir, sizeof outdir, "%s/out", tmpdir);
    mkdir(srcdir, 0755);
    for (int i = 0; i < 6; i++)
        write_pgm(i % 2 ? "a" : "b", i, 5 + (unsigned)i, 7);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    fault_reset();
    return fault_remove_tree(tmpdir);
}

/* Scans and splits the six images (seed 1, 50:50). */
static void scan_and_split(struct kiln_catalog *cat)
{
    struct kiln_scan_opts so;
    kiln_scan_opts_defaults(&so);
    so.jobs = 2;
    struct kiln_scan_report srep;
    struct kiln_err err = {0};
    const char *sources[] = {srcdir};
    kiln_catalog_init(cat);
    assert_int_equal(kiln_stage_scan(sources, 1, &so, cat, &srep, &err), KILN_OK);
    assert_int_equal(cat->n, 6);
    struct kiln_split_params sp;
    memset(&sp, 0, sizeof sp);
    bool note;
    assert_int_equal(kiln_split_parse_ratios("50:50", &sp, &note, &err), KILN_OK);
    sp.seed = 1;
    sp.near = false;
    struct kiln_units units;
    struct kiln_split_report rep;
    assert_int_equal(kiln_split_run(cat, &sp, NULL, &units, &rep, &err), KILN_OK);
    kiln_units_free(&units);
}

static void pack_opts(struct kiln_pack_opts *o)
{
    memset(o, 0, sizeof *o);
    kiln_recipe_defaults(&o->recipe);
    struct kiln_err err = {0};
    assert_int_equal(kiln_recipe_set(&o->recipe, "size", "4x3", &err), KILN_OK);
    assert_int_equal(kiln_recipe_finish(&o->recipe, &err), KILN_OK);
    o->outdir = outdir;
    o->jobs = 2;
}

/* Packs and checks that the pack returned every lock and digest context it took. */
static int pack_balanced(struct kiln_catalog *cat, struct kiln_err *err)
{
    struct kiln_pack_opts o;
    pack_opts(&o);
    struct kiln_pack_report rep;
    const long mutexes = fault_mutex_live, contexts = fault_evp_live;
    int rc = kiln_stage_pack(cat, &o, &rep, err);
    assert_int_equal(fault_mutex_live, mutexes);
    assert_int_equal(fault_evp_live, contexts);
    return rc;
}

static bool exists(const char *name)
{
    char p[160];
    snprintf(p, sizeof p, "%s/%s", outdir, name);
    return access(p, F_OK) == 0;
}

static void test_pack_records_recipe_digest(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    scan_and_split(&cat);
    struct kiln_err err = {0};
    assert_int_equal(pack_balanced(&cat, &err), KILN_OK);
    char mp[160];
    snprintf(mp, sizeof mp, "%s/manifest.json", outdir);
    json_t *m;
    assert_int_equal(kiln_json_load(mp, &m, &err), KILN_OK);
    const char *sha = kiln_json_str(m, "recipe_sha256");
    assert_non_null(sha);
    assert_int_equal(strlen(sha), 64);
    json_decref(m);
    kiln_catalog_free(&cat);
}

/* libcrypto refuses the recipe's digest (the update whose data is the serialised recipe,
 * which begins with its first key): the pack fails and writes no manifest. */
static void test_refused_recipe_digest(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    scan_and_split(&cat);
    struct kiln_err err = {0};
    fault_update_prefix = "{\n  \"size\": ";
    assert_int_equal(pack_balanced(&cat, &err), KILN_EINTERNAL);
    fault_reset();
    assert_non_null(strstr(err.msg, "SHA-256"));
    assert_false(exists("manifest.json"));
    assert_false(exists("SHA256SUMS"));
    assert_false(exists("train.kten"));
    kiln_catalog_free(&cat);
}

/* A catalogue pack refuses before any work returns everything it took. */
static void test_refused_catalogue_leaks_nothing(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    scan_and_split(&cat);
    cat.items[0].status = KILN_ST_CORRUPT; /* a split on a row that is not ok */
    struct kiln_err err = {0};
    assert_int_equal(pack_balanced(&cat, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "row 1"));
    for (size_t i = 0; i < cat.n; i++)
        cat.items[i].split = KILN_SPLIT_NONE; /* nothing to pack */
    assert_int_equal(pack_balanced(&cat, &err), KILN_EINVAL);
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test_setup_teardown(test_pack_records_recipe_digest, setup, teardown),
        cmocka_unit_test_setup_teardown(test_refused_recipe_digest, setup, teardown),
        cmocka_unit_test_setup_teardown(test_refused_catalogue_leaks_nothing, setup, teardown),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
