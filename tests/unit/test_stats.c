/* Unit tests for core/stats: exact accumulators checked against closed forms and NIST StRD. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../../core/stats.h"

#define NIST_DIR KILN_TESTDATA "/nist-strd-univariate"

static void assert_close(double got, double want, double rel)
{
    double tol = rel * fabs(want);
    if (!(fabs(got - want) <= tol)) {
        print_error("got %.17g, want %.17g (relative tolerance %g)\n", got, want, rel);
        fail();
    }
}

/* Three channels, each holding every 8-bit value exactly `reps` times (channel c is shifted by
 * 85*c so that a mix-up of channels would show in the min/max of a short prefix). */
static uint8_t *uniform_rgb(size_t reps, size_t *npixels)
{
    size_t n = 256 * reps;
    uint8_t *px = malloc(n * 3);
    assert_non_null(px);
    for (size_t i = 0; i < n; i++)
        for (int c = 0; c < 3; c++)
            px[3 * i + c] = (uint8_t)((i + 85u * (unsigned)c) % 256u);
    *npixels = n;
    return px;
}

/* Discrete uniform distribution on {0..255}: mean (a+b)/2 = 127.5, population variance
 * ((b-a+1)^2 - 1)/12 = (256^2 - 1)/12 = 5461.25 (handbook formula for the discrete uniform).
 * Sum 0..255 = 255*256/2 = 32640 and sum of squares 255*256*511/6 = 5559680 (Faulhaber's
 * formulas for the sums of integers and of squares). */
static void test_uniform_u8(void **state)
{
    (void)state;
    const size_t reps = 4;
    size_t n;
    uint8_t *px = uniform_rgb(reps, &n);
    struct kiln_stats s;
    struct kiln_err err = {0};
    kiln_stats_init(&s, 3);
    assert_int_equal(kiln_stats_add_u8(&s, px, n, &err), KILN_OK);
    for (int c = 0; c < 3; c++) {
        const struct kiln_stats_channel *ch = &s.ch[c];
        assert_int_equal(ch->count, 1024);
        assert_int_equal(ch->sum, reps * 32640u);              /* Gauss: 255*256/2 */
        assert_true(ch->sumsq == (unsigned __int128)reps * 5559680u); /* n(n+1)(2n+1)/6 */
        assert_int_equal(ch->min, 0);
        assert_int_equal(ch->max, 255);
        struct kiln_stats_summary sum;
        assert_int_equal(kiln_stats_summarize(ch, 1.0, &sum, &err), KILN_OK);
        assert_int_equal(sum.count, 1024);
        assert_close(sum.mean, 127.5, 1e-15);                          /* (a+b)/2 */
        assert_close(sum.var_pop, (256.0 * 256.0 - 1.0) / 12.0, 1e-15); /* (n^2-1)/12 */
        assert_close(sum.std_pop, sqrt((256.0 * 256.0 - 1.0) / 12.0), 1e-15);
        /* sample variance = population variance * N/(N-1) (Bessel's correction) */
        assert_close(sum.var_sample, (256.0 * 256.0 - 1.0) / 12.0 * 1024.0 / 1023.0, 1e-14);
        assert_close(sum.std_sample, sqrt((256.0 * 256.0 - 1.0) / 12.0 * 1024.0 / 1023.0),
                     1e-14);
        /* In [0,1] units (scale 255) the mean is 127.5/255 = 0.5 and the variance divides by
         * 255^2 (scaling rule Var(X/k) = Var(X)/k^2, handbook). */
        assert_int_equal(kiln_stats_summarize(ch, 255.0, &sum, &err), KILN_OK);
        assert_close(sum.mean, 0.5, 1e-15);
        assert_close(sum.var_pop, 65535.0 / 12.0 / (255.0 * 255.0), 1e-15);
        assert_int_equal(sum.min, 0);
        assert_int_equal(sum.max, 255);
    }
    free(px);
}

/* 2^20 16-bit samples, half 0 and half 65535: sum = 2^19 * 65535, sum of squares
 * 2^19 * 65535^2, population variance (65535/2)^2 = 65535^2/4 (a two-point distribution with
 * p = 1/2 has variance (b-a)^2/4, handbook). The variance numerator n*sumsq - sum^2 =
 * 2^38 * 65535^2 exceeds 2^64, so this also shows the 128-bit path. */
static void test_two_point_u16(void **state)
{
    (void)state;
    const size_t n = (size_t)1 << 20;
    uint16_t *px = malloc(n * sizeof *px);
    assert_non_null(px);
    for (size_t i = 0; i < n; i++)
        px[i] = (i & 1) ? 65535 : 0;
    struct kiln_stats s;
    struct kiln_err err = {0};
    kiln_stats_init(&s, 1);
    assert_int_equal(kiln_stats_add_u16(&s, px, n, &err), KILN_OK);
    const struct kiln_stats_channel *ch = &s.ch[0];
    assert_int_equal(ch->count, n);
    assert_int_equal(ch->sum, ((uint64_t)1 << 19) * 65535u);
    assert_true(ch->sumsq == ((unsigned __int128)1 << 19) * 65535u * 65535u);
    assert_int_equal(ch->min, 0);
    assert_int_equal(ch->max, 65535);
    struct kiln_stats_summary sum;
    assert_int_equal(kiln_stats_summarize(ch, 1.0, &sum, &err), KILN_OK);
    assert_close(sum.mean, 65535.0 / 2.0, 1e-15);
    assert_close(sum.var_pop, 65535.0 * 65535.0 / 4.0, 1e-15); /* (b-a)^2/4 */
    assert_close(sum.std_pop, 65535.0 / 2.0, 1e-15);
    assert_close(sum.var_sample, 65535.0 * 65535.0 / 4.0 * (double)n / (double)(n - 1), 1e-14);
    /* scale 65535: the [0,1] values are 0 and 1, variance 1/4 */
    assert_int_equal(kiln_stats_summarize(ch, 65535.0, &sum, &err), KILN_OK);
    assert_close(sum.mean, 0.5, 1e-15);
    assert_close(sum.var_pop, 0.25, 1e-15);
    free(px);
}

/* Merging the statistics of two parts gives the statistics of the whole exactly: sums of
 * counts, sums and sums of squares are associative in exact integers (common practice for
 * parallel reductions). Compared with the closed-form totals, not only with a kiln run. */
static void test_merge(void **state)
{
    (void)state;
    size_t n;
    uint8_t *px = uniform_rgb(4, &n);
    struct kiln_err err = {0};
    struct kiln_stats whole, a, b;
    kiln_stats_init(&whole, 3);
    kiln_stats_init(&a, 3);
    kiln_stats_init(&b, 3);
    const size_t cut = 333; /* not a multiple of 256, so each half is skewed */
    assert_int_equal(kiln_stats_add_u8(&whole, px, n, &err), KILN_OK);
    assert_int_equal(kiln_stats_add_u8(&a, px, cut, &err), KILN_OK);
    assert_int_equal(kiln_stats_add_u8(&b, px + 3 * cut, n - cut, &err), KILN_OK);
    assert_int_equal(a.ch[0].count, cut);
    assert_int_equal(a.ch[0].max, 255); /* 333 > 256, every value seen once */
    assert_int_equal(kiln_stats_merge(&a, &b, &err), KILN_OK);
    for (int c = 0; c < 3; c++) {
        assert_int_equal(a.ch[c].count, 1024);
        assert_int_equal(a.ch[c].sum, 4u * 32640u);                    /* Gauss */
        assert_true(a.ch[c].sumsq == (unsigned __int128)4u * 5559680u); /* n(n+1)(2n+1)/6 */
        assert_int_equal(a.ch[c].min, 0);
        assert_int_equal(a.ch[c].max, 255);
        assert_int_equal(a.ch[c].sum, whole.ch[c].sum);
        assert_true(a.ch[c].sumsq == whole.ch[c].sumsq);
    }
    /* A short part: pixels 0..9 of channel 0 hold 0..9, so min 0, max 9, sum 45. */
    struct kiln_stats p;
    kiln_stats_init(&p, 3);
    assert_int_equal(kiln_stats_add_u8(&p, px, 10, &err), KILN_OK);
    assert_int_equal(p.ch[0].sum, 45);
    assert_int_equal(p.ch[0].max, 9);
    assert_int_equal(p.ch[1].min, 85);  /* channel 1 starts at 85 */
    assert_int_equal(p.ch[2].max, 179); /* channel 2 holds 170..179 */
    /* Merging an empty accumulator changes nothing (min stays, not reset to the sentinel). */
    struct kiln_stats empty;
    kiln_stats_init(&empty, 3);
    assert_int_equal(kiln_stats_merge(&p, &empty, &err), KILN_OK);
    assert_int_equal(p.ch[0].count, 10);
    assert_int_equal(p.ch[0].min, 0);
    assert_int_equal(p.ch[0].max, 9);
    /* Different channel counts cannot be merged. */
    struct kiln_stats one;
    kiln_stats_init(&one, 1);
    assert_int_not_equal(kiln_stats_merge(&p, &one, &err), KILN_OK);
    free(px);
}

/* Small cases with hand-computed results. */
static void test_edge_cases(void **state)
{
    (void)state;
    struct kiln_stats s;
    struct kiln_err err = {0};
    struct kiln_stats_summary sum;
    kiln_stats_init(&s, 1);
    /* count 0: all zeros (documented in stats.h) */
    sum.mean = 99;
    assert_int_equal(kiln_stats_summarize(&s.ch[0], 1.0, &sum, &err), KILN_OK);
    assert_int_equal(sum.count, 0);
    assert_true(sum.mean == 0.0 && sum.var_pop == 0.0 && sum.var_sample == 0.0);
    /* count 1: variance 0, sample variance 0 by convention (stats.h) */
    const uint64_t v1 = 7;
    assert_int_equal(kiln_stats_add_values(&s, 0, &v1, 1, &err), KILN_OK);
    assert_int_equal(kiln_stats_summarize(&s.ch[0], 1.0, &sum, &err), KILN_OK);
    assert_true(sum.mean == 7.0 && sum.var_pop == 0.0 && sum.var_sample == 0.0);
    /* {2, 4, 4, 4, 5, 5, 7, 9}: mean 5, population SD 2 (the textbook example of Wikipedia's
     * "Standard deviation" article, from memory); sample variance 32/7. */
    const uint64_t v[] = {2, 4, 4, 4, 5, 5, 7, 9};
    kiln_stats_init(&s, 1);
    assert_int_equal(kiln_stats_add_values(&s, 0, v, 8, &err), KILN_OK);
    assert_int_equal(kiln_stats_summarize(&s.ch[0], 1.0, &sum, &err), KILN_OK);
    assert_close(sum.mean, 5.0, 1e-15);
    assert_close(sum.std_pop, 2.0, 1e-15);
    assert_close(sum.var_sample, 32.0 / 7.0, 1e-15);
    assert_int_equal(sum.min, 2);
    assert_int_equal(sum.max, 9);
    /* channel index out of range is refused */
    assert_int_equal(kiln_stats_add_values(&s, 4, v, 1, &err), KILN_EINVAL);
    /* a sum that would pass 2^64 is refused instead of wrapping */
    const uint64_t big[] = {UINT64_MAX / 2 + 1, UINT64_MAX / 2 + 1};
    kiln_stats_init(&s, 1);
    assert_int_equal(kiln_stats_add_values(&s, 0, big, 2, &err), KILN_ENOMEM);
}

/* ---- NIST StRD univariate summary statistics (CHECKS.md section 4) ---- */

struct nist_set {
    const char *file;
    size_t n;
    double mean, s; /* certified values: NIST StRD, as listed in CHECKS.md section 4 */
};

static const struct nist_set nist_sets[] = {
    {"NumAcc1.dat", 3, 10000002.0, 1.0},
    {"NumAcc2.dat", 1001, 1.2, 0.1},
    {"NumAcc3.dat", 1001, 1000000.2, 0.1},
    {"NumAcc4.dat", 1001, 10000000.2, 0.1},
    {"Lew.dat", 200, -177.435, 277.332168044316},
    {"Lottery.dat", 218, 518.958715596330, 291.699727470969},
    {"Mavro.dat", 50, 2.00185600000000, 0.000429123454003053},
    {"Michelso.dat", 100, 299.852400000000, 0.0790105478190518},
};

/* Reads the values after the "Data: Y" line and its dashes as exact decimals: digits before
 * and after the point are kept as integers, so scaling by 10^decimals loses nothing. */
struct decimal {
    int neg;
    uint64_t whole, frac;
    int fd;
};

static size_t read_nist(const char *path, struct decimal **out)
{
    FILE *f = fopen(path, "r");
    assert_non_null(f);
    char line[256];
    int in_data = 0, seen_dashes = 0;
    size_t n = 0, cap = 0;
    struct decimal *v = NULL;
    while (fgets(line, sizeof line, f)) {
        if (!in_data) {
            if (strncmp(line, "Data: Y", 7) == 0)
                in_data = 1;
            continue;
        }
        char *p = line;
        while (*p == ' ' || *p == '\t')
            p++;
        if (!seen_dashes) {
            assert_true(*p == '-');
            seen_dashes = 1;
            continue;
        }
        if (*p == '\n' || *p == '\r' || *p == '\0')
            continue;
        struct decimal d = {0};
        if (*p == '-') {
            d.neg = 1;
            p++;
        }
        assert_true(*p >= '0' && *p <= '9');
        for (; *p >= '0' && *p <= '9'; p++)
            d.whole = d.whole * 10 + (uint64_t)(*p - '0');
        if (*p == '.')
            for (p++; *p >= '0' && *p <= '9'; p++, d.fd++)
                d.frac = d.frac * 10 + (uint64_t)(*p - '0');
        while (*p == ' ' || *p == '\t' || *p == '\r' || *p == '\n')
            p++;
        assert_true(*p == '\0'); /* one value per line */
        if (n == cap) {
            cap = cap ? 2 * cap : 256;
            v = realloc(v, cap * sizeof *v);
            assert_non_null(v);
        }
        v[n++] = d;
    }
    fclose(f);
    *out = v;
    return n;
}

static void check_nist(const struct nist_set *set)
{
    char path[1024];
    snprintf(path, sizeof path, "%s/%s", NIST_DIR, set->file);
    struct decimal *d;
    size_t n = read_nist(path, &d);
    assert_int_equal(n, set->n); /* observation counts, CHECKS.md section 4 */
    int dec = 0;
    for (size_t i = 0; i < n; i++)
        if (d[i].fd > dec)
            dec = d[i].fd;
    int64_t p10 = 1;
    for (int k = 0; k < dec; k++)
        p10 *= 10;
    int64_t *x = malloc(n * sizeof *x), lo = INT64_MAX;
    uint64_t *u = malloc(n * sizeof *u);
    assert_true(x && u);
    for (size_t i = 0; i < n; i++) {
        int64_t fr = (int64_t)d[i].frac;
        for (int k = d[i].fd; k < dec; k++)
            fr *= 10;
        x[i] = (int64_t)d[i].whole * p10 + fr;
        if (d[i].neg)
            x[i] = -x[i];
        if (x[i] < lo)
            lo = x[i];
    }
    /* kiln_stats_add_values takes non-negative integers: shift by the minimum when it is
     * negative (Lew); a shift moves the mean and leaves the variance unchanged. */
    const int64_t shift = lo < 0 ? -lo : 0;
    for (size_t i = 0; i < n; i++)
        u[i] = (uint64_t)(x[i] + shift);
    struct kiln_stats s;
    struct kiln_err err = {0};
    kiln_stats_init(&s, 1);
    assert_int_equal(kiln_stats_add_values(&s, 0, u, n, &err), KILN_OK);
    struct kiln_stats_summary sum;
    assert_int_equal(kiln_stats_summarize(&s.ch[0], 1.0, &sum, &err), KILN_OK);
    const double mean = (sum.mean - (double)shift) / (double)p10;
    const double sd = sum.std_sample / (double)p10;
    print_message("%-13s n=%4zu scale=1e%d mean=%.17g s=%.17g\n", set->file, n, dec, mean, sd);
    /* Certified values, NIST StRD (CHECKS.md section 4), relative tolerance 1e-13. */
    assert_close(mean, set->mean, 1e-13);
    assert_close(sd, set->s, 1e-13);
    /* population variance = s^2 (n-1)/n (CHECKS.md section 4) */
    const double vp = sum.var_pop / ((double)p10 * (double)p10);
    assert_close(vp, set->s * set->s * (double)(n - 1) / (double)n, 1e-13);
    free(x);
    free(u);
    free(d);
}

static void test_nist_strd(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof nist_sets / sizeof nist_sets[0]; i++)
        check_nist(&nist_sets[i]);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_uniform_u8),
        cmocka_unit_test(test_two_point_u16),
        cmocka_unit_test(test_merge),
        cmocka_unit_test(test_edge_cases),
    };
    int failed = cmocka_run_group_tests_name("stats", tests, NULL, NULL);
    if (failed)
        return failed;
    struct stat st;
    if (stat(NIST_DIR, &st) != 0) {
        printf("skipped: NIST StRD checks need %s (the shared test data is absent)\n", NIST_DIR);
        return 77;
    }
    const struct CMUnitTest nist[] = {cmocka_unit_test(test_nist_strd)};
    return cmocka_run_group_tests_name("stats-nist", nist, NULL, NULL);
}
