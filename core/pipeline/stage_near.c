/* Near-duplicate stage: keys from the store, searches and pixel checks on threads, unit rule.
 * Memory stays near 24 bytes per picture for the search (the keys) plus the searches' own
 * working space and 12 bytes per candidate; the 312-byte fingerprints stay in the store. */
#include "stage_near.h"

#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/fpstore.h"
#include "../checked.h"
#include "../units.h"

int kiln_near_attach_store(struct kiln_catalog *cat, const char *dir, struct kiln_err *err)
{
    if (cat->fps)
        return KILN_OK;
    int rc = kiln_fpstore_open(&cat->fps, dir, err);
    if (!rc)
        cat->fps_close = kiln_fpstore_close;
    return rc;
}

int kiln_near_attach_store_beside(struct kiln_catalog *cat, const char *file,
                                  struct kiln_err *err)
{
    const char *slash = strrchr(file, '/');
    if (!slash)
        return kiln_near_attach_store(cat, ".", err);
    size_t n = slash == file ? 1 : (size_t)(slash - file);
    char *dir = malloc(n + 1);
    if (!dir)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    memcpy(dir, file, n);
    dir[n] = '\0';
    int rc = kiln_near_attach_store(cat, dir, err);
    free(dir);
    return rc;
}

/* Shared state of the worker threads; the first failure wins and stops the others. */
struct near_run {
    const struct kiln_catalog *cat;
    const struct kiln_nearlink_params *p;
    const struct kiln_nearkey *key;
    const uint32_t *item; /* catalogue row of each participant */
    size_t m;             /* participants */
    struct kiln_nearcands parts[KILN_NEARLINK_SEARCHES];
    const struct kiln_nearcands *cands;
    atomic_size_t next;   /* next search, or next chunk of candidates */
    atomic_bool failed;
    pthread_mutex_t mu;   /* guards err and the merged links */
    struct kiln_err err;
    struct kiln_nearlinks *out;
};

static void fail(struct near_run *r, const struct kiln_err *e)
{
    pthread_mutex_lock(&r->mu);
    if (!atomic_load(&r->failed))
        r->err = *e;
    atomic_store(&r->failed, true);
    pthread_mutex_unlock(&r->mu);
}

/* Runs fn on jobs threads (the calling thread counts as one). */
static int run_threads(struct near_run *r, unsigned jobs, void *(*fn)(void *), struct kiln_err *err)
{
    pthread_t tid[64];
    unsigned started = 0;
    if (jobs > 64)
        jobs = 64;
    for (; started + 1 < jobs; started++)
        if (pthread_create(&tid[started], NULL, fn, r) != 0)
            break;
    fn(r);
    for (unsigned i = 0; i < started; i++)
        pthread_join(tid[i], NULL);
    if (atomic_load(&r->failed)) {
        *err = r->err;
        return err->code ? err->code : KILN_EINTERNAL;
    }
    return KILN_OK;
}

static void shrink(struct kiln_nearcands *c)
{
    if (c->n && c->n < c->cap) {
        void *p = realloc(c->c, c->n * sizeof *c->c);
        if (p) {
            c->c = p;
            c->cap = c->n;
        }
    }
}

/* The searches, largest first so the last one to start is short (turned searches join two
 * copies of every hash; the coarse ones find the most pairs). */
static const unsigned search_order[KILN_NEARLINK_SEARCHES] = {2, 3, 4, 5, 6, 7, 8, 9, 10, 0, 1};

static void *search_main(void *arg)
{
    struct near_run *r = arg;
    for (;;) {
        size_t k = atomic_fetch_add(&r->next, 1);
        if (k >= KILN_NEARLINK_SEARCHES || atomic_load(&r->failed))
            return NULL;
        const unsigned w = search_order[k];
        struct kiln_err e;
        kiln_err_clear(&e);
        if (kiln_nearlink_search(r->key, r->m, r->p, w, &r->parts[w], &e))
            fail(r, &e);
        shrink(&r->parts[w]); /* the parts wait for one another: no growth slack */
    }
}

#define CHUNK 4096 /* candidates a worker checks at a time */

static int cmp_link(const void *x, const void *y)
{
    const struct kiln_nearcand *p = &((const struct kiln_nearlink *)x)->c,
                               *q = &((const struct kiln_nearlink *)y)->c;
    if (p->a != q->a)
        return p->a < q->a ? -1 : 1;
    if (p->b != q->b)
        return p->b < q->b ? -1 : 1;
    return (p->orientation > q->orientation) - (p->orientation < q->orientation);
}

/* Adds a worker's links to the result under the lock; false when memory ran out. */
static bool flush(struct near_run *r, const struct kiln_nearlink *found, size_t n)
{
    pthread_mutex_lock(&r->mu);
    void *p = r->out->link;
    bool ok = kiln_grow(&p, &r->out->cap, r->out->n + n, sizeof *r->out->link);
    if (ok) {
        r->out->link = p;
        memcpy(r->out->link + r->out->n, found, n * sizeof *found);
        r->out->n += n;
    }
    pthread_mutex_unlock(&r->mu);
    return ok;
}

/* Checks chunks of candidates; the links that pass are added to r->out (sorted afterwards, so
 * the order in which chunks finish does not matter). Candidates are sorted by a, so a's
 * fingerprint is read once per run of equal a. */
static void *check_main(void *arg)
{
    struct near_run *r = arg;
    struct kiln_nearfp fa, fb;
    uint32_t have_a = UINT32_MAX;
    struct kiln_nearlink found[64];
    size_t nfound = 0;
    struct kiln_err e;
    kiln_err_clear(&e);
    for (;;) {
        size_t from = atomic_fetch_add(&r->next, CHUNK);
        if (from >= r->cands->n || atomic_load(&r->failed))
            break;
        size_t to = from + CHUNK < r->cands->n ? from + CHUNK : r->cands->n;
        for (size_t k = from; k < to; k++) {
            struct kiln_nearcand c = r->cands->c[k];
            const uint32_t ia = r->item[c.a], ib = r->item[c.b];
            if (c.a != have_a) {
                if (kiln_fpstore_get(r->cat->fps, r->cat->items[ia].fp_slot, &fa, &e))
                    goto failed;
                have_a = c.a;
            }
            if (kiln_fpstore_get(r->cat->fps, r->cat->items[ib].fp_slot, &fb, &e))
                goto failed;
            struct kiln_nearlink l = {.c = c, .verdict = KILN_NEARLINK_UNCHECKED};
            kiln_nearlink_check(&fa, &fb, &c, &l.m);
            if (!l.m.linked)
                continue;
            found[nfound++] = l; /* participant indices until the links are sorted */
            if (nfound == sizeof found / sizeof found[0]) {
                if (!flush(r, found, nfound))
                    goto oom;
                nfound = 0;
            }
        }
    }
    if (nfound && !flush(r, found, nfound))
        goto oom;
    return NULL;
oom:
    kiln_err_set(&e, KILN_ENOMEM, "cannot hold the near-duplicate links");
failed:
    fail(r, &e);
    return NULL;
}

static int cmp_by_content(const void *x, const void *y, void *ctx)
{
    const struct kiln_catalog *cat = ctx;
    const uint32_t i = *(const uint32_t *)x, j = *(const uint32_t *)y;
    int c = memcmp(cat->items[i].sha256, cat->items[j].sha256, KILN_SHA256_LEN);
    return c ? c : (i > j) - (i < j);
}

/* The participants (ok items with a fingerprint) in the order of their file SHA-256, so that
 * which item of a pair is "a" never depends on the row order (ties are identical files, whose
 * fingerprints are identical too); their keys read from the store in slot order. */
static int gather_keys(struct near_run *r, struct kiln_nearlinks *out, struct kiln_err *err)
{
    const struct kiln_catalog *cat = r->cat;
    size_t m = 0;
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status != KILN_ST_OK || it->fp_slot == KILN_FP_NONE)
            continue;
        if (it->fp_slot == KILN_FP_SKIPPED || !cat->fps)
            return kiln_err_set(err, KILN_EINTERNAL,
                                "the catalogue was read without its near-duplicate fingerprints");
        m++;
    }
    if (m == 0)
        return KILN_OK;
    const uint32_t nslots = kiln_fpstore_count(cat->fps);
    uint32_t *owner = kiln_alloc_array(nslots ? nslots : 1, sizeof *owner);
    uint32_t *item = kiln_alloc_array(m, sizeof *item);
    struct kiln_nearkey *key = kiln_alloc_array(m, sizeof *key);
    enum { BATCH = 4096 };
    uint8_t *buf = kiln_alloc_array(BATCH, KILN_NEARFP_BYTES);
    int rc = KILN_OK;
    if (!owner || !item || !key || !buf) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate the near-duplicate keys of %zu "
                          "pictures", m);
        goto done;
    }
    for (uint32_t s = 0; s < nslots; s++)
        owner[s] = UINT32_MAX;
    m = 0;
    for (size_t i = 0; i < cat->n && !rc; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status != KILN_ST_OK || it->fp_slot == KILN_FP_NONE)
            continue;
        if (it->fp_slot >= nslots || owner[it->fp_slot] != UINT32_MAX)
            rc = kiln_err_set(err, KILN_EINTERNAL, "fingerprint slot %u is out of range or "
                              "shared", it->fp_slot);
        else
            owner[it->fp_slot] = 0; /* taken; numbered below */
        item[m++] = (uint32_t)i;
    }
    if (!rc && m > 1)
        qsort_r(item, m, sizeof *item, cmp_by_content, (void *)cat);
    for (size_t k = 0; k < m && !rc; k++)
        owner[cat->items[item[k]].fp_slot] = (uint32_t)k;
    for (uint32_t s = 0; s < nslots && !rc; s += BATCH) {
        const uint32_t n = nslots - s < BATCH ? nslots - s : BATCH;
        rc = kiln_fpstore_read(cat->fps, s, n, buf, err);
        for (uint32_t k = 0; k < n && !rc; k++) {
            const uint32_t who = owner[s + k];
            struct kiln_nearfp fp;
            if (who == UINT32_MAX)
                continue;
            if (kiln_nearfp_decode(buf + (size_t)k * KILN_NEARFP_BYTES, &fp))
                rc = kiln_err_set(err, KILN_EIO, "fingerprint slot %u of the scratch file is "
                                  "damaged", s + k);
            key[who] = kiln_nearkey_of(&fp);
            out->pictures++;
            out->lowinfo += (fp.flags & KILN_NEARFP_LOWINFO) != 0;
        }
    }
done:
    free(owner);
    free(buf);
    if (rc) {
        free(item);
        free(key);
        return rc;
    }
    r->item = item;
    r->key = key;
    r->m = m;
    return KILN_OK;
}

/* Exact units and labels of every catalogue row, then the rule over the links. */
static int decide(const struct kiln_catalog *cat, struct kiln_nearlinks *out, struct kiln_err *err)
{
    uint32_t *exact = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *exact);
    int32_t *label = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *label);
    int rc = exact && label ? kiln_units_exact(cat, exact, err)
                            : kiln_err_set(err, KILN_ENOMEM, "cannot allocate the unit rule");
    for (size_t i = 0; !rc && i < cat->n; i++)
        label[i] = cat->items[i].status == KILN_ST_OK ? cat->items[i].class_index : -1;
    if (!rc)
        rc = kiln_nearlink_decide_links(cat->n, exact, label, out, NULL, err);
    free(exact);
    free(label);
    return rc;
}

int kiln_stage_near(const struct kiln_catalog *cat, const struct kiln_nearlink_params *p,
                    unsigned jobs, struct kiln_nearlinks *out, struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    out->params = *p;
    if (cat->n >= (size_t)1 << 31)
        return kiln_err_set(err, KILN_ETOOLARGE, "too many items for the near-duplicate search");
    struct near_run r;
    memset(&r, 0, sizeof r);
    r.cat = cat;
    r.p = p;
    r.out = out;
    atomic_init(&r.next, 0);
    atomic_init(&r.failed, false);
    int rc = pthread_mutex_init(&r.mu, NULL);
    if (rc)
        return kiln_err_sys(err, KILN_ENOMEM, rc, "cannot create a lock for the near-duplicate "
                            "search");

    struct kiln_nearcands cands = {NULL, 0, 0};
    rc = gather_keys(&r, out, err);
    if (!rc && r.m >= 2)
        rc = run_threads(&r, jobs ? jobs : 1, search_main, err);
    if (!rc)
        rc = kiln_nearlink_merge(r.key, r.parts, KILN_NEARLINK_SEARCHES, &cands, err);
    for (unsigned w = 0; w < KILN_NEARLINK_SEARCHES; w++)
        kiln_nearcands_free(&r.parts[w]);
    shrink(&cands); /* merged from every search's list: duplicates removed */
    free((void *)r.key);
    r.key = NULL;
    out->candidates = cands.n;
    if (!rc && cands.n) {
        r.cands = &cands;
        atomic_store(&r.next, 0);
        rc = run_threads(&r, jobs ? jobs : 1, check_main, err);
    }
    kiln_nearcands_free(&cands);
    if (!rc && out->n > 1)
        qsort(out->link, out->n, sizeof *out->link, cmp_link);
    for (size_t k = 0; !rc && k < out->n; k++) {
        out->link[k].c.a = r.item[out->link[k].c.a];
        out->link[k].c.b = r.item[out->link[k].c.b];
    }
    free((void *)r.item);
    if (!rc)
        rc = decide(cat, out, err);
    pthread_mutex_destroy(&r.mu);
    if (rc)
        kiln_nearlinks_free(out);
    return rc;
}
