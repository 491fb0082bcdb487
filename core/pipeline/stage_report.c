/* kiln report: load the folder's records, verify, count, sample thumbnails, find the pictures of
 * the audit's findings, group the rows not packed, then write the HTML in one go. */
#include "stage_report.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/items_csv.h"
#include "../../formats/files/kten_view.h"
#include "../../formats/files/manifest.h"
#include "../../formats/files/png_write.h"
#include "../../formats/files/report_html.h"
#include "../checked.h"
#include "../shortcut.h"
#include "stage_verify.h"

/* Everything the run holds; freed by run_free. */
struct run {
    const char *outdir;
    json_t *manifest;
    struct kiln_catalog cat;
    struct kiln_items_table items;
    struct kiln_shortcuts sc;
    bool have_sc;
    struct kiln_kten_view view[KILN_NSPLITS];
    bool open[KILN_NSPLITS];
    uint32_t *by_name; /* items rows with a split, sorted by (name, split), nby of them */
    size_t nby;
    uint8_t *rec;      /* one record, 8-bit interleaved */
    struct kiln_report html;
    struct kiln_arena strings; /* thumbnail names and notes */
};

static char *path_in(const char *dir, const char *name)
{
    size_t n = strlen(dir) + strlen(name) + 2;
    char *p = malloc(n);
    if (p)
        snprintf(p, n, "%s/%s", dir, name);
    return p;
}

/* The relative name an items.csv row goes by in the manifest's findings: path, member or
 * path/member, all in recorded form. */
static const char *row_name(struct run *r, const struct kiln_items_row *row)
{
    char buf[8192];
    kiln_catalog_relname(row->path, row->member, buf, sizeof buf);
    const char *s = kiln_arena_strdup(&r->strings, buf);
    return s ? s : "?";
}

static int load_file(struct run *r, const char *name, int which, struct kiln_err *err)
{
    char *path = path_in(r->outdir, name);
    if (!path)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    bool has_split;
    int rc = which == 0   ? kiln_manifest_load(path, &r->manifest, err)
             : which == 1 ? kiln_catalog_csv_load(path, &r->cat, &has_split, err)
                          : kiln_items_csv_load(path, &r->items, err);
    free(path);
    return rc;
}

/* manifest.json, catalog.csv, items.csv and the class names. */
static int load(struct run *r, struct kiln_err *err)
{
    int rc = load_file(r, KILN_FILE_MANIFEST, 0, err);
    if (!rc)
        rc = load_file(r, KILN_FILE_CATALOG, 1, err);
    if (!rc)
        rc = kiln_catalog_index_classes(&r->cat, err);
    if (!rc)
        rc = load_file(r, KILN_FILE_ITEMS, 2, err);
    const json_t *classes = json_object_get(r->manifest, "classes");
    if (!rc && !json_is_array(classes))
        rc = kiln_err_set(err, KILN_EINVAL, "%s/%s has no class list", r->outdir,
                          KILN_FILE_MANIFEST);
    if (rc)
        return rc;
    r->html.nclasses = json_array_size(classes);
    r->html.classes = kiln_alloc_array(r->html.nclasses + 1, sizeof *r->html.classes);
    if (!r->html.classes)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t c = 0; c < r->html.nclasses; c++) {
        const char *s = json_string_value(json_array_get(classes, c));
        r->html.classes[c] = s ? s : "?";
    }
    return KILN_OK;
}

static void on_problem(void *ctx, int kind, const char *msg)
{
    struct kiln_report_verify *v = ctx;
    static const char *const words[] = {"", "damaged", "missing", "source missing",
                                        "source changed", "source moved", "extra"};
    if (kind == KILN_ISSUE_SOURCE_EXTRA || v->nmessages >= KILN_REPORT_PROBLEMS)
        return; /* extra source files are not the output's business */
    const size_t n = strlen(msg) + 32;
    char *copy = malloc(n);
    if (copy) {
        snprintf(copy, n, "%s: %s", kind >= 1 && kind <= 6 ? words[kind] : "?", msg);
        v->message[v->nmessages++] = copy;
    }
}

/* With sources: every recorded source file looked for by content. */
static void verify_sources(struct run *r, const struct kiln_report_opts *o,
                           struct kiln_verify_report *rep)
{
    struct kiln_report_verify *v = &r->html.verify;
    struct kiln_err e;
    kiln_err_clear(&e);
    v->sources_given = true;
    int rc = kiln_stage_verify_sources(r->outdir, o->sources, o->nsources, o->path_key,
                                       o->path_key_len, on_problem, v, rep, &e);
    v->sources_ran = rc == KILN_OK || rc == KILN_EMISMATCH;
    if (!v->sources_ran)
        snprintf(v->sources_error, sizeof v->sources_error, "%s", e.msg);
    v->sources_checked = rep->sources_checked;
    v->sources_missing = rep->sources_missing;
    v->sources_changed = rep->sources_changed;
    v->sources_moved = rep->sources_moved;
    v->sources_extra = rep->sources_extra;
    v->places_unknown = rep->places_unknown;
}

/* verify's verdict on the folder; a folder that cannot be verified is shown as such. */
static int verify(struct run *r, const struct kiln_report_opts *o, struct kiln_err *err)
{
    struct kiln_report_verify *v = &r->html.verify;
    v->message = kiln_alloc_array(KILN_REPORT_PROBLEMS, sizeof *v->message);
    if (!v->message)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    struct kiln_verify_report rep;
    struct kiln_err e;
    kiln_err_clear(&e);
    int rc = kiln_stage_verify(r->outdir, on_problem, v, &rep, &e);
    v->ran = rc == KILN_OK || rc == KILN_EMISMATCH;
    if (!v->ran)
        snprintf(v->error, sizeof v->error, "%s", e.msg);
    v->files = rep.files_checked;
    v->arrays = rep.arrays_checked;
    v->problems = v->ran ? rep.problems : 0;
    if (v->ran && o->nsources)
        verify_sources(r, o, &rep);
    return KILN_OK;
}

/* The tensor file of each split the manifest lists. */
static int open_views(struct run *r, struct kiln_err *err)
{
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!json_object_get(json_object_get(r->manifest, "counts"), kiln_split_name(s)))
            continue;
        char *path = path_in(r->outdir, kiln_manifest_split_files[s]);
        if (!path)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        int rc = kiln_kten_view_open(&r->view[s], path, err);
        free(path);
        if (rc)
            return rc;
        r->open[s] = true;
        const struct kiln_kten_view *v = &r->view[s];
        if (!r->rec) {
            size_t n;
            if (!kiln_mul_size((size_t)v->w * v->h, v->c, &n) || !(r->rec = malloc(n ? n : 1)))
                return kiln_err_set(err, KILN_ENOMEM, "cannot hold a record of %s",
                                    kiln_manifest_split_files[s]);
            r->html.rec_w = v->w, r->html.rec_h = v->h, r->html.rec_c = v->c;
        } else if (v->w != r->html.rec_w || v->h != r->html.rec_h || v->c != r->html.rec_c) {
            return kiln_err_set(err, KILN_ECORRUPT, "%s/%s holds records of another shape than "
                                "the other splits", r->outdir, kiln_manifest_split_files[s]);
        }
    }
    return KILN_OK;
}

/* Record i of split s as a thumbnail: box-shrunk by a whole factor to at most
 * KILN_REPORT_THUMB a side, grey kept grey, alpha dropped, encoded as PNG. */
static int render(struct run *r, int s, uint64_t i, struct kiln_report_thumb *t,
                  struct kiln_err *err)
{
    const struct kiln_kten_view *v = &r->view[s];
    int rc = kiln_kten_view_record(v, i, r->rec, err);
    if (rc)
        return rc;
    const uint32_t big = v->w > v->h ? v->w : v->h;
    const uint32_t f = big > KILN_REPORT_THUMB ? (big + KILN_REPORT_THUMB - 1) / KILN_REPORT_THUMB
                                               : 1;
    const uint32_t tw = v->w / f ? v->w / f : 1, th = v->h / f ? v->h / f : 1;
    const uint32_t oc = v->c >= 3 ? 3 : 1;
    uint8_t *px = kiln_alloc_array((size_t)tw * th, oc);
    if (!px)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (uint32_t y = 0; y < th; y++)
        for (uint32_t x = 0; x < tw; x++)
            for (uint32_t k = 0; k < oc; k++) {
                uint32_t sum = 0, n = 0;
                for (uint32_t dy = 0; dy < f && y * f + dy < v->h; dy++)
                    for (uint32_t dx = 0; dx < f && x * f + dx < v->w; dx++, n++)
                        sum += r->rec[((size_t)(y * f + dy) * v->w + (x * f + dx)) * v->c + k];
                px[((size_t)y * tw + x) * oc + k] = (uint8_t)((sum + n / 2) / n);
            }
    rc = kiln_png_encode(px, tw, th, oc, &t->png, &t->len, err);
    free(px);
    t->w = tw, t->h = th;
    return rc;
}

/* Fills t with record i of split s: its picture and its name from items.csv. */
static int thumb_of(struct run *r, int s, uint64_t i, struct kiln_report_thumb *t,
                    struct kiln_err *err)
{
    const uint32_t row = r->view[s].item[i];
    t->split = s;
    t->note = "";
    t->name = row < r->items.n ? row_name(r, &r->items.rows[row]) : "?";
    return render(r, s, i, t, err);
}

/* Thumbnails per class and split, fewer per class when there are many classes. */
static int sample(struct run *r, size_t per_class, struct kiln_report_summary *sum,
                  struct kiln_err *err)
{
    const size_t nc = r->html.nclasses, cells = KILN_NSPLITS * (nc ? nc : 1);
    if (per_class > KILN_REPORT_MAX_THUMBS / cells)
        per_class = KILN_REPORT_MAX_THUMBS / cells ? KILN_REPORT_MAX_THUMBS / cells : 1;
    r->html.per_class = sum->per_class = per_class;
    r->html.cells = kiln_alloc_array(cells, sizeof *r->html.cells);
    uint64_t *pick = kiln_alloc_array(per_class, sizeof *pick);
    int rc = r->html.cells && pick ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (r->html.cells)
        memset(r->html.cells, 0, cells * sizeof *r->html.cells);
    for (int s = 0; s < KILN_NSPLITS && !rc; s++) {
        if (!r->open[s])
            continue;
        const struct kiln_kten_view *v = &r->view[s];
        for (size_t c = 0; c < nc && !rc; c++) {
            struct kiln_report_cell *cell = &r->html.cells[(size_t)s * nc + c];
            for (uint64_t i = 0; i < v->n; i++)
                cell->records += v->labels[i] == (int32_t)c;
            const size_t k = kiln_kten_view_sample(v, (int32_t)c, per_class, pick);
            cell->t = kiln_alloc_array(k ? k : 1, sizeof *cell->t);
            if (!cell->t) {
                rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
                break;
            }
            memset(cell->t, 0, (k ? k : 1) * sizeof *cell->t);
            for (size_t j = 0; j < k && !rc; j++, cell->n++, sum->thumbs++)
                rc = thumb_of(r, s, pick[j], &cell->t[j], err);
        }
    }
    free(pick);
    return rc;
}

static int cmp_named(const void *x, const void *y, void *ctx)
{
    const struct run *r = ctx;
    const struct kiln_items_row *a = &r->items.rows[*(const uint32_t *)x],
                                *b = &r->items.rows[*(const uint32_t *)y];
    char na[8192], nb[8192];
    kiln_catalog_relname(a->path, a->member, na, sizeof na);
    kiln_catalog_relname(b->path, b->member, nb, sizeof nb);
    int c = strcmp(na, nb);
    if (c)
        return c;
    if (a->split != b->split)
        return a->split < b->split ? -1 : 1;
    return (*(const uint32_t *)x > *(const uint32_t *)y) - (*(const uint32_t *)x <
                                                             *(const uint32_t *)y);
}

/* The packed rows sorted by (name, split), to find a finding's items. */
static int index_names(struct run *r, struct kiln_err *err)
{
    if (r->items.n > UINT32_MAX)
        return kiln_err_set(err, KILN_ETOOLARGE, "too many rows in items.csv");
    r->by_name = kiln_alloc_array(r->items.n ? r->items.n : 1, sizeof *r->by_name);
    if (!r->by_name)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t k = 0; k < r->items.n; k++)
        if (r->items.rows[k].split != KILN_SPLIT_NONE)
            r->by_name[r->nby++] = (uint32_t)k;
    if (r->nby > 1)
        qsort_r(r->by_name, r->nby, sizeof *r->by_name, cmp_named, r);
    return KILN_OK;
}

/* The packed row of (name, split), or -1. */
static long find_row(struct run *r, const char *name, int split)
{
    size_t lo = 0, hi = r->nby;
    char buf[8192];
    while (lo < hi) {
        const size_t mid = lo + (hi - lo) / 2;
        const struct kiln_items_row *row = &r->items.rows[r->by_name[mid]];
        kiln_catalog_relname(row->path, row->member, buf, sizeof buf);
        int c = strcmp(buf, name);
        if (!c)
            c = (row->split > split) - (row->split < split);
        if (c < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    if (lo < r->nby) {
        const struct kiln_items_row *row = &r->items.rows[r->by_name[lo]];
        kiln_catalog_relname(row->path, row->member, buf, sizeof buf);
        if (strcmp(buf, name) == 0 && row->split == split)
            return (long)r->by_name[lo];
    }
    return -1;
}

/* One item of a finding ({"name", "split"}): its record's picture when it was packed. */
static int finding_item(struct run *r, const json_t *item, struct kiln_report_thumb *t,
                        struct kiln_err *err)
{
    const char *name = kiln_json_str(item, "name"), *split = kiln_json_str(item, "split");
    t->name = name ? name : "?";
    t->split = split ? kiln_split_parse(split) : KILN_SPLIT_NONE;
    if (t->split < 0)
        t->split = KILN_SPLIT_NONE;
    t->note = "";
    const long row = name && t->split != KILN_SPLIT_NONE ? find_row(r, name, t->split) : -1;
    if (row < 0 || !r->open[t->split] ||
        r->items.rows[row].index >= r->view[t->split].n) {
        t->note = "(no record found for this name)";
        return KILN_OK;
    }
    return render(r, t->split, r->items.rows[row].index, t, err);
}

/* The manifest's findings, each with the pictures of its items. */
/* The entries of a JSON list (the audit's findings, or the links the unit rule refused) into
 * *out (*n of them), each with the pictures of its items. A finding names its kind and holds
 * its link; a refused link is its own evidence and its kind is the unit rule's verdict. */
static int read_findings(struct run *r, const json_t *list, bool links,
                         struct kiln_report_finding **out, size_t *n, struct kiln_err *err)
{
    const size_t total = json_is_array(list) ? json_array_size(list) : 0;
    *n = 0;
    *out = kiln_alloc_array(total ? total : 1, sizeof **out);
    if (!*out)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    int rc = KILN_OK;
    for (size_t k = 0; k < total && !rc; k++) {
        const json_t *f = json_array_get(list, k), *items = json_object_get(f, "items");
        struct kiln_report_finding *fd = &(*out)[(*n)++];
        memset(fd, 0, sizeof *fd);
        const char *kind = kiln_json_str(f, links ? "unit_rule" : "kind");
        fd->kind = kind ? kind : "?";
        fd->link = links ? f : json_object_get(f, "link");
        const size_t m = json_is_array(items) ? json_array_size(items) : 0;
        fd->items = kiln_alloc_array(m ? m : 1, sizeof *fd->items);
        if (!fd->items)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        memset(fd->items, 0, (m ? m : 1) * sizeof *fd->items);
        for (size_t j = 0; j < m && !rc; j++, fd->nitems++)
            rc = finding_item(r, json_array_get(items, j), &fd->items[j], err);
    }
    return rc;
}

/* The audit's findings, and the near-duplicate links the unit rule refused (possible copies
 * filed under two labels), as manifest.json lists them. */
static int findings(struct run *r, struct kiln_err *err)
{
    const json_t *audit = json_object_get(r->manifest, "audit"),
                 *near = json_object_get(json_object_get(r->manifest, "split"), "near_duplicates");
    struct kiln_report *h = &r->html;
    h->findings_not_listed =
        (size_t)json_integer_value(json_object_get(audit, "findings_not_listed"));
    h->refused_not_listed = (size_t)json_integer_value(json_object_get(near, "refused_not_listed"));
    int rc = index_names(r, err);
    if (!rc)
        rc = read_findings(r, json_object_get(audit, "findings"), false, &h->findings,
                           &h->nfindings, err);
    if (!rc)
        rc = read_findings(r, json_object_get(near, "refused"), true, &h->refused, &h->nrefused,
                           err);
    return rc;
}

/* The rows not packed, grouped by status in the order statuses first appear. */
static int not_packed(struct run *r, struct kiln_report_summary *sum, struct kiln_err *err)
{
    struct kiln_report *h = &r->html;
    h->skipped = kiln_alloc_array(KILN_ST_COUNT + 1, sizeof *h->skipped);
    if (!h->skipped)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t k = 0; k < r->items.n; k++) {
        const struct kiln_items_row *row = &r->items.rows[k];
        if (row->split != KILN_SPLIT_NONE)
            continue;
        sum->not_packed++;
        size_t g = 0;
        while (g < h->nskipped && strcmp(h->skipped[g].status, row->status) != 0)
            g++;
        if (g == h->nskipped) {
            if (g == KILN_ST_COUNT + 1)
                g--; /* an unknown status: counted with the last group */
            else
                h->nskipped++;
            struct kiln_report_skipped *n = &h->skipped[g];
            memset(n, 0, sizeof *n);
            n->status = row->status;
            n->name = kiln_alloc_array(KILN_REPORT_LISTED, sizeof *n->name);
            n->reason = kiln_alloc_array(KILN_REPORT_LISTED, sizeof *n->reason);
            if (!n->name || !n->reason)
                return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        }
        struct kiln_report_skipped *grp = &h->skipped[g];
        if (grp->nlisted < KILN_REPORT_LISTED) {
            grp->name[grp->nlisted] = row_name(r, row);
            grp->reason[grp->nlisted++] = row->reason;
        }
        grp->count++;
    }
    return KILN_OK;
}

static void free_thumbs(struct kiln_report_thumb *t, size_t n)
{
    for (size_t k = 0; t && k < n; k++)
        free(t[k].png);
    free(t);
}

static void run_free(struct run *r)
{
    struct kiln_report *h = &r->html;
    for (size_t k = 0; h->cells && k < KILN_NSPLITS * (h->nclasses ? h->nclasses : 1); k++)
        free_thumbs(h->cells[k].t, h->cells[k].n);
    free(h->cells);
    for (size_t k = 0; k < h->nfindings; k++)
        free_thumbs(h->findings[k].items, h->findings[k].nitems);
    free(h->findings);
    for (size_t k = 0; k < h->nrefused; k++)
        free_thumbs(h->refused[k].items, h->refused[k].nitems);
    free(h->refused);
    for (size_t k = 0; k < h->nskipped; k++)
        free(h->skipped[k].name), free(h->skipped[k].reason);
    free(h->skipped);
    for (size_t k = 0; k < h->verify.nmessages; k++)
        free(h->verify.message[k]);
    free(h->verify.message);
    free(h->classes);
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (r->open[s])
            kiln_kten_view_close(&r->view[s]);
    if (r->have_sc)
        kiln_shortcuts_free(&r->sc);
    free(r->by_name);
    free(r->rec);
    kiln_items_table_free(&r->items);
    kiln_catalog_free(&r->cat);
    json_decref(r->manifest);
    kiln_arena_free(&r->strings);
}

int kiln_stage_report(const struct kiln_report_opts *o, struct kiln_report_summary *sum,
                      struct kiln_err *err)
{
    struct run r;
    memset(&r, 0, sizeof r);
    memset(sum, 0, sizeof *sum);
    r.outdir = o->outdir;
    kiln_catalog_init(&r.cat);
    kiln_arena_init(&r.strings);
    r.html.outdir = o->outdir;
    int rc = load(&r, err);
    if (!rc)
        rc = verify(&r, o, err);
    if (!rc) {
        struct kiln_err e;
        kiln_err_clear(&e);
        r.have_sc = kiln_shortcuts_run(&r.cat, &r.sc, &e) == KILN_OK;
        /* Counted over the catalogue's classes: shown only when they are the manifest's. */
        r.html.shortcuts = r.have_sc && r.sc.nclasses == r.html.nclasses ? &r.sc : NULL;
        rc = open_views(&r, err);
    }
    if (!rc)
        rc = sample(&r, o->per_class, sum, err);
    if (!rc)
        rc = findings(&r, err);
    if (!rc)
        rc = not_packed(&r, sum, err);
    if (!rc) {
        r.html.manifest = r.manifest;
        rc = kiln_report_html_save(o->html, &r.html, err);
    }
    sum->findings = r.html.nfindings + r.html.findings_not_listed;
    sum->verified = r.html.verify.ran;
    sum->problems = r.html.verify.problems;
    sum->sources_checked = r.html.verify.sources_ran;
    sum->sources_missing = r.html.verify.sources_missing;
    sum->sources_changed = r.html.verify.sources_changed;
    sum->shortcuts = r.have_sc ? r.sc.fired : 0;
    run_free(&r);
    return rc;
}
