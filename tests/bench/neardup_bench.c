/* Benchmark (not a test) for the near-duplicate search: 10^6 fixed-seed hashes, mostly uniform
 * random with about 1% planted near duplicates, searched on one thread at radius 6 (kiln's
 * default), 3 and 10. Prints the median wall time of the runs, the pair count, the number of
 * comparisons the bucket-scan form (radius + 1 tables) would make on uniform data (the
 * n^2/2 * sum 2^-len estimate of neardup.h; the search may choose fewer, longer tables, which
 * make fewer), and the process's peak resident memory.
 *
 *     kiln-bench-neardup [-n COUNT] [-k RUNS] [RADIUS...]      (defaults: 1000000, 5, 6 3 10)
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "../../core/neardup.h"

static uint64_t splitmix64(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Every 100th hash is a copy of a random earlier one with 0..10 random bits flipped (a bit may
 * be drawn twice, so the distance is at most the count drawn). */
static void generate(uint64_t *h, size_t n)
{
    uint64_t s = 12345;
    for (size_t i = 0; i < n; i++) {
        if (i > 0 && i % 100 == 0) {
            uint64_t v = h[splitmix64(&s) % i];
            unsigned d = (unsigned)(splitmix64(&s) % 11);
            for (unsigned k = 0; k < d; k++)
                v ^= UINT64_C(1) << (splitmix64(&s) % 64);
            h[i] = v;
        } else {
            h[i] = splitmix64(&s);
        }
    }
}

int main(int argc, char **argv)
{
    size_t n = 1000000;
    int runs = 5, argi = 1;
    unsigned radii[KILN_NEARDUP_MAX_RADIUS + 1] = {6, 3, 10};
    size_t nradii = 3;
    for (; argi + 1 < argc && argv[argi][0] == '-'; argi += 2) {
        if (strcmp(argv[argi], "-n") == 0)
            n = strtoull(argv[argi + 1], NULL, 10);
        else if (strcmp(argv[argi], "-k") == 0)
            runs = atoi(argv[argi + 1]);
        else
            break;
    }
    if (argi < argc) {
        nradii = 0;
        for (; argi < argc && nradii <= KILN_NEARDUP_MAX_RADIUS; argi++)
            radii[nradii++] = (unsigned)atoi(argv[argi]);
    }
    if (runs < 1 || runs > 99 || n < 2) {
        fprintf(stderr, "usage: kiln-bench-neardup [-n COUNT] [-k RUNS] [RADIUS...]\n");
        return 2;
    }

    uint64_t *h = malloc(n * sizeof *h);
    if (!h) {
        fprintf(stderr, "kiln-bench-neardup: cannot allocate %zu hashes\n", n);
        return 1;
    }
    generate(h, n);
    printf("n = %zu hashes (1%% planted near duplicates), %d runs each, one thread\n", n, runs);

    for (size_t k = 0; k < nradii; k++) {
        unsigned r = radii[k], len[KILN_NEARDUP_MAX_RADIUS + 1];
        unsigned m = kiln_neardup_substrings(r, NULL, len);
        double frac = 0;
        for (unsigned t = 0; t < m; t++)
            frac += 1.0 / (double)(UINT64_C(1) << (len[t] < 63 ? len[t] : 63));
        double t_run[100];
        size_t npairs = 0;
        for (int i = 0; i < runs; i++) {
            struct kiln_pairs out = {0};
            struct kiln_err err = {0};
            double t0 = now();
            int rc = kiln_neardup_pairs(h, n, r, &out, &err);
            t_run[i] = now() - t0;
            if (rc) {
                fprintf(stderr, "kiln-bench-neardup: %s\n", err.msg);
                return 1;
            }
            npairs = out.n;
            kiln_pairs_free(&out);
        }
        qsort(t_run, (size_t)runs, sizeof *t_run, cmp_double);
        struct rusage ru;
        getrusage(RUSAGE_SELF, &ru);
        printf("radius %2u: median %.3f s (min %.3f, max %.3f), %zu pairs; bucket scan of %u "
               "tables: ~%.3g comparisons; peak RSS %ld MiB\n",
               r, t_run[runs / 2], t_run[0], t_run[runs - 1], npairs, m,
               (double)n * (double)(n - 1) / 2 * frac, ru.ru_maxrss / 1024);
        fflush(stdout);
    }
    free(h);
    return 0;
}
