/* The near-duplicate stage at scale: what `kiln split` spends on near duplicates, measured on
 * the stage itself (core/pipeline/stage_near.c) with its fingerprint store, threads and unit
 * rule (docs/performance.md, "Near duplicates in the split").
 *
 *   kiln-bench-nearstage N [--jobs J] [--dir DIR] [--cache FILE] [--catalog FILE]
 *
 * N synthetic 48x48 pictures (tests/bench/synth.h: smooth random fields with gratings and noise,
 * every hundredth a brighter, noisier copy of an earlier one) are fingerprinted on J threads
 * (or read from FILE, written there the first time: the fingerprints of 10^6 pictures take a
 * few minutes) into a store in DIR (default: the current folder), and a catalogue of N ok items
 * with distinct file digests and no labels points at them. Then the peak resident size is reset
 * (/proc/self/clear_refs) and kiln_stage_near runs with J threads. Printed: wall and CPU time of
 * the stage, candidates, links and verdicts, planted copies found, and the stage's peak
 * resident memory above what the catalogue already held. --catalog writes the catalogue as a
 * catalog.csv, for measuring `kiln split` itself. A benchmark, not a test. */
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "synth.h"
#include "../../core/checked.h"
#include "../../core/nearfp.h"
#include "../../core/pipeline/stage_near.h"
#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/fpstore.h"

static double now(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + (double)t.tv_nsec * 1e-9;
}

static double cpu(void)
{
    struct rusage r;
    getrusage(RUSAGE_SELF, &r);
    return (double)r.ru_utime.tv_sec + (double)r.ru_utime.tv_usec * 1e-6 +
           (double)r.ru_stime.tv_sec + (double)r.ru_stime.tv_usec * 1e-6;
}

static void die(const char *what, const char *detail)
{
    fprintf(stderr, "kiln-bench-nearstage: %s%s%s\n", what, detail ? ": " : "", detail ? detail : "");
    exit(1);
}

/* VmRSS or VmHWM of this process in KiB. */
static long status_kib(const char *key)
{
    FILE *f = fopen("/proc/self/status", "r");
    char line[256];
    long v = -1;
    while (f && fgets(line, sizeof line, f))
        if (strncmp(line, key, strlen(key)) == 0)
            v = strtol(line + strlen(key) + 1, NULL, 10);
    if (f)
        fclose(f);
    return v;
}

#define BATCH 4096

struct batch {
    uint8_t *px;            /* BATCH pictures */
    struct kiln_nearfp *fp; /* their fingerprints */
    size_t n;
    unsigned jobs, part;
};

static void *fingerprint_part(void *arg)
{
    struct batch *b = arg;
    unsigned part = __atomic_fetch_add(&b->part, 1, __ATOMIC_SEQ_CST);
    struct kiln_err err;
    for (size_t k = part; k < b->n; k += b->jobs) {
        struct kiln_image img = {SYN, SYN, 1, 8, SYN, b->px + k * SYN * SYN, 0};
        if (kiln_nearfp_compute(&img, &b->fp[k], &err))
            die("fingerprint failed", err.msg);
    }
    return NULL;
}

/* The fingerprints of the N pictures, in order, into out (raw encoded bytes). */
static void make_fingerprints(size_t n, unsigned jobs, uint8_t *out)
{
    struct batch b = {kiln_alloc_array(BATCH, SYN * SYN), kiln_alloc_array(BATCH, sizeof *b.fp),
                      0, jobs, 0};
    uint8_t cp[SYN * SYN];
    if (!b.px || !b.fp)
        die("out of memory", NULL);
    uint64_t s = 4242;
    for (size_t i = 0; i < n; i += BATCH) {
        b.n = n - i < BATCH ? n - i : BATCH;
        for (size_t k = 0; k < b.n; k++)
            synth_scale_picture(i + k, &s, b.px + k * SYN * SYN, cp);
        b.part = 0;
        pthread_t tid[64];
        unsigned t = 0;
        for (; t + 1 < jobs && t < 64; t++)
            if (pthread_create(&tid[t], NULL, fingerprint_part, &b))
                die("cannot start a thread", NULL);
        fingerprint_part(&b);
        while (t--)
            pthread_join(tid[t], NULL);
        for (size_t k = 0; k < b.n; k++)
            kiln_nearfp_encode(&b.fp[k], out + (i + k) * KILN_NEARFP_BYTES);
    }
    free(b.px);
    free(b.fp);
}

int main(int argc, char **argv)
{
    size_t n = 0;
    unsigned jobs = 2;
    const char *dir = ".", *cache = NULL, *catalog = NULL;
    for (int a = 1; a < argc; a++) {
        if (strcmp(argv[a], "--jobs") == 0 && a + 1 < argc)
            jobs = (unsigned)atoi(argv[++a]);
        else if (strcmp(argv[a], "--dir") == 0 && a + 1 < argc)
            dir = argv[++a];
        else if (strcmp(argv[a], "--cache") == 0 && a + 1 < argc)
            cache = argv[++a];
        else if (strcmp(argv[a], "--catalog") == 0 && a + 1 < argc)
            catalog = argv[++a];
        else if (!n)
            n = strtoull(argv[a], NULL, 10);
        else
            die("usage: kiln-bench-nearstage N [--jobs J] [--dir DIR] [--cache FILE] "
                "[--catalog FILE]", NULL);
    }
    if (!n || !jobs)
        die("usage: kiln-bench-nearstage N [--jobs J] [--dir DIR] [--cache FILE]", NULL);
    /* The fingerprints: from the cache, or made now (and cached). */
    uint8_t *raw = kiln_alloc_array(n, KILN_NEARFP_BYTES);
    if (!raw)
        die("out of memory", NULL);
    FILE *f = cache ? fopen(cache, "rb") : NULL;
    double t0 = now();
    if (!f || fread(raw, KILN_NEARFP_BYTES, n, f) != n) {
        make_fingerprints(n, jobs, raw);
        printf("fingerprints of %zu pictures made in %.1f s on %u threads\n", n, now() - t0, jobs);
        FILE *w = cache ? fopen(cache, "wb") : NULL;
        if (w && fwrite(raw, KILN_NEARFP_BYTES, n, w) != n)
            die("cannot write the cache", cache);
        if (w)
            fclose(w);
    }
    if (f)
        fclose(f);
    /* The catalogue and its store. */
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_err err;
    if (kiln_near_attach_store(&cat, dir, &err))
        die("cannot create the store", err.msg);
    uint64_t s = 99;
    for (size_t i = 0; i < n; i++) {
        struct kiln_nearfp fp;
        if (kiln_nearfp_decode(raw + i * KILN_NEARFP_BYTES, &fp))
            die("a cached fingerprint is damaged", cache);
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        char path[32];
        snprintf(path, sizeof path, "p%07zu.png", i);
        it.source = "bench";
        it.path = path;
        it.format = "png";
        it.status = KILN_ST_OK;
        it.has_sha = it.has_pixels = 1;
        it.width = it.height = SYN;
        it.channels = 1;
        it.depth = it.stored_depth = 8;
        it.orientation = it.pages = 1;
        it.split = KILN_SPLIT_NONE;
        it.class_index = -1;
        it.pool_slot = UINT32_MAX;
        for (int b = 0; b < KILN_SHA256_LEN; b++) {
            it.sha256[b] = (uint8_t)splitmix64(&s);
            it.pixel_sha256[b] = (uint8_t)splitmix64(&s);
        }
        if (kiln_fpstore_put(cat.fps, &fp, &it.fp_slot, &err) || kiln_catalog_add(&cat, &it, &err))
            die("cannot build the catalogue", err.msg);
    }
    free(raw);
    if (catalog && kiln_catalog_csv_save(catalog, &cat, &err))
        die("cannot write the catalogue", err.msg);
    /* The stage, with the peak resident size reset first. */
    FILE *cr = fopen("/proc/self/clear_refs", "w");
    if (!cr || fputs("5", cr) == EOF || fclose(cr) != 0)
        die("cannot reset the peak resident size (/proc/self/clear_refs)", NULL);
    const long base = status_kib("VmRSS:");
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    struct kiln_nearlinks l;
    t0 = now();
    double c0 = cpu();
    if (kiln_stage_near(&cat, &p, jobs, &l, &err))
        die("the near-duplicate stage failed", err.msg);
    const double wall = now() - t0, used = cpu() - c0;
    const long peak = status_kib("VmHWM:");
    size_t planted_found = 0;
    for (size_t k = 0; k < l.n; k++) {
        uint32_t a = l.link[k].c.a, b = l.link[k].c.b, hi = a > b ? a : b;
        planted_found += hi >= 100 && hi % 100 == 0;
    }
    printf("%zu pictures (%zu low-information), %u threads: %.2f s wall, %.2f s CPU\n",
           l.pictures, l.lowinfo, jobs, wall, used);
    printf("%zu candidates, %zu passed the pixel check (%zu on a planted copy): %zu linked, %zu "
           "refused (labels %zu, size %zu)\n",
           l.candidates, l.n, planted_found, l.per_verdict[KILN_NEARLINK_LINKED],
           l.per_verdict[KILN_NEARLINK_REFUSED_LABEL] + l.per_verdict[KILN_NEARLINK_REFUSED_SIZE],
           l.per_verdict[KILN_NEARLINK_REFUSED_LABEL], l.per_verdict[KILN_NEARLINK_REFUSED_SIZE]);
    printf("resident memory: %ld MiB before the stage (the catalogue), peak %ld MiB: the stage "
           "added %ld MiB, %.0f bytes a picture\n",
           base / 1024, peak / 1024, (peak - base) / 1024,
           (double)(peak - base) * 1024.0 / (double)n);
    kiln_nearlinks_free(&l);
    kiln_catalog_free(&cat);
    return 0;
}
