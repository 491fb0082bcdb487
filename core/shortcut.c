/* The shortcut check (docs/shortcuts.md): per attribute that is not the picture's content, a
 * value x class table per split, Cramér's V with Bergsma's bias correction on train, and the
 * majority-class-per-value rule learnt on train and scored on the held-out split. */
#include "shortcut.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"

static const char *const attr_names[KILN_ATTR_COUNT] = {
    "format", "stored size", "bit depth", "channels", "source", "orientation tag",
    "JPEG coding", "file-size band"};

const char *kiln_shortcut_attr_name(int attr)
{
    return attr >= 0 && attr < KILN_ATTR_COUNT ? attr_names[attr] : "?";
}

int kiln_assoc_compute(const uint64_t *table, size_t r, size_t k, struct kiln_assoc *out)
{
    memset(out, 0, sizeof *out);
    double n = 0;
    uint64_t n_int = 0, best_col = 0, sum_row_max = 0;
    /* Column totals: k is the number of classes, small; rows are streamed twice. */
    uint64_t *col = calloc(k ? k : 1, sizeof *col);
    if (!col)
        return KILN_ENOMEM;
    for (size_t i = 0; i < r; i++) {
        uint64_t row = 0, row_max = 0;
        for (size_t j = 0; j < k; j++) {
            const uint64_t c = table[i * k + j];
            row += c;
            col[j] += c;
            if (c > row_max)
                row_max = c;
        }
        out->rows += row > 0;
        n_int += row;
        sum_row_max += row_max;
    }
    for (size_t j = 0; j < k; j++) {
        out->cols += col[j] > 0;
        if (col[j] > best_col)
            best_col = col[j];
    }
    out->n = n_int;
    n = (double)n_int;
    if (out->rows < 2 || out->cols < 2 || n_int < 2) {
        free(col);
        return KILN_OK;
    }
    double chi2 = 0;
    for (size_t i = 0; i < r; i++) {
        double row = 0;
        for (size_t j = 0; j < k; j++)
            row += (double)table[i * k + j];
        if (row == 0)
            continue;
        for (size_t j = 0; j < k; j++) {
            if (col[j] == 0)
                continue;
            const double e = row * (double)col[j] / n, d = (double)table[i * k + j] - e;
            chi2 += d * d / e;
        }
    }
    free(col);
    const double rr = (double)out->rows, kk = (double)out->cols;
    out->chi2 = chi2;
    const double phi2 = chi2 / n;
    const double m = fmin(rr - 1, kk - 1);
    out->v = sqrt(phi2 / m);
    /* Bergsma (2013), eq. for phi~^2, r~ and k~. */
    const double phi2c = fmax(0.0, phi2 - (kk - 1) * (rr - 1) / (n - 1));
    const double rc = rr - (rr - 1) * (rr - 1) / (n - 1);
    const double kc = kk - (kk - 1) * (kk - 1) / (n - 1);
    const double mc = fmin(kc - 1, rc - 1);
    out->v_corrected = mc > 0 ? sqrt(phi2c / mc) : 0.0;
    if (out->v_corrected > 1)
        out->v_corrected = 1; /* rounding only: phi2c <= mc mathematically */
    out->lambda = n_int > best_col ? (double)(sum_row_max - best_col) / (double)(n_int - best_col)
                                   : 0.0;
    return KILN_OK;
}

/* ---- attribute values --------------------------------------------------------------------- */

static void size_band(uint64_t size, char *buf, size_t len)
{
    static const char *const unit[] = {"B", "KiB", "MiB", "GiB", "TiB", "PiB", "EiB"};
    unsigned b = 0;
    while (b < 63 && (size >> (b + 1)) != 0)
        b++;
    /* [2^b, 2^(b+1)) bytes, written in the largest binary unit that keeps whole numbers. */
    unsigned u = b / 10;
    if (u > 6)
        u = 6;
    const unsigned long long lo = 1ull << (b - 10 * u);
    if (size == 0)
        snprintf(buf, len, "0 B");
    else
        snprintf(buf, len, "%llu-%llu %s", lo, lo * 2, unit[u]);
}

bool kiln_shortcut_value(int attr, const struct kiln_item *it, char *buf, size_t len)
{
    static const char *const chans[] = {"?", "grey", "grey+alpha", "RGB", "RGBA"};
    switch (attr) {
    case KILN_ATTR_FORMAT: snprintf(buf, len, "%s", it->format[0] ? it->format : "?"); return true;
    case KILN_ATTR_STORED_SIZE: {
        /* The size as stored: orientations 5-8 swap the axes (CIPA DC-008). */
        const bool swap = it->orientation >= 5 && it->orientation <= 8;
        snprintf(buf, len, "%ux%u", swap ? it->height : it->width, swap ? it->width : it->height);
        return true;
    }
    case KILN_ATTR_DEPTH: snprintf(buf, len, "%u-bit", it->stored_depth); return true;
    case KILN_ATTR_CHANNELS:
        snprintf(buf, len, "%s", chans[it->channels <= 4 ? it->channels : 0]);
        return true;
    case KILN_ATTR_SOURCE: {
        /* The source as given, and for an archive member the archive, unless the archive lies
         * inside the folder its label names (class/batch.zip): that part of the place is how
         * the label was given, not a hint beside it. */
        if (!it->member[0]) {
            snprintf(buf, len, "%s", it->source);
            return true;
        }
        char norm[1024];
        kiln_name_normalise(it->path, norm, sizeof norm);
        const size_t ll = strlen(it->label);
        if (ll && strncmp(norm, it->label, ll) == 0 && norm[ll] == '/')
            snprintf(buf, len, "%s", it->source);
        else if (norm[0])
            snprintf(buf, len, "%s/%s", it->source, norm);
        else
            snprintf(buf, len, "%s", it->source);
        return true;
    }
    case KILN_ATTR_ORIENTATION: snprintf(buf, len, "%u", it->orientation); return true;
    case KILN_ATTR_JPEG_CODING: {
        if (strcmp(it->format, "jpeg") != 0)
            return false;
        /* The notes start with the coding, e.g. "progressive; arithmetic; CMYK". */
        const bool arith = strstr(it->notes, "arithmetic") != NULL;
        snprintf(buf, len, "%s%s",
                 strncmp(it->notes, "progressive", 11) == 0 ? "progressive" : "baseline",
                 arith ? ", arithmetic" : "");
        return true;
    }
    case KILN_ATTR_SIZE_BAND: size_band(it->size, buf, len); return true;
    default: return false;
    }
}

/* ---- interning ---------------------------------------------------------------------------- */

struct intern {
    const char **slot; /* open addressing; strings in the arena */
    uint32_t *id;
    size_t cap, n;
};

static uint64_t fnv1a(const char *s)
{
    uint64_t h = 1469598103934665603ull;
    for (; *s; s++)
        h = (h ^ (uint8_t)*s) * 1099511628211ull;
    return h;
}

static int intern_get(struct intern *t, struct kiln_arena *a, const char *s, uint32_t *out)
{
    if (2 * (t->n + 1) > t->cap) {
        const size_t cap = t->cap ? 2 * t->cap : 64;
        const char **slot = kiln_alloc_array(cap, sizeof *slot);
        uint32_t *id = kiln_alloc_array(cap, sizeof *id);
        if (!slot || !id) {
            free(slot);
            free(id);
            return KILN_ENOMEM;
        }
        memset(slot, 0, cap * sizeof *slot);
        for (size_t i = 0; i < t->cap; i++)
            if (t->slot[i]) {
                size_t h = (size_t)fnv1a(t->slot[i]) & (cap - 1);
                while (slot[h])
                    h = (h + 1) & (cap - 1);
                slot[h] = t->slot[i];
                id[h] = t->id[i];
            }
        free(t->slot);
        free(t->id);
        t->slot = slot;
        t->id = id;
        t->cap = cap;
    }
    size_t h = (size_t)fnv1a(s) & (t->cap - 1);
    while (t->slot[h]) {
        if (strcmp(t->slot[h], s) == 0) {
            *out = t->id[h];
            return KILN_OK;
        }
        h = (h + 1) & (t->cap - 1);
    }
    const char *copy = kiln_arena_strdup(a, s);
    if (!copy)
        return KILN_ENOMEM;
    t->slot[h] = copy;
    t->id[h] = (uint32_t)t->n;
    *out = (uint32_t)t->n++;
    return KILN_OK;
}

struct ranked {
    const char *s;
    uint32_t id;
};

static int cmp_ranked(const void *a, const void *b)
{
    return strcmp(((const struct ranked *)a)->s, ((const struct ranked *)b)->s);
}

/* Packed and labelled; a class index outside the class list (a catalogue whose classes were
 * not indexed, or a hand-edited one) is not counted rather than read out of bounds. */
static bool counted(const struct kiln_catalog *cat, const struct kiln_item *it)
{
    return it->status == KILN_ST_OK && it->split >= 0 && it->split < KILN_NSPLITS &&
           it->class_index >= 0 && (size_t)it->class_index < cat->nclasses;
}

/* Scores the per-value majority rule learnt on train against the baseline on split s. */
static void score_held(struct kiln_shortcut *sc, size_t nclasses, int32_t base, int s)
{
    sc->held_split = s;
    sc->held_n = sc->held_rule_hits = sc->held_base_hits = 0;
    for (size_t v = 0; v < sc->nvalues; v++) {
        const uint64_t *row = &sc->counts[((size_t)s * sc->nvalues + v) * nclasses];
        const int32_t guess = sc->majority[v] >= 0 ? sc->majority[v] : base;
        for (size_t c = 0; c < nclasses; c++)
            sc->held_n += row[c];
        sc->held_rule_hits += row[guess];
        sc->held_base_hits += row[base];
    }
    sc->held_lambda = sc->held_n > sc->held_base_hits
                          ? ((double)sc->held_rule_hits - (double)sc->held_base_hits) /
                                (double)(sc->held_n - sc->held_base_hits)
                          : 0.0;
}

static int run_attr(const struct kiln_catalog *cat, struct kiln_shortcuts *out, int attr,
                    uint32_t *ids, struct kiln_err *err)
{
    struct kiln_shortcut *sc = &out->attrs[attr];
    const size_t nc = out->nclasses;
    struct intern t = {0};
    char buf[1200];
    int rc = KILN_OK;
    for (size_t i = 0; i < cat->n && !rc; i++) {
        ids[i] = UINT32_MAX;
        if (counted(cat, &cat->items[i]) && kiln_shortcut_value(attr, &cat->items[i], buf, sizeof buf))
            rc = intern_get(&t, &out->strings, buf, &ids[i]);
    }
    uint32_t *rank = NULL;
    if (!rc) {
        sc->nvalues = t.n;
        sc->values = kiln_alloc_array(t.n ? t.n : 1, sizeof *sc->values);
        rank = kiln_alloc_array(t.n ? t.n : 1, sizeof *rank);
        size_t cells;
        if (!sc->values || !rank || !kiln_mul3_size(KILN_NSPLITS, t.n ? t.n : 1, nc ? nc : 1, &cells) ||
            !(sc->counts = kiln_alloc_array(cells, sizeof *sc->counts)) ||
            !(sc->majority = kiln_alloc_array(t.n ? t.n : 1, sizeof *sc->majority)))
            rc = KILN_ENOMEM;
        else
            memset(sc->counts, 0, cells * sizeof *sc->counts);
    }
    if (!rc) {
        for (size_t h = 0; h < t.cap; h++)
            if (t.slot[h])
                sc->values[t.id[h]] = t.slot[h];
        /* Byte-wise order, so reports never depend on the catalogue's order. */
        struct ranked *sorted = kiln_alloc_array(t.n ? t.n : 1, sizeof *sorted);
        if (!sorted) {
            rc = KILN_ENOMEM;
        } else {
            for (size_t v = 0; v < t.n; v++)
                sorted[v] = (struct ranked){sc->values[v], (uint32_t)v};
            qsort(sorted, t.n, sizeof *sorted, cmp_ranked);
            for (size_t v = 0; v < t.n; v++) {
                rank[sorted[v].id] = (uint32_t)v;
                sc->values[v] = sorted[v].s;
            }
            free(sorted);
        }
    }
    if (!rc) {
        for (size_t i = 0; i < cat->n; i++) {
            if (ids[i] == UINT32_MAX)
                continue;
            const struct kiln_item *it = &cat->items[i];
            sc->counts[((size_t)it->split * sc->nvalues + rank[ids[i]]) * nc +
                       (size_t)it->class_index]++;
        }
        const uint64_t *train = sc->counts; /* split 0 */
        rc = kiln_assoc_compute(train, sc->nvalues, nc, &sc->train);
    }
    if (!rc) {
        const uint64_t *train = sc->counts;
        for (size_t v = 0; v < sc->nvalues; v++) {
            uint64_t best = 0;
            sc->majority[v] = -1;
            for (size_t c = 0; c < nc; c++)
                if (train[v * nc + c] > best) {
                    best = train[v * nc + c];
                    sc->majority[v] = (int32_t)c;
                }
        }
        if (out->base_class >= 0) {
            score_held(sc, nc, out->base_class, KILN_SPLIT_TEST);
            if (sc->held_n < KILN_SHORTCUT_MIN_HELD)
                score_held(sc, nc, out->base_class, KILN_SPLIT_VAL);
            if (sc->held_n < KILN_SHORTCUT_MIN_HELD)
                score_held(sc, nc, out->base_class, KILN_SPLIT_TRAIN);
            if (sc->held_split == KILN_SPLIT_TRAIN)
                sc->held_split = -1;
        }
        sc->fires = out->base_class >= 0 && sc->train.n >= KILN_SHORTCUT_MIN_TRAIN &&
                    sc->train.v_corrected >= KILN_SHORTCUT_V &&
                    sc->held_lambda >= KILN_SHORTCUT_LAMBDA;
        out->fired += sc->fires;
    }
    if (rc)
        kiln_err_set(err, rc, "out of memory in the shortcut check");
    free(rank);
    free(t.slot);
    free(t.id);
    return rc;
}

int kiln_shortcuts_run(const struct kiln_catalog *cat, struct kiln_shortcuts *out,
                       struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    kiln_arena_init(&out->strings);
    out->nclasses = cat->nclasses;
    out->base_class = -1;
    for (int a = 0; a < KILN_ATTR_COUNT; a++) {
        out->attrs[a].attr = a;
        out->attrs[a].held_split = -1;
    }
    /* The baseline: the training split's majority class (ties: lower index). */
    uint64_t *per_class = kiln_alloc_array(cat->nclasses ? cat->nclasses : 1, sizeof *per_class);
    uint32_t *ids = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *ids);
    if (!per_class || !ids) {
        free(per_class);
        free(ids);
        return kiln_err_set(err, KILN_ENOMEM, "out of memory in the shortcut check");
    }
    memset(per_class, 0, (cat->nclasses ? cat->nclasses : 1) * sizeof *per_class);
    for (size_t i = 0; i < cat->n; i++)
        if (counted(cat, &cat->items[i]) && cat->items[i].split == KILN_SPLIT_TRAIN)
            per_class[cat->items[i].class_index]++;
    uint64_t best = 0;
    for (size_t c = 0; c < cat->nclasses; c++)
        if (per_class[c] > best) {
            best = per_class[c];
            out->base_class = (int32_t)c;
        }
    free(per_class);
    int rc = KILN_OK;
    for (int a = 0; a < KILN_ATTR_COUNT && !rc; a++)
        rc = run_attr(cat, out, a, ids, err);
    free(ids);
    if (rc)
        kiln_shortcuts_free(out);
    return rc;
}

void kiln_shortcuts_free(struct kiln_shortcuts *s)
{
    for (int a = 0; a < KILN_ATTR_COUNT; a++) {
        free(s->attrs[a].values);
        free(s->attrs[a].counts);
        free(s->attrs[a].majority);
        s->attrs[a].values = NULL;
        s->attrs[a].counts = NULL;
        s->attrs[a].majority = NULL;
    }
    kiln_arena_free(&s->strings);
}
