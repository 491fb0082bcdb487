/* Near-duplicate candidates, checks and the unit rule (nearlink.h). The searches are the exact
 * multi-index searches of neardup.c; everything after them is sorting and union-find, so the
 * result is a function of the fingerprints, labels and exact units alone. */
#include "nearlink.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "disjoint.h"
#include "neardup.h"

void kiln_nearlink_defaults(struct kiln_nearlink_params *p)
{
    p->radius_full = KILN_NEARLINK_RADIUS_FULL;
    p->radius_centre = KILN_NEARLINK_RADIUS_CENTRE;
    p->radius_turned = KILN_NEARLINK_RADIUS_TURNED;
    p->radius_coarse = KILN_NEARLINK_RADIUS_COARSE;
    p->coarse_confirm = KILN_NEARLINK_COARSE_CONFIRM;
    p->max_pictures = KILN_NEARLINK_MAX_PICTURES;
}

uint64_t kiln_nearlink_coarse(uint64_t hash)
{
    uint64_t out = 0;
    for (unsigned v = 0; v < 6; v++)
        for (unsigned u = 0; u < 6; u++)
            if (u || v)
                out |= (hash >> (64 - (8 * v + u)) & 1) << (64 - (6 * v + u));
    return out;
}

void kiln_nearcands_free(struct kiln_nearcands *c)
{
    free(c->c);
    c->c = NULL;
    c->n = c->cap = 0;
}

static int push(struct kiln_nearcands *out, uint32_t a, uint32_t b, unsigned o, unsigned src)
{
    void *p = out->c;
    if (!kiln_grow(&p, &out->cap, out->n + 1, sizeof *out->c))
        return KILN_ENOMEM;
    out->c = p;
    out->c[out->n++] = (struct kiln_nearcand){a, b, (uint8_t)o, (uint8_t)src, 0, 0};
    return KILN_OK;
}

static int cmp_cand(const void *x, const void *y)
{
    const struct kiln_nearcand *p = x, *q = y;
    if (p->a != q->a)
        return p->a < q->a ? -1 : 1;
    if (p->b != q->b)
        return p->b < q->b ? -1 : 1;
    return (p->orientation > q->orientation) - (p->orientation < q->orientation);
}

/* One search; found pairs become candidates in orientation 1 (records are items). */
static int search_plain(const uint64_t *h, const uint8_t *use, size_t n, unsigned nbits,
                        unsigned radius, const uint64_t *confirm, unsigned confirm_radius,
                        unsigned src, struct kiln_nearcands *out, struct kiln_err *err)
{
    struct kiln_pairs pairs = {NULL, 0, 0};
    struct kiln_neardup_query q = {.hash = h, .use = use, .filter = confirm,
                                   .filter_radius = confirm_radius, .n = n, .nbits = nbits,
                                   .radius = radius};
    int rc = kiln_neardup_search(&q, &pairs, err);
    for (size_t k = 0; k < pairs.n && !rc; k++)
        if (push(out, pairs.pair[k][0], pairs.pair[k][1], 1, src))
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot grow the near-duplicate candidate list");
    kiln_pairs_free(&pairs);
    return rc;
}

int kiln_nearlink_search(const struct kiln_nearkey *key, size_t n,
                         const struct kiln_nearlink_params *p, unsigned which,
                         struct kiln_nearcands *out, struct kiln_err *err)
{
    if (n >= (size_t)1 << 31)
        return kiln_err_set(err, KILN_EINVAL, "too many pictures for the near-duplicate search");
    if (which >= KILN_NEARLINK_SEARCHES)
        return kiln_err_set(err, KILN_EINVAL, "no near-duplicate search number %u", which);
    if (n < 2)
        return KILN_OK;
    const int turned = which >= 4;
    const size_t nrec = turned ? 2 * n : n;
    uint64_t *h = kiln_alloc_array(nrec, sizeof *h), *full = NULL;
    uint8_t *use = kiln_alloc_array(nrec, sizeof *use), *side = NULL;
    if (which == 2 || which == 3)
        full = kiln_alloc_array(n, sizeof *full);
    if (turned)
        side = kiln_alloc_array(nrec, 1);
    int rc = KILN_OK;
    if (!h || !use || ((which == 2 || which == 3) && !full) || (turned && !side)) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate the near-duplicate search");
        goto done;
    }
    for (size_t i = 0; i < nrec; i++)
        use[i] = !(key[i % n].flags & KILN_NEARFP_LOWINFO);
    switch (which) {
    case 0:
    case 1:
        for (size_t i = 0; i < n; i++)
            h[i] = which ? key[i].centre : key[i].hash;
        rc = search_plain(h, use, n, KILN_NEARFP_HASH_BITS,
                          which ? p->radius_centre : p->radius_full, NULL, 0,
                          which ? KILN_NEARCAND_CENTRE : KILN_NEARCAND_FULL, out, err);
        break;
    case 2:
    case 3:
        for (size_t i = 0; i < n; i++) {
            full[i] = key[i].hash;
            h[i] = kiln_nearlink_coarse(which == 3 ? key[i].centre : key[i].hash);
        }
        rc = search_plain(h, use, n, 35, p->radius_coarse, full, p->coarse_confirm,
                          which == 3 ? KILN_NEARCAND_COARSE_CENTRE : KILN_NEARCAND_COARSE, out,
                          err);
        break;
    default: {
        /* Turned, o = which - 2: item i's own hash (records 0..n-1) against item j's hash as
         * displayed under o (records n..2n-1). "i ~ j under o" is the same relation as "j ~ i
         * under o's inverse", found in that orientation's search, so only i < j is kept. */
        const unsigned o = which - 2;
        for (size_t i = 0; i < n; i++) {
            h[i] = key[i].hash;
            h[n + i] = kiln_nearfp_orient_hash(key[i].hash, o);
            side[i] = 0;
            side[n + i] = 1;
        }
        struct kiln_pairs pairs = {NULL, 0, 0};
        struct kiln_neardup_query q = {.hash = h, .use = use, .side = side, .n = nrec,
                                       .nbits = KILN_NEARFP_HASH_BITS,
                                       .radius = p->radius_turned};
        rc = kiln_neardup_search(&q, &pairs, err);
        for (size_t k = 0; k < pairs.n && !rc; k++) {
            uint32_t i = pairs.pair[k][0], j = (uint32_t)(pairs.pair[k][1] - n);
            if (i < j && push(out, i, j, o, KILN_NEARCAND_TURNED))
                rc = kiln_err_set(err, KILN_ENOMEM, "cannot grow the near-duplicate candidate list");
        }
        kiln_pairs_free(&pairs);
    }
    }
done:
    free(h);
    free(full);
    free(use);
    free(side);
    return rc;
}

int kiln_nearlink_merge(const struct kiln_nearkey *key, struct kiln_nearcands *parts,
                        size_t nparts, struct kiln_nearcands *out, struct kiln_err *err)
{
    out->n = 0;
    size_t total = 0;
    for (size_t k = 0; k < nparts; k++)
        if (!kiln_add_size(total, parts[k].n, &total))
            return kiln_err_set(err, KILN_ENOMEM, "too many near-duplicate candidates");
    void *buf = out->c;
    if (!kiln_grow(&buf, &out->cap, total, sizeof *out->c))
        return kiln_err_set(err, KILN_ENOMEM, "cannot hold %zu near-duplicate candidates", total);
    out->c = buf;
    for (size_t k = 0; k < nparts; k++) {
        if (parts[k].n)
            memcpy(out->c + out->n, parts[k].c, parts[k].n * sizeof *out->c);
        out->n += parts[k].n;
    }
    if (out->n == 0)
        return KILN_OK;
    qsort(out->c, out->n, sizeof *out->c, cmp_cand);
    size_t m = 0;
    for (size_t k = 0; k < out->n; k++) {
        if (m && cmp_cand(&out->c[m - 1], &out->c[k]) == 0) {
            out->c[m - 1].sources |= out->c[k].sources;
            continue;
        }
        out->c[m++] = out->c[k];
    }
    out->n = m;
    for (size_t k = 0; k < m; k++) {
        struct kiln_nearcand *c = &out->c[k];
        unsigned o = c->orientation;
        uint64_t hb = kiln_nearfp_orient_hash(key[c->b].hash, o),
                 cb = kiln_nearfp_orient_hash(key[c->b].centre, o);
        c->distance = (uint8_t)__builtin_popcountll(key[c->a].hash ^ hb);
        c->centre_distance = (uint8_t)__builtin_popcountll(key[c->a].centre ^ cb);
    }
    return KILN_OK;
}

int kiln_nearlink_candidates(const struct kiln_nearkey *key, size_t n,
                             const struct kiln_nearlink_params *p, struct kiln_nearcands *out,
                             struct kiln_err *err)
{
    out->n = 0;
    struct kiln_nearcands parts[KILN_NEARLINK_SEARCHES];
    memset(parts, 0, sizeof parts);
    int rc = KILN_OK;
    for (unsigned w = 0; w < KILN_NEARLINK_SEARCHES && !rc; w++)
        rc = kiln_nearlink_search(key, n, p, w, &parts[w], err);
    if (!rc)
        rc = kiln_nearlink_merge(key, parts, KILN_NEARLINK_SEARCHES, out, err);
    for (unsigned w = 0; w < KILN_NEARLINK_SEARCHES; w++)
        kiln_nearcands_free(&parts[w]);
    if (rc)
        out->n = 0;
    return rc;
}

void kiln_nearlink_check(const struct kiln_nearfp *a, const struct kiln_nearfp *b,
                         const struct kiln_nearcand *c, struct kiln_nearmatch *out)
{
    /* Coarse-only candidates (crops, slight turns) must already agree broadly as they are. */
    const unsigned fine = KILN_NEARCAND_FULL | KILN_NEARCAND_CENTRE | KILN_NEARCAND_TURNED;
    kiln_nearfp_verify(a, b, c->orientation, c->sources & fine ? 0 : KILN_NEARFP_MIN_SEARCH, out);
}

void kiln_nearlink_verify(const struct kiln_nearfp *fp, const struct kiln_nearcands *c,
                          size_t from, size_t to, struct kiln_nearmatch *match)
{
    for (size_t k = from; k < to && k < c->n; k++)
        kiln_nearlink_check(&fp[c->c[k].a], &fp[c->c[k].b], &c->c[k], &match[k]);
}

const char *kiln_nearlink_verdict_name(int v)
{
    static const char *const names[] = {"no match", "linked", "refused: different labels",
                                        "refused: too many pictures"};
    return v >= 0 && v <= KILN_NEARLINK_REFUSED_SIZE ? names[v] : "unknown";
}

/* Evidence order for the unit rule: stronger links are taken first. */
struct ranked {
    const struct kiln_nearcand *c;
    const struct kiln_nearmatch *m;
    size_t k;
    uint64_t tie[2]; /* the last keys of the order */
};

static int cmp_ranked(const void *x, const void *y)
{
    const struct ranked *p = x, *q = y;
    int32_t gp = kiln_nearmatch_global(p->m), gq = kiln_nearmatch_global(q->m),
            lp = kiln_nearmatch_local(p->m), lq = kiln_nearmatch_local(q->m);
    if (gp != gq)
        return gp > gq ? -1 : 1;
    if (lp != lq)
        return lp > lq ? -1 : 1;
    if (p->c->distance != q->c->distance)
        return p->c->distance < q->c->distance ? -1 : 1;
    /* Then (a, b, orientation) for the candidates of kiln_nearlink_decide; the order they were
     * given in (the items' content order) for the pipeline's links. */
    if (p->tie[0] != q->tie[0])
        return p->tie[0] < q->tie[0] ? -1 : 1;
    return (p->tie[1] > q->tie[1]) - (p->tie[1] < q->tie[1]);
}

#define LABEL_NONE (-1)
#define LABEL_MIXED (-2)

/* The label set of a union, or LABEL_MIXED + conflict when two different labels would meet. */
static int join_labels(int64_t x, int64_t y, int64_t *out)
{
    if (x == LABEL_NONE) {
        *out = y;
        return 0;
    }
    if (y == LABEL_NONE || (x == y && x != LABEL_MIXED)) {
        *out = x;
        return 0;
    }
    return 1; /* two labels, or a label and an already mixed unit */
}

/* The rule over links already ranked (r[0..nr-1], strongest first); verdict[r[t].k] is set. */
static int decide_ranked(size_t n, const uint32_t *exact, const int32_t *label, struct ranked *r,
                         size_t nr, unsigned max_pictures, uint8_t *verdict, uint32_t *unit,
                         struct kiln_err *err)
{
    if (n >= UINT32_MAX)
        return kiln_err_set(err, KILN_EINVAL, "too many items for the unit rule");
    for (size_t i = 0; i < n; i++)
        if (exact[i] >= n)
            return kiln_err_set(err, KILN_EINVAL, "exact unit %u of item %zu is out of range",
                                exact[i], i);
    for (size_t t = 0; t < nr; t++)
        if (r[t].c->a >= n || r[t].c->b >= n)
            return kiln_err_set(err, KILN_EINVAL, "near-duplicate link %zu is out of range",
                                r[t].k);
    struct kiln_uf uf = {kiln_alloc_array(n ? n : 1, sizeof(uint32_t))};
    uint32_t *first = kiln_alloc_array(n ? n : 1, sizeof *first);
    uint32_t *pictures = kiln_alloc_array(n ? n : 1, sizeof *pictures);
    int64_t *labels = kiln_alloc_array(n ? n : 1, sizeof *labels);
    int rc = KILN_OK;
    if (!uf.parent || !first || !labels || !pictures) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate the unit rule for %zu items", n);
        goto done;
    }
    for (size_t i = 0; i < n; i++) {
        uf.parent[i] = (uint32_t)i;
        first[i] = UINT32_MAX;
    }
    for (size_t i = 0; i < n; i++) {
        if (first[exact[i]] == UINT32_MAX)
            first[exact[i]] = (uint32_t)i;
        else
            kiln_uf_union(&uf, first[exact[i]], (uint32_t)i);
    }
    /* Per root: one picture (exact unit), and the labels its items carry. */
    for (size_t i = 0; i < n; i++) {
        pictures[i] = 0;
        labels[i] = LABEL_NONE;
    }
    for (size_t i = 0; i < n; i++) {
        uint32_t root = kiln_uf_find(&uf, (uint32_t)i);
        pictures[root] = 1;
        int64_t l = label[i] < 0 ? LABEL_NONE : label[i], j;
        if (join_labels(labels[root], l, &j))
            j = LABEL_MIXED;
        labels[root] = j;
    }
    qsort(r, nr, sizeof *r, cmp_ranked);
    for (size_t t = 0; t < nr; t++) {
        uint32_t x = kiln_uf_find(&uf, r[t].c->a), y = kiln_uf_find(&uf, r[t].c->b);
        int64_t joined;
        if (x == y) {
            verdict[r[t].k] = KILN_NEARLINK_LINKED;
        } else if (join_labels(labels[x], labels[y], &joined)) {
            verdict[r[t].k] = KILN_NEARLINK_REFUSED_LABEL;
        } else if (pictures[x] + pictures[y] > max_pictures) {
            verdict[r[t].k] = KILN_NEARLINK_REFUSED_SIZE;
        } else {
            uint32_t sum = pictures[x] + pictures[y];
            kiln_uf_union(&uf, x, y);
            uint32_t root = kiln_uf_find(&uf, x);
            pictures[root] = sum;
            labels[root] = joined;
            verdict[r[t].k] = KILN_NEARLINK_LINKED;
        }
    }
    for (size_t i = 0; unit && i < n; i++)
        unit[i] = kiln_uf_find(&uf, (uint32_t)i);
done:
    free(uf.parent);
    free(first);
    free(labels);
    free(pictures);
    return rc;
}

int kiln_nearlink_decide(size_t n, const uint32_t *exact, const int32_t *label,
                         const struct kiln_nearcands *c, const struct kiln_nearmatch *match,
                         unsigned max_pictures, uint8_t *verdict, uint32_t *unit,
                         struct kiln_err *err)
{
    for (size_t k = 0; k < c->n; k++)
        if (c->c[k].a >= n || c->c[k].b >= n)
            return kiln_err_set(err, KILN_EINVAL, "near-duplicate candidate %zu is out of range", k);
    struct ranked *r = kiln_alloc_array(c->n ? c->n : 1, sizeof *r);
    if (!r)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate the unit rule for %zu items", n);
    size_t nr = 0;
    for (size_t k = 0; k < c->n; k++) {
        verdict[k] = KILN_NEARLINK_UNCHECKED;
        if (match[k].linked)
            r[nr++] = (struct ranked){&c->c[k], &match[k], k,
                                      {c->c[k].a, (uint64_t)c->c[k].b << 4 | c->c[k].orientation}};
    }
    int rc = decide_ranked(n, exact, label, r, nr, max_pictures, verdict, unit, err);
    free(r);
    return rc;
}

void kiln_nearlinks_free(struct kiln_nearlinks *l)
{
    free(l->link);
    l->link = NULL;
    l->n = l->cap = 0;
}

int kiln_nearlink_decide_links(size_t n, const uint32_t *exact, const int32_t *label,
                               struct kiln_nearlinks *l, uint32_t *unit, struct kiln_err *err)
{
    struct ranked *r = kiln_alloc_array(l->n ? l->n : 1, sizeof *r);
    uint8_t *verdict = kiln_alloc_array(l->n ? l->n : 1, 1);
    int rc = KILN_OK;
    if (!r || !verdict)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate the unit rule for %zu links", l->n);
    for (size_t k = 0; !rc && k < l->n; k++)
        r[k] = (struct ranked){&l->link[k].c, &l->link[k].m, k, {k, 0}};
    if (!rc)
        rc = decide_ranked(n, exact, label, r, l->n, l->params.max_pictures, verdict, unit, err);
    memset(l->per_verdict, 0, sizeof l->per_verdict);
    for (size_t k = 0; !rc && k < l->n; k++) {
        l->link[k].verdict = verdict[k];
        l->per_verdict[verdict[k]]++;
    }
    free(r);
    free(verdict);
    return rc;
}
