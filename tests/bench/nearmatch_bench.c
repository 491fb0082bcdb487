/* Benchmark (not a test) of the near-duplicate detector (core/nearfp.c, core/nearlink.c) on
 * pictures with ground truth, and its speed on 10^6 synthetic fingerprints.
 *
 *   kiln-bench-nearmatch SET [--jobs N] [--no-labels] [--dump FILE]
 *       SET is a folder written by make_neardup_set.py (images/ and truth.csv: one row per
 *       file with its specimen, set, label and transformation). Decodes every file with kiln's
 *       decoders, applies its Exif orientation, computes the fingerprint, finds candidates,
 *       checks them on pixels and applies the unit rule, with exact units from file SHA-256 and
 *       pixel digest. Prints pair precision, recall and F1 overall, per set and per
 *       transformation, every unit that mixes specimens, the digits' cross-class units, and
 *       the time of each step. --no-labels runs the unit rule without labels (the detector
 *       alone); --dump writes every candidate with its measurements as CSV.
 *   kiln-bench-nearmatch --demo DIR [--jobs N]
 *       DIR is the output of kiln-demo-data. Ground truth from the names: the tile number
 *       (T0107_b.jpg: tile 107). Reports links between different tiles (must be none) and
 *       between shots of one tile (separate photographs: allowed, not copies).
 *   kiln-bench-nearmatch ... --param NAME=VALUE
 *       overrides a search parameter (radius_full, radius_centre, radius_turned, radius_coarse,
 *       coarse_confirm, max_pictures) to measure a trade-off.
 *   kiln-bench-nearmatch --scale N [--jobs N]
 *       N synthetic fingerprints of generated 48x48 pictures (random smooth fields, gratings
 *       and noise; every 100th a lightly changed copy of an earlier one), then the candidate
 *       search and the pixel check timed on --jobs threads; peak memory.
 *
 * Links only kiln_formats and kiln_core: the stages (core/stage_*.c) play no part. */
#include <ftw.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <time.h>

#include "synth.h"
#include "../../core/checked.h"
#include "../../core/convert.h"
#include "../../core/disjoint.h"
#include "../../core/nearfp.h"
#include "../../core/nearlink.h"
#include "../../core/sha256.h"
#include "../../formats/files/csv.h"
#include "../../formats/decoders/decoder.h"
#include "../../formats/sources/source.h"

static double now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

/* CPU seconds of the whole process: on a shared machine the fair measure of the work done. */
static double cpu(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + (double)ts.tv_nsec * 1e-9;
}

static void die(const char *what, const char *detail)
{
    fprintf(stderr, "kiln-bench-nearmatch: %s%s%s\n", what, detail ? ": " : "", detail ? detail : "");
    exit(1);
}

static void *xalloc(size_t n, size_t size)
{
    void *p = kiln_alloc_array(n ? n : 1, size);
    if (!p)
        die("out of memory", NULL);
    memset(p, 0, (n ? n : 1) * size);
    return p;
}

/* --param NAME=VALUE overrides of the search's defaults, for measuring trade-offs. */
static const char *overrides[16];
static int noverrides;

static void apply_overrides(struct kiln_nearlink_params *p)
{
    for (int i = 0; i < noverrides; i++) {
        unsigned v;
        char name[32];
        if (sscanf(overrides[i], "%31[a-z_]=%u", name, &v) != 2)
            die("bad --param (NAME=VALUE)", overrides[i]);
        if (!strcmp(name, "radius_full"))
            p->radius_full = v;
        else if (!strcmp(name, "radius_centre"))
            p->radius_centre = v;
        else if (!strcmp(name, "radius_turned"))
            p->radius_turned = v;
        else if (!strcmp(name, "radius_coarse"))
            p->radius_coarse = v;
        else if (!strcmp(name, "coarse_confirm"))
            p->coarse_confirm = v;
        else if (!strcmp(name, "max_pictures"))
            p->max_pictures = v;
        else
            die("unknown --param", name);
    }
}

/* ---- the items ---------------------------------------------------------------------------- */

struct item {
    char *file, *set, *specimen, *label, *role, *transform, *param;
    int ok;                /* decoded */
    char reason[160];
    uint8_t sha[32], pix[32];
    struct kiln_nearfp fp;
};

struct run {
    const char *root;
    struct item *it;
    size_t n, cap;
    atomic_size_t next;
    int jobs;
    /* verification */
    const struct kiln_nearcands *cands;
    struct kiln_nearmatch *match;
    const struct kiln_nearfp *fps;
};

static char *xstrdup(const char *s)
{
    char *p = strdup(s ? s : "");
    if (!p)
        die("out of memory", NULL);
    return p;
}

static struct item *add_item(struct run *r)
{
    if (r->n == r->cap) {
        r->cap = r->cap ? 2 * r->cap : 1024;
        r->it = realloc(r->it, r->cap * sizeof *r->it);
        if (!r->it)
            die("out of memory", NULL);
    }
    struct item *it = &r->it[r->n++];
    memset(it, 0, sizeof *it);
    return it;
}

static void read_truth(struct run *r)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/truth.csv", r->root);
    struct kiln_csv_reader rd;
    struct kiln_err err;
    if (kiln_csv_open(&rd, path, &err))
        die("cannot read the ground truth", err.msg);
    int rc, header = 1;
    while ((rc = kiln_csv_next(&rd, &err)) == 1) {
        if (header) {
            header = 0;
            continue;
        }
        if (rd.nfields < 8)
            die("truth.csv row with fewer than 8 fields", path);
        struct item *it = add_item(r);
        it->file = xstrdup(rd.fields[0]);
        it->set = xstrdup(rd.fields[1]);
        it->specimen = xstrdup(rd.fields[2]);
        it->label = xstrdup(rd.fields[3]);
        it->role = xstrdup(rd.fields[4]);
        it->transform = xstrdup(rd.fields[5]);
        it->param = xstrdup(rd.fields[6]);
    }
    if (rc < 0)
        die("cannot parse truth.csv", err.msg);
    kiln_csv_close(&rd);
}

static struct run *demo_collect; /* nftw has no context argument; tool code only */

/* glaze-tiles/<class>/T0107_b.jpg: specimen = tile, label = class; other files are skipped. */
static int demo_add(const char *p, const struct stat *st, int type, struct FTW *ftw)
{
    (void)st;
    (void)ftw;
    if (type != FTW_F)
        return 0;
    const char *base = strrchr(p, '/');
    base = base ? base + 1 : p;
    unsigned tile;
    char shot;
    if (sscanf(base, "T%4u_%c", &tile, &shot) != 2)
        return 0;
    struct run *r = demo_collect;
    struct item *it = add_item(r);
    const char *rel = p + strlen(r->root) + 1;
    it->file = xstrdup(rel);
    char spec[32], cls[128] = "";
    snprintf(spec, sizeof spec, "T%04u", tile);
    const char *slash = strrchr(rel, '/');
    const char *prev = slash;
    while (prev && prev > rel && prev[-1] != '/')
        prev--;
    if (slash && prev)
        snprintf(cls, sizeof cls, "%.*s", (int)(slash - prev), prev);
    it->set = xstrdup("demo");
    it->specimen = xstrdup(spec);
    it->label = xstrdup(cls);
    it->role = xstrdup("shot");
    it->transform = xstrdup("");
    it->param = xstrdup("");
    return 0;
}

static int cmp_item_file(const void *a, const void *b)
{
    return strcmp(((const struct item *)a)->file, ((const struct item *)b)->file);
}

/* Decode, orient, digest and fingerprint one file: what scan or build would do. */
static void load_item(struct run *r, struct item *it, struct kiln_image *img,
                      struct kiln_image *shown)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", r->root, it->file);
    uint8_t *data = NULL;
    size_t size = 0;
    struct kiln_err err;
    if (kiln_source_read_file(path, 0, &data, &size, &err)) {
        snprintf(it->reason, sizeof it->reason, "%s", err.msg);
        return;
    }
    if (kiln_sha256_buf(data, size, it->sha, &err)) {
        snprintf(it->reason, sizeof it->reason, "%s", err.msg);
        free(data);
        return;
    }
    const struct kiln_decoder *dec = kiln_decoder_find(data, size);
    struct kiln_image_info info;
    int rc = dec ? dec->read_info(data, size, NULL, &info, &err) : KILN_EUNSUPPORTED;
    if (!dec)
        snprintf(err.msg, sizeof err.msg, "not an image kiln decodes");
    if (!rc)
        rc = kiln_decoded_shape(&info, 1, img, &err);
    if (!rc)
        rc = dec->decode(data, size, &info, 1, img, &err);
    free(data);
    const struct kiln_image *use = img;
    if (!rc && info.orientation != 1) {
        rc = kiln_orient(img, info.orientation, shown, &err);
        use = shown;
    }
    if (!rc) {
        /* The pixel digest of docs/split.md section 7 (little-endian host assumed here). */
        struct kiln_sha256 ctx;
        uint8_t head[16];
        const uint32_t v[4] = {use->width, use->height, use->channels, use->depth};
        for (int i = 0; i < 4; i++)
            for (int b = 0; b < 4; b++)
                head[4 * i + b] = (uint8_t)(v[i] >> (8 * b));
        rc = kiln_sha256_init(&ctx, &err);
        if (!rc) {
            kiln_sha256_update(&ctx, head, sizeof head);
            kiln_sha256_update(&ctx, use->data, (size_t)use->height * use->stride);
            rc = kiln_sha256_final(&ctx, it->pix, &err);
            kiln_sha256_free(&ctx);
        }
    }
    if (!rc)
        rc = kiln_nearfp_compute(use, &it->fp, &err);
    if (rc) {
        snprintf(it->reason, sizeof it->reason, "%s", err.msg);
        return;
    }
    it->ok = 1;
}

static void *load_worker(void *arg)
{
    struct run *r = arg;
    struct kiln_image img = {0}, shown = {0};
    for (;;) {
        size_t i = atomic_fetch_add(&r->next, 1);
        if (i >= r->n)
            break;
        load_item(r, &r->it[i], &img, &shown);
    }
    kiln_image_free(&img);
    kiln_image_free(&shown);
    return NULL;
}

/* The searches handed out to the threads one by one, then merged: the same candidates as one
 * thread would find (kiln_nearlink_merge sorts them). */
struct search_run {
    const struct kiln_nearkey *fp;
    size_t n;
    const struct kiln_nearlink_params *p;
    struct kiln_nearcands parts[KILN_NEARLINK_SEARCHES];
    double cpu[KILN_NEARLINK_SEARCHES];
    atomic_uint next;
    atomic_int failed;
};

static void *search_worker(void *arg)
{
    struct search_run *sr = arg;
    for (;;) {
        unsigned w = atomic_fetch_add(&sr->next, 1);
        if (w >= KILN_NEARLINK_SEARCHES)
            break;
        struct kiln_err err;
        struct timespec a, b;
        clock_gettime(CLOCK_THREAD_CPUTIME_ID, &a);
        if (kiln_nearlink_search(sr->fp, sr->n, sr->p, w, &sr->parts[w], &err))
            atomic_store(&sr->failed, 1);
        clock_gettime(CLOCK_THREAD_CPUTIME_ID, &b);
        sr->cpu[w] = (double)(b.tv_sec - a.tv_sec) + (double)(b.tv_nsec - a.tv_nsec) * 1e-9;
    }
    return NULL;
}

static void parallel_candidates(const struct kiln_nearfp *fp, size_t n,
                                const struct kiln_nearlink_params *p, int jobs,
                                struct kiln_nearcands *out, int report)
{
    struct search_run sr;
    memset(&sr, 0, sizeof sr);
    struct kiln_nearkey *key = xalloc(n, sizeof *key);
    for (size_t i = 0; i < n; i++)
        key[i] = kiln_nearkey_of(&fp[i]);
    sr.fp = key;
    sr.n = n;
    sr.p = p;
    pthread_t tid[64];
    for (int j = 0; j < jobs; j++)
        if (pthread_create(&tid[j], NULL, search_worker, &sr))
            die("cannot start a thread", NULL);
    for (int j = 0; j < jobs; j++)
        pthread_join(tid[j], NULL);
    struct kiln_err err;
    if (atomic_load(&sr.failed) || kiln_nearlink_merge(key, sr.parts, KILN_NEARLINK_SEARCHES, out, &err))
        die("candidate search failed", NULL);
    free(key);
    if (report) {
        printf("CPU time per search (s): full %.2f, centre %.2f, coarse %.2f, coarse centre %.2f, "
               "turned", sr.cpu[0], sr.cpu[1], sr.cpu[2], sr.cpu[3]);
        for (int w = 4; w < KILN_NEARLINK_SEARCHES; w++)
            printf(" %.2f", sr.cpu[w]);
        printf("\n");
    }
    for (int w = 0; w < KILN_NEARLINK_SEARCHES; w++)
        kiln_nearcands_free(&sr.parts[w]);
}

/* Verification in chunks handed out to the threads; results land by candidate index. */
#define CHUNK 256
static void *verify_worker(void *arg)
{
    struct run *r = arg;
    for (;;) {
        size_t from = atomic_fetch_add(&r->next, CHUNK);
        if (from >= r->cands->n)
            break;
        size_t to = from + CHUNK < r->cands->n ? from + CHUNK : r->cands->n;
        kiln_nearlink_verify(r->fps, r->cands, from, to, r->match);
    }
    return NULL;
}

static void run_threads(struct run *r, void *(*fn)(void *))
{
    pthread_t tid[64];
    atomic_store(&r->next, 0);
    for (int j = 0; j < r->jobs; j++)
        if (pthread_create(&tid[j], NULL, fn, r))
            die("cannot start a thread", NULL);
    for (int j = 0; j < r->jobs; j++)
        pthread_join(tid[j], NULL);
}

/* ---- metrics ------------------------------------------------------------------------------- */

/* Dense ids for strings (specimens, labels): sort the indices by string. */
static const struct item *sort_items;
static int sort_field; /* 0 specimen, 1 label */
static int cmp_by_field(const void *a, const void *b)
{
    const struct item *x = &sort_items[*(const uint32_t *)a], *y = &sort_items[*(const uint32_t *)b];
    return strcmp(sort_field ? x->label : x->specimen, sort_field ? y->label : y->specimen);
}

static uint32_t *dense_ids(const struct item *it, size_t n, int field)
{
    uint32_t *ord = xalloc(n, sizeof *ord), *id = xalloc(n, sizeof *id);
    for (size_t i = 0; i < n; i++)
        ord[i] = (uint32_t)i;
    sort_items = it;
    sort_field = field;
    qsort(ord, n, sizeof *ord, cmp_by_field);
    uint32_t next = 0;
    for (size_t k = 0; k < n; k++) {
        if (k && cmp_by_field(&ord[k - 1], &ord[k]) != 0)
            next++;
        id[ord[k]] = next;
    }
    free(ord);
    return id;
}

static int cmp_u64(const void *a, const void *b)
{
    uint64_t x = *(const uint64_t *)a, y = *(const uint64_t *)b;
    return (x > y) - (x < y);
}

struct tally {
    double tp, predicted, truth;
};

static void print_prf(const char *name, const struct tally *t)
{
    double p = t->predicted > 0 ? t->tp / t->predicted : 1, r = t->truth > 0 ? t->tp / t->truth : 1;
    double f = p + r > 0 ? 2 * p * r / (p + r) : 0;
    printf("  %-22s pairs: %6.0f true, %6.0f found, %6.0f correct   precision %.4f  recall %.4f  F1 %.4f\n",
           name, t->truth, t->predicted, t->tp, p, r, f);
}

/* Pairs of decoded items (of one set, or all when set is NULL): in the same unit (found) and of
 * the same specimen (true). */
static void pair_tally(const struct item *it, size_t n, const uint32_t *unit, const uint32_t *spec,
                       const char *set, struct tally *t)
{
    memset(t, 0, sizeof *t);
    /* Counting by sorting (unit, specimen) keys. */
    uint64_t *k = xalloc(n, sizeof *k);
    size_t m = 0;
    for (size_t i = 0; i < n; i++)
        if (it[i].ok && (!set || strcmp(it[i].set, set) == 0))
            k[m++] = (uint64_t)unit[i] << 32 | spec[i];
    qsort(k, m, sizeof *k, cmp_u64);
    for (size_t i = 0, j; i < m; i = j) {
        for (j = i; j < m && k[j] >> 32 == k[i] >> 32; j++)
            ;
        double units = (double)(j - i);
        t->predicted += units * (units - 1) / 2;
        for (size_t a = i, b; a < j; a = b) {
            for (b = a; b < j && k[b] == k[a]; b++)
                ;
            double s = (double)(b - a);
            t->tp += s * (s - 1) / 2;
        }
    }
    /* truth: by specimen */
    for (size_t i = 0; i < m; i++)
        k[i] = (uint64_t)(uint32_t)k[i];
    qsort(k, m, sizeof *k, cmp_u64);
    for (size_t i = 0, j; i < m; i = j) {
        for (j = i; j < m && k[j] == k[i]; j++)
            ;
        double s = (double)(j - i);
        t->truth += s * (s - 1) / 2;
    }
    free(k);
}

static int cmp_str(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Per transformation: recall over (original, copy) pairs, precision over the found pairs that
 * involve the copy. */
static void per_transform(const struct item *it, size_t n, const uint32_t *unit,
                          const uint32_t *spec)
{
    /* members of each unit */
    uint32_t *usize = xalloc(n, sizeof *usize);
    for (size_t i = 0; i < n; i++)
        if (it[i].ok)
            usize[unit[i]]++;
    /* original of each specimen */
    uint32_t *orig = xalloc(n, sizeof *orig);
    for (size_t i = 0; i < n; i++)
        orig[i] = UINT32_MAX;
    for (size_t i = 0; i < n; i++)
        if (strcmp(it[i].role, "original") == 0)
            orig[spec[i]] = (uint32_t)i;
    /* same-specimen members per unit, by (unit, spec) counting */
    char **names = xalloc(n, sizeof *names);
    size_t nn = 0;
    for (size_t i = 0; i < n; i++)
        if (strcmp(it[i].role, "copy") == 0)
            names[nn++] = it[i].transform;
    qsort(names, nn, sizeof *names, cmp_str);
    printf("\nper transformation (pairs original-copy for recall; precision over every found pair"
           " of the copy):\n");
    printf("  %-20s %5s %7s %9s %9s %7s\n", "transformation", "set", "copies", "recall",
           "precision", "F1");
    for (size_t a = 0, b; a < nn; a = b) {
        for (b = a; b < nn && strcmp(names[a], names[b]) == 0; b++)
            ;
        const char *t = names[a];
        for (int pass = 0; pass < 2; pass++) {
            const char *set = pass ? "flat" : "main";
            double found = 0, total = 0, pairs = 0, wrong = 0;
            for (size_t i = 0; i < n; i++) {
                if (strcmp(it[i].role, "copy") || strcmp(it[i].transform, t) ||
                    strcmp(it[i].set, set))
                    continue;
                uint32_t o = orig[spec[i]];
                total++;
                if (o != UINT32_MAX && it[i].ok && it[o].ok && unit[o] == unit[i])
                    found++;
                if (!it[i].ok)
                    continue;
                /* found pairs of this copy and how many are with other specimens */
                pairs += usize[unit[i]] - 1;
                for (size_t j = 0; j < n; j++)
                    if (j != i && it[j].ok && unit[j] == unit[i] && spec[j] != spec[i])
                        wrong++;
            }
            if (total == 0)
                continue;
            double rec = found / total, prec = pairs > 0 ? (pairs - wrong) / pairs : 1;
            printf("  %-20s %5s %7.0f %9.3f %9.3f %7.3f\n", t, set, total, rec, prec,
                   prec + rec > 0 ? 2 * prec * rec / (prec + rec) : 0);
        }
    }
    free(names);
    free(orig);
    free(usize);
}

/* Units holding more than one specimen; with by_label, more than one label (digits). */
static size_t mixed_units(const struct item *it, size_t n, const uint32_t *unit,
                          const uint32_t *key, const char *set, int print)
{
    uint64_t *k = xalloc(n, sizeof *k);
    size_t m = 0, mixed = 0;
    for (size_t i = 0; i < n; i++)
        if (it[i].ok && (!set || strcmp(it[i].set, set) == 0))
            k[m++] = (uint64_t)unit[i] << 32 | key[i];
    qsort(k, m, sizeof *k, cmp_u64);
    for (size_t i = 0, j; i < m; i = j) {
        size_t distinct = 1;
        for (j = i + 1; j < m && k[j] >> 32 == k[i] >> 32; j++)
            distinct += k[j] != k[j - 1];
        if (distinct < 2)
            continue;
        mixed++;
        if (print && mixed <= 40) {
            printf("    unit of %zu files, %zu specimens:", j - i, distinct);
            uint32_t u = (uint32_t)(k[i] >> 32);
            int shown = 0;
            for (size_t x = 0; x < n && shown < 8; x++)
                if (it[x].ok && unit[x] == u) {
                    printf(" %s", it[x].file);
                    shown++;
                }
            printf("%s\n", j - i > 8 ? " ..." : "");
        }
    }
    free(k);
    return mixed;
}

/* ---- the set run ------------------------------------------------------------------------------ */

struct dig {
    const uint8_t *d;
    uint32_t i;
};
static int cmp_dig(const void *a, const void *b)
{
    const struct dig *x = a, *y = b;
    int c = memcmp(x->d, y->d, 32);
    return c ? c : (x->i > y->i) - (x->i < y->i);
}

/* Exact units: union of same file SHA-256 and same pixel digest, numbered by smallest item. */
static uint32_t *exact_units(const struct item *it, size_t n)
{
    struct kiln_uf uf = {xalloc(n, sizeof(uint32_t))};
    for (size_t i = 0; i < n; i++)
        uf.parent[i] = (uint32_t)i;
    struct dig *d = xalloc(n, sizeof *d);
    for (int pass = 0; pass < 2; pass++) {
        size_t m = 0;
        for (size_t i = 0; i < n; i++)
            if (it[i].ok)
                d[m++] = (struct dig){pass ? it[i].pix : it[i].sha, (uint32_t)i};
        qsort(d, m, sizeof *d, cmp_dig);
        for (size_t k = 1; k < m; k++)
            if (memcmp(d[k - 1].d, d[k].d, 32) == 0)
                kiln_uf_union(&uf, d[k - 1].i, d[k].i);
    }
    free(d);
    uint32_t *ex = xalloc(n, sizeof *ex);
    for (size_t i = 0; i < n; i++)
        ex[i] = kiln_uf_find(&uf, (uint32_t)i);
    free(uf.parent);
    return ex;
}

static void run_set(struct run *r, int no_labels, const char *dump, int demo)
{
    double t0 = now();
    run_threads(r, load_worker);
    double t_load = now() - t0;
    size_t n = r->n, bad = 0, low = 0, small = 0;
    struct kiln_nearfp *fp = xalloc(n, sizeof *fp);
    for (size_t i = 0; i < n; i++) {
        if (!r->it[i].ok) {
            bad++;
            if (bad <= 10)
                printf("  not decoded: %s: %s\n", r->it[i].file, r->it[i].reason);
            fp[i].flags = KILN_NEARFP_LOWINFO;
            continue;
        }
        fp[i] = r->it[i].fp;
        low += (fp[i].flags & KILN_NEARFP_LOWINFO) != 0;
        small += (fp[i].flags & KILN_NEARFP_SMALL) != 0;
    }
    printf("%zu files, %zu not decoded, %zu low-information (%zu smaller than %d pixels a side)\n",
           n, bad, low, small, KILN_NEARFP_MIN_SIDE);

    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    apply_overrides(&p);
    struct kiln_nearcands c = {0};
    struct kiln_err err;
    t0 = now();
    parallel_candidates(fp, n, &p, r->jobs, &c, 0);
    double t_search = now() - t0;
    struct kiln_nearmatch *m = xalloc(c.n, sizeof *m);
    r->cands = &c;
    r->match = m;
    r->fps = fp;
    t0 = now();
    run_threads(r, verify_worker);
    double t_verify = now() - t0;

    uint32_t *exact = exact_units(r->it, n);
    uint32_t *spec = dense_ids(r->it, n, 0), *lab = dense_ids(r->it, n, 1);
    int32_t *label = xalloc(n, sizeof *label);
    for (size_t i = 0; i < n; i++)
        label[i] = no_labels ? -1 : (int32_t)lab[i];
    uint8_t *verdict = xalloc(c.n, 1);
    uint32_t *unit = xalloc(n, sizeof *unit);
    if (kiln_nearlink_decide(n, exact, label, &c, m, p.max_pictures, verdict, unit, &err))
        die("unit rule failed", err.msg);

    size_t src[8] = {0}, checked = 0, v[4] = {0}, wrong_checked = 0, wrong_linked = 0;
    for (size_t k = 0; k < c.n; k++) {
        for (int b = 0; b < 5; b++)
            src[b] += (c.c[k].sources >> b) & 1;
        checked += m[k].linked;
        v[verdict[k]]++;
        int same = spec[c.c[k].a] == spec[c.c[k].b];
        wrong_checked += m[k].linked && !same;
        wrong_linked += verdict[k] == KILN_NEARLINK_LINKED && !same;
    }
    printf("candidates: %zu (full hash %zu, centre hash %zu, turned %zu, coarse %zu, coarse centre "
           "%zu); passed the pixel check: %zu (%zu between different specimens)\n", c.n, src[0],
           src[1], src[2], src[3], src[4], checked, wrong_checked);
    printf("unit rule%s: linked %zu (%zu between different specimens), refused for labels %zu, "
           "refused for size %zu\n", no_labels ? " (labels ignored)" : "", v[1], wrong_linked, v[2], v[3]);
    printf("time: decode+fingerprint %.2f s, search %.3f s, pixel check %.3f s, on %d threads\n",
           t_load, t_search, t_verify, r->jobs);

    struct tally t;
    printf("\npair metrics (same unit vs same specimen):\n");
    pair_tally(r->it, n, unit, spec, NULL, &t);
    print_prf("all files", &t);
    static const char *const sets[] = {"main", "flat", "digits", "faces", "demo"};
    for (size_t s = 0; s < sizeof sets / sizeof *sets; s++) {
        size_t cnt = 0;
        for (size_t i = 0; i < n; i++)
            cnt += strcmp(r->it[i].set, sets[s]) == 0;
        if (!cnt)
            continue;
        pair_tally(r->it, n, unit, spec, sets[s], &t);
        print_prf(sets[s], &t);
    }
    if (!demo)
        per_transform(r->it, n, unit, spec);
    printf("\nunits mixing specimens:\n");
    size_t mixed = mixed_units(r->it, n, unit, spec, demo ? NULL : "main", 1);
    printf("  main set: %zu\n", mixed);
    if (!demo) {
        size_t mall = mixed_units(r->it, n, unit, spec, NULL, 0);
        printf("  whole benchmark: %zu\n", mall);
        size_t dl = 0;
        for (size_t k = 0; k < c.n; k++)
            dl += verdict[k] == KILN_NEARLINK_LINKED && strcmp(r->it[c.c[k].a].set, "digits") == 0 &&
                  strcmp(r->it[c.c[k].b].set, "digits") == 0;
        printf("digits: %zu links, %zu units with more than one class\n", dl,
               mixed_units(r->it, n, unit, lab, "digits", 1));
    } else {
        size_t across = 0, within = 0, refused = 0, identical = 0;
        for (size_t k = 0; k < c.n; k++) {
            if (!m[k].linked)
                continue;
            int same = spec[c.c[k].a] == spec[c.c[k].b];
            if (verdict[k] != KILN_NEARLINK_LINKED) {
                refused++;
                continue;
            }
            if (exact[c.c[k].a] == exact[c.c[k].b])
                identical++; /* the same file or pixels: merged by the exact rule anyway */
            else if (same)
                within++;
            else {
                across++;
                printf("    different tiles linked: %s %s\n", r->it[c.c[k].a].file, r->it[c.c[k].b].file);
            }
        }
        printf("demo: near links between different tiles %zu, between shots of one tile %zu, "
               "refused %zu; checked pairs that are identical files or pixels %zu\n", across,
               within, refused, identical);
    }

    if (dump) {
        FILE *f = fopen(dump, "w");
        if (!f)
            die("cannot write", dump);
        fprintf(f, "a,b,orientation,sources,distance,centre_distance,global,global_trim,local_trim,"
                   "warp,checked,verdict,same_specimen,set_a,set_b,transform_a,transform_b,local\n");
        for (size_t k = 0; k < c.n; k++) {
            const struct kiln_nearcand *x = &c.c[k];
            fprintf(f, "%s,%s,%u,%u,%u,%u,%.4f,%.4f,%.4f,%u,%u,%u,%d,%s,%s,%s,%s,%.4f\n", r->it[x->a].file,
                    r->it[x->b].file, x->orientation, x->sources, x->distance, x->centre_distance,
                    m[k].global / 1048576.0, m[k].global_trim / 1048576.0,
                    m[k].local_trim / 1048576.0, m[k].warp, m[k].linked, verdict[k],
                    spec[x->a] == spec[x->b], r->it[x->a].set, r->it[x->b].set,
                    r->it[x->a].transform, r->it[x->b].transform, m[k].local / 1048576.0);
        }
        fclose(f);
        char fpath[4200];
        snprintf(fpath, sizeof fpath, "%s.fp", dump);
        f = fopen(fpath, "w");
        if (f) {
            fprintf(f, "file,hash,centre,info,flags\n");
            for (size_t i = 0; i < n; i++)
                fprintf(f, "%s,%016llx,%016llx,%u,%u\n", r->it[i].file,
                        (unsigned long long)fp[i].hash, (unsigned long long)fp[i].centre,
                        fp[i].info, fp[i].flags);
            fclose(f);
        }
    }
    /* One digest of every fingerprint, candidate, check and unit: equal across compilers,
     * optimisation levels and thread counts, or the detector is not deterministic. */
    struct kiln_sha256 ctx;
    uint8_t dg[32];
    char hex[65];
    if (kiln_sha256_init(&ctx, &err) == 0) {
        for (size_t i = 0; i < n; i++)
            kiln_sha256_update(&ctx, &fp[i], sizeof fp[i]);
        for (size_t k = 0; k < c.n; k++) {
            kiln_sha256_update(&ctx, &c.c[k], sizeof c.c[k]);
            kiln_sha256_update(&ctx, &m[k], sizeof m[k]);
            kiln_sha256_update(&ctx, &verdict[k], 1);
        }
        kiln_sha256_update(&ctx, unit, n * sizeof *unit);
        int frc = kiln_sha256_final(&ctx, dg, &err);
        kiln_sha256_free(&ctx);
        if (frc)
            die("cannot digest the results", err.msg);
        kiln_sha256_hex(dg, hex);
        printf("\nresult digest %s\n", hex);
    }
    free(fp);
    free(m);
    free(exact);
    free(spec);
    free(lab);
    free(label);
    free(verdict);
    free(unit);
    kiln_nearcands_free(&c);
}

/* ---- the scale run (pictures from synth.h) ---------------------------------------------------------------------------- */

static void run_scale(size_t n, int jobs)
{
    struct kiln_nearfp *fp = xalloc(n, sizeof *fp);
    uint8_t px[SYN * SYN], cp[SYN * SYN];
    struct kiln_image img = {SYN, SYN, 1, 8, SYN, px, 0};
    struct kiln_err err;
    uint64_t s = 4242;
    double t0 = now();
    size_t planted = 0;
    for (size_t i = 0; i < n; i++) {
        planted += synth_scale_picture(i, &s, px, cp);
        if (kiln_nearfp_compute(&img, &fp[i], &err))
            die("fingerprint failed", err.msg);
    }
    double t_fp = now() - t0;
    struct kiln_nearlink_params p;
    kiln_nearlink_defaults(&p);
    apply_overrides(&p);
    struct kiln_nearcands c = {0};
    t0 = now();
    double c0 = cpu();
    parallel_candidates(fp, n, &p, jobs, &c, 1);
    double t_search = now() - t0, c_search = cpu() - c0;
    struct kiln_nearmatch *m = xalloc(c.n, sizeof *m);
    struct run r = {0};
    r.jobs = jobs;
    r.cands = &c;
    r.match = m;
    r.fps = fp;
    t0 = now();
    c0 = cpu();
    run_threads(&r, verify_worker);
    double t_verify = now() - t0, c_verify = cpu() - c0;
    size_t linked = 0, low = 0, src[5] = {0, 0, 0, 0, 0};
    for (size_t k = 0; k < c.n; k++) {
        linked += m[k].linked;
        for (int b = 0; b < 5; b++)
            src[b] += (c.c[k].sources >> b) & 1;
    }
    printf("candidates by search: full hash %zu, centre hash %zu, turned %zu, coarse %zu, coarse "
           "centre %zu\n", src[0], src[1], src[2], src[3], src[4]);
    for (size_t i = 0; i < n; i++)
        low += (fp[i].flags & KILN_NEARFP_LOWINFO) != 0;
    struct rusage ru;
    getrusage(RUSAGE_SELF, &ru);
    printf("%zu synthetic %dx%d pictures (%zu planted copies, %zu low-information): fingerprints "
           "%.1f s\n", n, SYN, SYN, planted, low, t_fp);
    printf("candidate search %.2f s: %zu candidates; pixel check %.2f s: %zu passed; %d threads\n",
           t_search, c.n, t_verify, linked, jobs);
    printf("search + check: %.2f s wall; CPU time: search %.2f s, check %.2f s (%.2f s in all); "
           "fingerprint %zu bytes each; peak RSS %ld MiB\n",
           t_search + t_verify, c_search, c_verify, c_search + c_verify,
           sizeof(struct kiln_nearfp), ru.ru_maxrss / 1024);
    free(fp);
    free(m);
    kiln_nearcands_free(&c);
}

int main(int argc, char **argv)
{
    struct run r;
    memset(&r, 0, sizeof r);
    r.jobs = 2;
    const char *dump = NULL, *set = NULL, *demo = NULL;
    size_t scale = 0;
    int no_labels = 0;
    for (int a = 1; a < argc; a++) {
        if (strcmp(argv[a], "--jobs") == 0 && a + 1 < argc)
            r.jobs = atoi(argv[++a]);
        else if (strcmp(argv[a], "--dump") == 0 && a + 1 < argc)
            dump = argv[++a];
        else if (strcmp(argv[a], "--demo") == 0 && a + 1 < argc)
            demo = argv[++a];
        else if (strcmp(argv[a], "--scale") == 0 && a + 1 < argc)
            scale = strtoull(argv[++a], NULL, 10);
        else if (strcmp(argv[a], "--no-labels") == 0)
            no_labels = 1;
        else if (strcmp(argv[a], "--param") == 0 && a + 1 < argc && noverrides < 16)
            overrides[noverrides++] = argv[++a];
        else if (argv[a][0] != '-' && !set)
            set = argv[a];
        else {
            fprintf(stderr, "usage: kiln-bench-nearmatch SET [--jobs N] [--no-labels] [--dump FILE]"
                            " [--param NAME=VALUE]...\n"
                            "       kiln-bench-nearmatch --demo DIR [--jobs N]\n"
                            "       kiln-bench-nearmatch --scale N [--jobs N]\n");
            return 2;
        }
    }
    if (r.jobs < 1 || r.jobs > 64)
        return 2;
    if (scale) {
        run_scale(scale, r.jobs);
        return 0;
    }
    if (demo) {
        r.root = demo;
        demo_collect = &r;
        if (nftw(demo, demo_add, 32, FTW_PHYS) != 0)
            die("cannot list", demo);
        qsort(r.it, r.n, sizeof *r.it, cmp_item_file);
        run_set(&r, no_labels, dump, 1);
        return 0;
    }
    if (!set) {
        fprintf(stderr, "kiln-bench-nearmatch: which set? (see --help)\n");
        return 2;
    }
    r.root = set;
    read_truth(&r);
    run_set(&r, no_labels, dump, 0);
    return 0;
}
