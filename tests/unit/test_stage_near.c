/* Unit tests for core/pipeline/stage_near: over a catalogue whose fingerprints sit in a store,
 * the stage gives exactly the links of the core functions run directly on the fingerprints in
 * file-SHA-256 order (kiln_nearlink_candidates, kiln_nearlink_verify, kiln_nearlink_decide),
 * whatever the number of threads and whatever the row order; rows that are not ok, have no
 * fingerprint or were read without their fingerprints are handled as documented. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/pipeline/stage_near.h"
#include "../../core/units.h"
#include "../../formats/files/fpstore.h"

#define N 120 /* pictures; every third a copy of an earlier one */

static uint64_t mix(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15)); /* splitmix64 (from memory) */
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

/* A smooth random picture (sum of a few gratings) 64x48 RGB, or a copy of picture `of`:
 * brighter, mirrored, or with a stripe burnt in. */
static void picture(struct kiln_image *img, uint64_t seed, int copy_kind)
{
    struct kiln_err err;
    assert_int_equal(kiln_image_reshape(img, 64, 48, 3, 8, &err), KILN_OK);
    uint64_t s = seed;
    double fx[3], fy[3], ph[3];
    for (int k = 0; k < 3; k++) {
        fx[k] = (double)(mix(&s) % 7 + 1) / 64.0;
        fy[k] = (double)(mix(&s) % 5 + 1) / 48.0;
        ph[k] = (double)(mix(&s) % 628) / 100.0;
    }
    uint8_t *p = img->data;
    for (uint32_t y = 0; y < 48; y++)
        for (uint32_t x = 0; x < 64; x++) {
            uint32_t xx = copy_kind == 2 ? 63 - x : x;
            for (int c = 0; c < 3; c++) {
                double v = 128;
                for (int k = 0; k < 3; k++)
                    v += 40 * __builtin_sin(6.2831853 * (fx[k] * xx + fy[k] * y) + ph[k] + c);
                if (copy_kind == 1)
                    v += 12;
                if (copy_kind == 3 && y >= 40 && x < 20)
                    v = 255;
                p[(y * 64 + x) * 3 + c] = (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : v);
            }
        }
}

struct fixture {
    struct kiln_catalog cat;
    struct kiln_nearfp fp[N];
    uint8_t sha[N][KILN_SHA256_LEN];
};

/* The catalogue: picture i at row perm[i]; copies of several kinds, some labelled differently
 * (refused links), one row not ok, one without a fingerprint. */
static void build(struct fixture *f, const uint32_t *perm)
{
    struct kiln_err err = {0};
    kiln_catalog_init(&f->cat);
    assert_int_equal(kiln_near_attach_store(&f->cat, NULL, &err), KILN_OK);
    static const char *const labels[] = {"a", "b", "c"};
    struct kiln_item rows[N];
    for (uint32_t i = 0; i < N; i++) {
        struct kiln_image img = {0};
        uint64_t seed = i % 3 == 2 ? (i - 2) * 7919 : i * 7919;
        picture(&img, seed, i % 3 == 2 ? (int)(i / 3 % 3) + 1 : 0);
        assert_int_equal(kiln_nearfp_compute(&img, &f->fp[i], &err), KILN_OK);
        kiln_image_free(&img);
        uint64_t s = i + 1000;
        for (int b = 0; b < KILN_SHA256_LEN; b++)
            f->sha[i][b] = (uint8_t)mix(&s);
        struct kiln_item *it = &rows[perm[i]];
        memset(it, 0, sizeof *it);
        it->source = "src";
        it->path = labels[i % 3];
        it->label = i % 9 == 8 ? labels[1] : labels[0]; /* some copies under another class */
        it->status = i == 40 ? KILN_ST_CORRUPT : KILN_ST_OK;
        memcpy(it->sha256, f->sha[i], KILN_SHA256_LEN);
        it->split = KILN_SPLIT_NONE;
        it->pool_slot = UINT32_MAX;
        it->fp_slot = KILN_FP_NONE;
        if (i != 41)
            assert_int_equal(kiln_fpstore_put(f->cat.fps, &f->fp[i], &it->fp_slot, &err), KILN_OK);
    }
    for (uint32_t r = 0; r < N; r++) {
        char path[32];
        snprintf(path, sizeof path, "row%03u.png", r);
        rows[r].path = path;
        assert_int_equal(kiln_catalog_add(&f->cat, &rows[r], &err), KILN_OK);
    }
    assert_int_equal(kiln_catalog_index_classes(&f->cat, &err), KILN_OK);
}

/* (picture a, picture b, orientation, verdict, global) of each link, in a canonical order. */
struct flat {
    uint32_t a, b;
    uint8_t o, verdict;
    int32_t g, l;
};

static int cmp_flat(const void *x, const void *y)
{
    const struct flat *p = x, *q = y;
    if (p->a != q->a)
        return p->a < q->a ? -1 : 1;
    if (p->b != q->b)
        return p->b < q->b ? -1 : 1;
    return (p->o > q->o) - (p->o < q->o);
}

static size_t run_stage(const struct fixture *f, const uint32_t *perm, unsigned jobs,
                        struct flat *out)
{
    uint32_t pic_of[N];
    for (uint32_t i = 0; i < N; i++)
        pic_of[perm[i]] = i;
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    struct kiln_nearlinks l;
    struct kiln_err err = {0};
    assert_int_equal(kiln_stage_near(&f->cat, &p, jobs, &l, &err), KILN_OK);
    assert_int_equal(l.pictures, N - 2); /* the row not ok and the one without a fingerprint */
    for (size_t k = 0; k < l.n; k++)
        out[k] = (struct flat){pic_of[l.link[k].c.a], pic_of[l.link[k].c.b],
                               l.link[k].c.orientation, l.link[k].verdict,
                               kiln_nearmatch_global(&l.link[k].m),
                               kiln_nearmatch_local(&l.link[k].m)};
    size_t n = l.n;
    kiln_nearlinks_free(&l);
    qsort(out, n, sizeof *out, cmp_flat);
    return n;
}

/* The core functions directly, on the pictures that take part, ordered by file SHA-256. */
static size_t run_core(const struct fixture *f, struct flat *out)
{
    uint32_t ord[N], m = 0;
    for (uint32_t i = 0; i < N; i++)
        if (i != 40 && i != 41)
            ord[m++] = i;
    for (uint32_t x = 1; x < m; x++) /* insertion sort by SHA-256 */
        for (uint32_t y = x; y > 0 && memcmp(f->sha[ord[y - 1]], f->sha[ord[y]], 32) > 0; y--) {
            uint32_t t = ord[y];
            ord[y] = ord[y - 1];
            ord[y - 1] = t;
        }
    struct kiln_nearfp *fp = malloc(m * sizeof *fp);
    struct kiln_nearkey *key = malloc(m * sizeof *key);
    assert_true(fp && key);
    for (uint32_t k = 0; k < m; k++) {
        fp[k] = f->fp[ord[k]];
        key[k] = kiln_nearkey_of(&fp[k]);
    }
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    struct kiln_nearcands c = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_nearlink_candidates(key, m, &p, &c, &err), KILN_OK);
    struct kiln_nearmatch *match = calloc(c.n + 1, sizeof *match);
    uint8_t *verdict = calloc(c.n + 1, 1);
    uint32_t exact[N], unit[N];
    int32_t label[N];
    assert_true(match && verdict);
    kiln_nearlink_verify(fp, &c, 0, c.n, match);
    for (uint32_t k = 0; k < m; k++) {
        exact[k] = k; /* all files differ */
        label[k] = ord[k] % 9 == 8 ? 1 : 0;
    }
    assert_int_equal(kiln_nearlink_decide(m, exact, label, &c, match, p.max_pictures, verdict,
                                          unit, &err),
                     KILN_OK);
    size_t n = 0;
    for (size_t k = 0; k < c.n; k++)
        if (match[k].linked)
            out[n++] = (struct flat){ord[c.c[k].a], ord[c.c[k].b], c.c[k].orientation,
                                     verdict[k], kiln_nearmatch_global(&match[k]),
                                     kiln_nearmatch_local(&match[k])};
    free(fp);
    free(key);
    free(match);
    free(verdict);
    kiln_nearcands_free(&c);
    qsort(out, n, sizeof *out, cmp_flat);
    return n;
}

static void assert_same(const struct flat *x, size_t nx, const struct flat *y, size_t ny)
{
    assert_int_equal(nx, ny);
    for (size_t k = 0; k < nx; k++)
        if (cmp_flat(&x[k], &y[k]) || x[k].verdict != y[k].verdict || x[k].g != y[k].g ||
            x[k].l != y[k].l)
            fail_msg("link %zu: (%u, %u, o %u, %s) against (%u, %u, o %u, %s)", k, x[k].a,
                     x[k].b, x[k].o, kiln_nearlink_verdict_name(x[k].verdict), y[k].a, y[k].b,
                     y[k].o, kiln_nearlink_verdict_name(y[k].verdict));
}

static void test_threads_and_rows(void **state)
{
    (void)state;
    static struct fixture f;
    static struct flat want[4096], got[4096];
    uint32_t perm[N];
    for (uint32_t i = 0; i < N; i++)
        perm[i] = i;
    build(&f, perm);
    size_t nw = run_core(&f, want);
    size_t refused = 0, linked = 0;
    for (size_t k = 0; k < nw; k++) {
        refused += want[k].verdict == KILN_NEARLINK_REFUSED_LABEL;
        linked += want[k].verdict == KILN_NEARLINK_LINKED;
    }
    /* the set exercises both verdicts and more than the planted copies */
    assert_true(linked >= 20 && refused >= 3);
    for (unsigned jobs = 1; jobs <= 5; jobs += 2) {
        size_t n = run_stage(&f, perm, jobs, got);
        assert_same(got, n, want, nw);
    }
    kiln_catalog_free(&f.cat);
    /* Rows in another order: the same links between the same pictures. */
    uint64_t s = 9;
    for (uint32_t i = N - 1; i > 0; i--) {
        uint32_t j = (uint32_t)(mix(&s) % (i + 1)), t = perm[i];
        perm[i] = perm[j];
        perm[j] = t;
    }
    build(&f, perm);
    size_t n = run_stage(&f, perm, 2, got);
    assert_same(got, n, want, nw);
    kiln_catalog_free(&f.cat);
}

static void test_fingerprints_not_kept(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_item it;
    memset(&it, 0, sizeof it);
    it.source = "s";
    it.path = "p.png";
    it.status = KILN_ST_OK;
    it.split = KILN_SPLIT_NONE;
    it.fp_slot = KILN_FP_SKIPPED; /* read without a store */
    struct kiln_err err = {0};
    assert_int_equal(kiln_catalog_add(&cat, &it, &err), KILN_OK);
    assert_int_equal(kiln_catalog_add(&cat, &it, &err), KILN_OK);
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    struct kiln_nearlinks l;
    assert_int_equal(kiln_stage_near(&cat, &p, 2, &l, &err), KILN_EINTERNAL);
    assert_non_null(strstr(err.msg, "fingerprints"));
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_threads_and_rows),
        cmocka_unit_test(test_fingerprints_not_kept),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
