/* Pack stage. A reader thread fetches the bytes of every packed item (plain files directly,
 * archive members by one streaming pass per archive) into a bounded queue; workers verify the
 * SHA-256 recorded by scan, decode (at a DCT reduction when allowed), prepare the record and
 * pwrite it at its computed offset. Nothing depends on scheduling: record order is fixed
 * beforehand and statistics are exact integer totals. */
#include "stage_pack.h"

#include <errno.h>
#include <inttypes.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/csv.h"
#include "../../formats/decoders/decoder.h"
#include "../../formats/files/kten.h"
#include "../../formats/files/manifest.h"
#include "../../formats/files/outfile.h"
#include "../../formats/sources/source.h"
#include "../audit.h"
#include "../checked.h"
#include "../names.h"
#include "record_pool.h"
#include "stage_near.h"
#include "stage_record.h"
#include "../prepare.h"
#include "queue.h"
#include "../sha256.h"
#include "../textesc.h"
#include "../version.h"

#define NO_RECORD UINT32_MAX

struct pack_job {
    uint32_t item;
    uint8_t *data;
    size_t size;
};

struct pack_run {
    const struct kiln_pack_opts *o;
    struct kiln_catalog *cat;
    struct kiln_pack_report *rep;
    uint32_t *record_of;        /* per item: record index in its split, or NO_RECORD */
    uint32_t *order[KILN_NSPLITS]; /* per split: item of each record */
    struct kiln_kten_writer kten[KILN_NSPLITS];
    bool kten_open[KILN_NSPLITS];
    int pool_fd;                /* integer records for f32 output, else -1 */
    struct kiln_outfile pool;
    uint64_t pool_base[KILN_NSPLITS];
    size_t int_record; /* bytes of one integer record */
    struct kiln_queue q;
    pthread_mutex_t mu;
    bool failed;
    struct kiln_err err;
    struct kiln_progress prog;
    uint8_t *delivered; /* per item, set when its bytes were queued */
    uint8_t (*digest)[KILN_RECORD_DIGEST_LEN]; /* per item: its record's digest */
};

static void fail(struct pack_run *run, const struct kiln_err *e)
{
    pthread_mutex_lock(&run->mu);
    if (!run->failed) {
        run->failed = true;
        run->err = *e;
    }
    pthread_mutex_unlock(&run->mu);
    kiln_queue_close(&run->q);
}

static bool has_failed(struct pack_run *run)
{
    pthread_mutex_lock(&run->mu);
    bool f = run->failed;
    pthread_mutex_unlock(&run->mu);
    return f;
}

/* ---- record order ------------------------------------------------------------------------- */

struct order_key {
    const struct kiln_item *it;
    uint32_t index;
};

/* Records follow the unit key (a seeded hash, so classes are interleaved), then content, so
 * that moving or renaming source files never changes a tensor file. Identical files are then
 * in catalogue order, which scan fixed by location: not the names themselves, which reproduce
 * of a --hash-paths output only has in hashed form. */
static int cmp_record(const void *a, const void *b)
{
    const struct order_key *p = a, *q = b;
    const struct kiln_item *x = p->it, *y = q->it;
    if (x->unit_key != y->unit_key)
        return x->unit_key < y->unit_key ? -1 : 1;
    int c = memcmp(x->sha256, y->sha256, KILN_SHA256_LEN);
    if (c)
        return c;
    if (x->class_index != y->class_index)
        return x->class_index < y->class_index ? -1 : 1;
    return p->index < q->index ? -1 : p->index > q->index;
}

static int plan_records(struct pack_run *run, struct kiln_err *err)
{
    struct kiln_catalog *cat = run->cat;
    run->record_of = kiln_alloc_array(cat->n, sizeof *run->record_of);
    struct order_key *keys = kiln_alloc_array(cat->n, sizeof *keys);
    if (!run->record_of || !keys) {
        free(keys);
        return kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", cat->n);
    }
    for (size_t i = 0; i < cat->n; i++)
        run->record_of[i] = NO_RECORD;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        size_t n = 0;
        for (size_t i = 0; i < cat->n; i++)
            if (cat->items[i].split == s)
                keys[n++] = (struct order_key){&cat->items[i], (uint32_t)i};
        qsort(keys, n, sizeof *keys, cmp_record);
        run->order[s] = kiln_alloc_array(n, sizeof(uint32_t));
        if (!run->order[s]) {
            free(keys);
            return kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", n);
        }
        for (size_t r = 0; r < n; r++) {
            run->order[s][r] = keys[r].index;
            run->record_of[keys[r].index] = (uint32_t)r;
        }
        run->rep->records[s] = n;
    }
    free(keys);
    return KILN_OK;
}

/* ---- the reader --------------------------------------------------------------------------- */

static int queue_job(struct pack_run *run, uint32_t item, uint8_t *data, size_t size,
                     struct kiln_err *err)
{
    struct pack_job *j = malloc(sizeof *j);
    if (!j) {
        free(data);
        return kiln_err_set(err, KILN_ENOMEM, "cannot queue an item");
    }
    *j = (struct pack_job){item, data, size};
    run->delivered[item] = 1;
    if (!kiln_queue_push(&run->q, j, size + sizeof *j)) {
        free(data);
        free(j);
        return kiln_err_set(err, KILN_EINTERNAL, "pack stopped");
    }
    return KILN_OK;
}

static const char *fetch_source(const struct kiln_item *it)
{
    return it->from_source ? it->from_source : it->source;
}

static const char *fetch_path(const struct kiln_item *it)
{
    return it->from_source ? it->from_path : it->path;
}

static const char *fetch_member(const struct kiln_item *it)
{
    return it->from_source ? it->from_member : it->member;
}

/* The file to open for an item: its source itself for an archive that is the source. */
static char *item_fs_path(const struct kiln_item *it)
{
    if (!fetch_path(it)[0])
        return strdup(fetch_source(it));
    return kiln_pipeline_path(fetch_source(it), fetch_path(it));
}

static const char *item_name(const struct kiln_item *it, char *buf, size_t len)
{
    char rel[2048];
    kiln_catalog_relname(fetch_path(it), fetch_member(it), rel, sizeof rel);
    snprintf(buf, len, "%s/%s", fetch_source(it), rel);
    return buf;
}

/* Packed items in order of where their bytes are read, so each archive is one run. */
static int cmp_fetch(const void *a, const void *b, void *ctx)
{
    const struct kiln_item *items = ctx;
    const struct kiln_item *x = &items[*(const uint32_t *)a], *y = &items[*(const uint32_t *)b];
    int c = strcmp(fetch_source(x), fetch_source(y));
    if (!c)
        c = strcmp(fetch_path(x), fetch_path(y));
    if (!c)
        c = strcmp(fetch_member(x), fetch_member(y));
    return c;
}

/* Members wanted from one archive: fetch[first, last) share its source and path, sorted by
 * member. */
struct archive_fetch {
    struct pack_run *run;
    const uint32_t *fetch;
    size_t first, last;
};

static bool want_member(void *ctx, const char *path, const char *member)
{
    (void)path;
    struct archive_fetch *f = ctx;
    const struct kiln_item *items = f->run->cat->items;
    for (size_t lo = f->first, hi = f->last; lo < hi;) {
        size_t mid = lo + (hi - lo) / 2;
        int c = strcmp(fetch_member(&items[f->fetch[mid]]), member);
        if (c == 0)
            return true;
        if (c < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return false;
}

static int got_member(void *ctx, struct kiln_source_entry *e, struct kiln_err *err)
{
    struct archive_fetch *f = ctx;
    struct pack_run *run = f->run;
    const struct kiln_item *items = run->cat->items;
    /* Duplicate member names are possible in tar: the bytes go to the first undelivered item
     * of that name, and copies to every other one recorded with the same content (reproduce
     * finds two identical recorded files in one member). The copies are queued first: once
     * queued, the original belongs to a worker. */
    size_t first = f->first;
    while (first < f->last && (run->delivered[f->fetch[first]] ||
                               strcmp(fetch_member(&items[f->fetch[first]]), e->member) != 0))
        first++;
    if (first == f->last) {
        free(e->data);
        return KILN_OK;
    }
    const struct kiln_item *it = &items[f->fetch[first]];
    if (e->status != KILN_ST_OK) {
        char name[2048];
        free(e->data);
        return kiln_err_set(err, KILN_EMISMATCH, "cannot read %s since it was scanned: %s",
                            item_name(it, name, sizeof name), e->reason);
    }
    for (size_t k = first + 1; k < f->last; k++) {
        uint32_t i = f->fetch[k];
        if (run->delivered[i] || strcmp(fetch_member(&items[i]), e->member) != 0 ||
            memcmp(items[i].sha256, it->sha256, sizeof it->sha256) != 0)
            continue;
        uint8_t *copy = malloc(e->size ? e->size : 1);
        if (!copy) {
            free(e->data);
            return kiln_err_set(err, KILN_ENOMEM, "cannot copy %zu bytes", e->size);
        }
        memcpy(copy, e->data, e->size);
        int rc = queue_job(run, i, copy, e->size, err);
        if (rc) {
            free(e->data);
            return rc;
        }
    }
    return queue_job(run, f->fetch[first], e->data, e->size, err);
}

static int read_plain(struct pack_run *run, uint32_t i, struct kiln_err *e)
{
    const struct kiln_item *it = &run->cat->items[i];
    char *p = item_fs_path(it);
    if (!p)
        return kiln_err_set(e, KILN_ENOMEM, "out of memory");
    uint8_t *data;
    size_t size;
    struct kiln_err re;
    int rc = kiln_source_read_file(p, 4ull << 30, &data, &size, &re);
    free(p);
    if (rc) {
        char name[2048];
        return kiln_err_set(e, KILN_EMISMATCH, "cannot read %s since it was scanned: %s",
                            item_name(it, name, sizeof name), re.msg);
    }
    return queue_job(run, i, data, size, e);
}

static void *reader_main(void *arg)
{
    struct pack_run *run = arg;
    struct kiln_catalog *cat = run->cat;
    struct kiln_err e;
    kiln_err_clear(&e);
    int rc = KILN_OK;
    size_t n = 0;
    uint32_t *fetch = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *fetch);
    if (!fetch)
        rc = kiln_err_set(&e, KILN_ENOMEM, "cannot plan reading %zu items", cat->n);
    for (size_t i = 0; !rc && i < cat->n; i++)
        if (run->record_of[i] != NO_RECORD)
            fetch[n++] = (uint32_t)i;
    if (!rc)
        qsort_r(fetch, n, sizeof *fetch, cmp_fetch, cat->items);
    for (size_t k = 0; k < n && !rc;) {
        const struct kiln_item *it = &cat->items[fetch[k]];
        if (!fetch_member(it)[0]) {
            rc = read_plain(run, fetch[k++], &e);
            continue;
        }
        size_t j = k + 1;
        while (j < n && strcmp(fetch_source(&cat->items[fetch[j]]), fetch_source(it)) == 0 &&
               strcmp(fetch_path(&cat->items[fetch[j]]), fetch_path(it)) == 0)
            j++;
        char *p = item_fs_path(it);
        if (!p) {
            rc = kiln_err_set(&e, KILN_ENOMEM, "out of memory");
            break;
        }
        struct archive_fetch f = {run, fetch, k, j};
        struct kiln_walk_opts wo = {false, 4ull << 30};
        rc = kiln_archive_walk(p, fetch_source(it), fetch_path(it), &wo, want_member, got_member,
                               &f, NULL, &e);
        free(p);
        for (size_t q = k; q < j && !rc; q++)
            if (!run->delivered[fetch[q]]) {
                char name[2048];
                rc = kiln_err_set(&e, KILN_EMISMATCH, "%s is no longer in its archive",
                                  item_name(&cat->items[fetch[q]], name, sizeof name));
            }
        k = j;
    }
    free(fetch);
    if (rc && !has_failed(run))
        fail(run, &e);
    kiln_queue_close(&run->q);
    return NULL;
}

/* ---- workers ------------------------------------------------------------------------------ */

struct pack_worker {
    struct pack_run *run;
    struct kiln_prep prep;
    struct kiln_image img;
    uint8_t *record;
    struct kiln_stats stats[KILN_NSPLITS];
    size_t dct_reduced;
};

/* Statistics see the integer record; in CHW layout the channels are planes, so each plane is
 * added as a one-channel run into its own channel. */
static int add_record_stats(struct kiln_stats *st, const struct kiln_recipe *r,
                            const uint8_t *record, struct kiln_err *e)
{
    const size_t npx = (size_t)r->width * r->height;
    if (r->layout == KILN_LAYOUT_NHWC)
        return r->depth == 8 ? kiln_stats_add_u8(st, record, npx, e)
                             : kiln_stats_add_u16(st, (const uint16_t *)record, npx, e);
    int rc = KILN_OK;
    for (unsigned c = 0; c < r->channels && !rc; c++) {
        struct kiln_stats one, wide;
        kiln_stats_init(&one, 1);
        rc = r->depth == 8 ? kiln_stats_add_u8(&one, record + c * npx, npx, e)
                           : kiln_stats_add_u16(&one, (const uint16_t *)record + c * npx, npx, e);
        if (!rc) {
            kiln_stats_init(&wide, st->channels);
            wide.ch[c] = one.ch[0];
            rc = kiln_stats_merge(st, &wide, e);
        }
    }
    return rc;
}

static int pack_one(struct pack_worker *w, const struct pack_job *j, struct kiln_err *e)
{
    struct pack_run *run = w->run;
    const struct kiln_recipe *r = &run->o->recipe;
    const struct kiln_item *it = &run->cat->items[j->item];
    char name[2048];
    uint8_t sha[KILN_SHA256_LEN];
    int rc = kiln_sha256_buf(j->data, j->size, sha, e);
    if (rc)
        return rc;
    if (memcmp(sha, it->sha256, KILN_SHA256_LEN) != 0)
        return kiln_err_set(e, KILN_EMISMATCH,
                            "%s changed since it was scanned (SHA-256 differs); scan again",
                            item_name(it, name, sizeof name));
    const struct kiln_decoder *dec = kiln_decoder_find(j->data, j->size);
    if (!dec)
        return kiln_err_set(e, KILN_ECORRUPT, "%s: no decoder takes it any more",
                            item_name(it, name, sizeof name));
    struct kiln_image_info info;
    const struct kiln_decode_limits lim = {r->max_pixels, r->max_side};
    rc = dec->read_info(j->data, j->size, &lim, &info, e);
    if (!rc && ((uint64_t)info.width * info.height > r->max_pixels || info.width > r->max_side ||
                info.height > r->max_side || !info.width || !info.height))
        rc = kiln_err_set(e, KILN_ETOOLARGE, "%ux%u is outside the limits", info.width,
                          info.height);
    uint32_t denom = 1;
    if (!rc) {
        denom = kiln_prep_choose_denom(r, info.width, info.height, info.orientation,
                                       info.max_scale_denom);
        rc = kiln_decoded_shape(&info, denom, &w->img, e);
    }
    info.trusted = 1; /* the SHA-256 check above passed */
    if (!rc)
        rc = dec->decode(j->data, j->size, &info, denom, &w->img, e);
    if (!rc) {
        const struct kiln_prep_source src = {info.width, info.height, denom, info.orientation,
                                             false};
        rc = kiln_prep_record(&w->prep, r, &w->img, &src, w->record, e);
    }
    if (rc) {
        kiln_err_prefix(e, "%s", item_name(it, name, sizeof name));
        return rc;
    }
    if (denom > 1)
        w->dct_reduced++;
    uint8_t d[KILN_SHA256_LEN];
    rc = kiln_sha256_buf(w->record, run->int_record, d, e);
    if (rc)
        return rc;
    memcpy(run->digest[j->item], d, KILN_RECORD_DIGEST_LEN);
    const int s = it->split;
    rc = add_record_stats(&w->stats[s], r, w->record, e);
    if (rc)
        return rc;
    const uint64_t off = (uint64_t)run->record_of[j->item] * run->int_record;
    if (run->pool_fd >= 0)
        return kiln_pwrite_all(run->pool_fd, w->record, run->int_record,
                               (long long)(run->pool_base[s] + off), e);
    return kiln_kten_write(&run->kten[s], 0, off, w->record, run->int_record, e);
}

static void *worker_main(void *arg)
{
    struct pack_worker *w = arg;
    struct pack_run *run = w->run;
    struct pack_job *j;
    while ((j = kiln_queue_pop(&run->q)) != NULL) {
        if (!has_failed(run)) {
            struct kiln_err e;
            kiln_err_clear(&e);
            int rc = pack_one(w, j, &e);
            if (rc)
                fail(run, &e);
            pthread_mutex_lock(&run->mu);
            run->prog.items++;
            run->prog.bytes += j->size;
            run->rep->bytes_read += j->size;
            if (run->o->progress)
                run->o->progress(run->o->progress_ctx, &run->prog);
            pthread_mutex_unlock(&run->mu);
        }
        free(j->data);
        free(j);
    }
    return NULL;
}

/* ---- float conversion, metadata and side files -------------------------------------------- */

/* f32 = (v / maxval - mean_c) / std_c with the training statistics in [0,1] scale; a channel
 * with zero spread is divided by 1 instead (docs/pixels.md). */
static int convert_f32(struct pack_run *run, int s, const double mean[4], const double std[4],
                       struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    const size_t samples = (size_t)r->width * r->height * r->channels;
    const size_t npx = (size_t)r->width * r->height;
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    uint8_t *in = malloc(run->int_record);
    float *out = kiln_alloc_array(samples, sizeof *out);
    if (!in || !out) {
        free(in);
        free(out);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate conversion buffers");
    }
    int rc = KILN_OK;
    for (size_t rec = 0; rec < run->rep->records[s] && !rc; rec++) {
        if (run->o->pool) {
            rc = kiln_record_pool_get(run->o->pool, run->cat->items[run->order[s][rec]].pool_slot,
                                      in, err);
            if (rc)
                break;
        } else {
            const uint64_t off = (uint64_t)rec * run->int_record;
            ssize_t got =
                pread(run->pool_fd, in, run->int_record, (off_t)(run->pool_base[s] + off));
            if (got != (ssize_t)run->int_record) {
                rc = kiln_err_sys(err, KILN_EIO, errno, "cannot read back record %zu", rec);
                break;
            }
        }
        for (size_t k = 0; k < samples; k++) {
            size_t c = r->layout == KILN_LAYOUT_NHWC ? k % r->channels : k / npx;
            double v = r->depth == 16 ? ((const uint16_t *)in)[k] : in[k];
            double sd = std[c] > 0 ? std[c] : 1.0;
            out[k] = (float)((v / maxv - mean[c]) / sd);
        }
        rc = kiln_kten_write(&run->kten[s], 0, (uint64_t)rec * samples * 4, out, samples * 4, err);
    }
    free(in);
    free(out);
    return rc;
}

static json_t *class_counts(const struct kiln_catalog *cat, int split)
{
    json_t *per = json_object();
    size_t *n = calloc(cat->nclasses + 1, sizeof *n);
    if (!n)
        return per;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].split == split)
            n[cat->items[i].class_index + 1]++;
    for (size_t c = 0; c < cat->nclasses; c++)
        json_object_set_new(per, cat->classes[c], json_integer((json_int_t)n[c + 1]));
    if (n[0])
        json_object_set_new(per, "(unlabelled)", json_integer((json_int_t)n[0]));
    free(n);
    return per;
}

static json_t *classes_json(const struct kiln_catalog *cat)
{
    json_t *a = json_array();
    for (size_t c = 0; c < cat->nclasses; c++) {
        char *e = kiln_text_escape(cat->classes[c]);
        json_array_append_new(a, json_string(e ? e : ""));
        free(e);
    }
    return a;
}

static int write_items_csv(struct pack_run *run, const char *path, struct kiln_err *err)
{
    struct kiln_outfile of;
    int rc = kiln_outfile_open(&of, path, err);
    if (rc)
        return rc;
    FILE *f = kiln_outfile_stream(&of, err);
    if (!f) {
        kiln_outfile_abort(&of);
        return KILN_EIO;
    }
    static const char *const cols[] = {"row",   "source", "path",  "member", "size",
                                       "sha256", "label", "class", "group",  "unit",
                                       "split", "index",  "status", "reason"};
    for (size_t c = 0; c < sizeof cols / sizeof cols[0]; c++)
        kiln_csv_field(f, cols[c], c == 0);
    kiln_csv_end_row(f);
    const struct kiln_catalog *cat = run->cat;
    size_t row = 0;
    for (int pass = 0; pass <= KILN_NSPLITS; pass++) {
        size_t n = pass < KILN_NSPLITS ? run->rep->records[pass] : cat->n;
        for (size_t k = 0; k < n; k++) {
            size_t i = pass < KILN_NSPLITS ? run->order[pass][k] : k;
            if (pass == KILN_NSPLITS && run->record_of[i] != NO_RECORD)
                continue;
            const struct kiln_item *it = &cat->items[i];
            char sha[KILN_SHA256_HEX] = "", num[32];
            if (it->has_sha || it->status == KILN_ST_OK)
                kiln_sha256_hex(it->sha256, sha);
            snprintf(num, sizeof num, "%zu", row++);
            kiln_csv_field(f, num, 1);
            const char *texts[] = {it->source, it->path, it->member};
            for (int t = 0; t < 3; t++) {
                char *e = kiln_text_escape(texts[t]);
                kiln_csv_field(f, e ? e : "", 0);
                free(e);
            }
            fprintf(f, ",%" PRIu64 ",%s", it->size, sha);
            char *lab = kiln_text_escape(it->label), *grp = kiln_text_escape(it->group);
            kiln_csv_field(f, lab ? lab : "", 0);
            if (it->class_index >= 0)
                fprintf(f, ",%" PRId32, it->class_index);
            else
                fputs(",", f);
            kiln_csv_field(f, grp ? grp : "", 0);
            free(lab);
            free(grp);
            if (pass < KILN_NSPLITS)
                fprintf(f, ",%016" PRIx64 ",%s,%zu,ok,", it->unit_key, kiln_split_name(pass), k);
            else {
                fprintf(f, ",,,,%s,", kiln_status_name(it->status));
                char *rs = kiln_text_escape(it->status == KILN_ST_OK ? "no split assigned"
                                                                      : it->reason);
                kiln_csv_field(f, rs ? rs : "", 1);
                free(rs);
            }
            kiln_csv_end_row(f);
        }
    }
    if (ferror(f)) {
        kiln_outfile_abort(&of);
        return kiln_err_sys(err, KILN_EIO, errno, "cannot write %s", path);
    }
    return kiln_outfile_commit(&of, err);
}

/* ---- the stage ---------------------------------------------------------------------------- */

static bool split_wanted(const struct pack_run *run, int s)
{
    const json_t *split = json_object_get(run->o->catalog_record, "split");
    const json_t *parts = json_object_get(split, "parts");
    if (json_is_integer(parts))
        return json_integer_value(parts) == 3 || s != KILN_SPLIT_VAL;
    return run->rep->records[s] > 0 || s == KILN_SPLIT_TRAIN;
}

static int open_outputs(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    for (int s = 0; s < KILN_NSPLITS; s++) {
        if (!split_wanted(run, s))
            continue;
        const uint64_t n = run->rep->records[s];
        struct kiln_kten_array arrays[3];
        memset(arrays, 0, sizeof arrays);
        snprintf(arrays[0].name, sizeof arrays[0].name, "images");
        arrays[0].dtype = r->dtype == KILN_OUT_F32   ? KILN_DT_F32
                          : r->dtype == KILN_OUT_U16 ? KILN_DT_U16
                                                     : KILN_DT_U8;
        arrays[0].rank = 4;
        if (r->layout == KILN_LAYOUT_NHWC) {
            const uint64_t d[4] = {n, r->height, r->width, r->channels};
            memcpy(arrays[0].dims, d, sizeof d);
        } else {
            const uint64_t d[4] = {n, r->channels, r->height, r->width};
            memcpy(arrays[0].dims, d, sizeof d);
        }
        snprintf(arrays[1].name, sizeof arrays[1].name, "labels");
        arrays[1].dtype = KILN_DT_I32;
        arrays[1].rank = 1;
        arrays[1].dims[0] = n;
        snprintf(arrays[2].name, sizeof arrays[2].name, "item");
        arrays[2].dtype = KILN_DT_U32;
        arrays[2].rank = 1;
        arrays[2].dims[0] = n;
        char *p = kiln_pipeline_path(run->o->outdir, kiln_manifest_split_files[s]);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        int rc = kiln_kten_create(&run->kten[s], p, arrays, 3, err);
        free(p);
        if (rc)
            return rc;
        run->kten_open[s] = true;
        run->rep->present[s] = true;
    }
    if (r->dtype == KILN_OUT_F32 && !run->o->pool) {
        char *p = kiln_pipeline_path(run->o->outdir, KILN_FILE_POOL);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        int rc = kiln_outfile_open(&run->pool, p, err);
        free(p);
        if (rc)
            return rc;
        run->pool_fd = run->pool.fd;
        uint64_t base = 0;
        for (int s = 0; s < KILN_NSPLITS; s++) {
            run->pool_base[s] = base;
            uint64_t len;
            if (!kiln_mul_u64(run->rep->records[s], run->int_record, &len) ||
                base > UINT64_MAX - len)
                return kiln_err_set(err, KILN_ENOMEM, "record pool too large");
            base += len;
        }
    }
    return KILN_OK;
}

static void abort_outputs(struct pack_run *run)
{
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (run->kten_open[s]) {
            kiln_kten_abort(&run->kten[s]);
            run->kten_open[s] = false;
        }
    if (run->pool_fd >= 0) {
        kiln_outfile_abort(&run->pool);
        run->pool_fd = -1;
    }
}

/* kiln build: the records were prepared during scan; lay them out per split in record order
 * and take the statistics on the way. */
static int layout_from_pool(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    uint8_t *buf = malloc(run->int_record);
    if (!buf)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a record");
    int rc = KILN_OK;
    for (int s = 0; s < KILN_NSPLITS; s++)
        kiln_stats_init(&run->rep->stats[s], r->channels);
    for (int s = 0; s < KILN_NSPLITS && !rc; s++)
        for (size_t k = 0; k < run->rep->records[s] && !rc; k++) {
            const struct kiln_item *it = &run->cat->items[run->order[s][k]];
            if (it->pool_slot == KILN_NO_SLOT) {
                rc = kiln_err_set(err, KILN_EINTERNAL, "item %s has no prepared record", it->path);
                break;
            }
            rc = kiln_record_pool_get(run->o->pool, it->pool_slot, buf, err);
            uint8_t d[KILN_SHA256_LEN];
            if (!rc && !it->has_record)
                rc = kiln_sha256_buf(buf, run->int_record, d, err);
            if (!rc)
                memcpy(run->digest[run->order[s][k]], it->has_record ? it->record_digest : d,
                       KILN_RECORD_DIGEST_LEN);
            if (!rc)
                rc = add_record_stats(&run->rep->stats[s], r, buf, err);
            if (!rc && r->dtype != KILN_OUT_F32)
                rc = kiln_kten_write(&run->kten[s], 0, (uint64_t)k * run->int_record, buf,
                                     run->int_record, err);
            if (!rc && it->pixel_scale > 1)
                run->rep->dct_reduced++;
        }
    free(buf);
    return rc;
}

static int run_workers(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_pack_opts *o = run->o;
    unsigned jobs = o->jobs ? o->jobs : 1;
    struct pack_worker *w = calloc(jobs, sizeof *w);
    pthread_t *tid = calloc(jobs, sizeof *tid);
    int rc = kiln_queue_init(&run->q, 1024, o->queue_bytes ? o->queue_bytes : KILN_QUEUE_BYTES_DEFAULT, err);
    if (rc || !w || !tid) {
        free(w);
        free(tid);
        if (!rc)
            kiln_queue_destroy(&run->q);
        return rc ? rc : kiln_err_set(err, KILN_ENOMEM, "cannot start workers");
    }
    unsigned started = 0;
    for (; started < jobs; started++) {
        w[started].run = run;
        kiln_prep_init(&w[started].prep);
        for (int s = 0; s < KILN_NSPLITS; s++)
            kiln_stats_init(&w[started].stats[s], o->recipe.channels);
        w[started].record = malloc(run->int_record);
        if (!w[started].record ||
            pthread_create(&tid[started], NULL, worker_main, &w[started]) != 0) {
            free(w[started].record);
            kiln_prep_free(&w[started].prep);
            break;
        }
    }
    pthread_t reader;
    bool reader_ok = started > 0 && pthread_create(&reader, NULL, reader_main, run) == 0;
    if (!reader_ok)
        kiln_queue_close(&run->q);
    else
        pthread_join(reader, NULL);
    for (unsigned i = 0; i < started; i++)
        pthread_join(tid[i], NULL);
    for (int s = 0; s < KILN_NSPLITS; s++)
        kiln_stats_init(&run->rep->stats[s], o->recipe.channels);
    for (unsigned i = 0; i < started; i++) {
        for (int s = 0; s < KILN_NSPLITS && !rc; s++)
            rc = kiln_stats_merge(&run->rep->stats[s], &w[i].stats[s], err);
        run->rep->dct_reduced += w[i].dct_reduced;
        free(w[i].record);
        kiln_prep_free(&w[i].prep);
        kiln_image_free(&w[i].img);
    }
    free(w);
    free(tid);
    kiln_queue_destroy(&run->q);
    if (!reader_ok && !rc)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot start pack threads");
    if (!rc && run->failed)
        rc = kiln_err_set(err, run->err.code, "%s", run->err.msg);
    return rc;
}

static int finish_splits(struct pack_run *run, json_t *stats_all, const char *recipe_sha,
                         struct kiln_err *err)
{
    const struct kiln_recipe *r = &run->o->recipe;
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    double mean[4] = {0, 0, 0, 0}, std[4] = {1, 1, 1, 1};
    for (unsigned c = 0; c < r->channels; c++) {
        struct kiln_stats_summary u;
        int rc = kiln_stats_summarize(&run->rep->stats[KILN_SPLIT_TRAIN].ch[c], maxv, &u, err);
        if (rc)
            return rc;
        mean[c] = u.mean;
        std[c] = u.std_pop;
    }
    json_t *classes = classes_json(run->cat);
    size_t row_base = 0;
    int rc = KILN_OK;
    for (int s = 0; s < KILN_NSPLITS && !rc; s++) {
        const size_t n = run->rep->records[s];
        if (!run->kten_open[s]) {
            row_base += n;
            continue;
        }
        if (r->dtype == KILN_OUT_F32)
            rc = convert_f32(run, s, mean, std, err);
        int32_t *labels = kiln_alloc_array(n, sizeof *labels);
        uint32_t *items = kiln_alloc_array(n, sizeof *items);
        if (!rc && (!labels || !items))
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate label arrays");
        for (size_t k = 0; !rc && k < n; k++) {
            int32_t l = run->cat->items[run->order[s][k]].class_index;
            uint32_t it = (uint32_t)(row_base + k);
            uint8_t *lb = (uint8_t *)&labels[k], *ib = (uint8_t *)&items[k];
            for (int b = 0; b < 4; b++) { /* little-endian on every host */
                lb[b] = (uint8_t)((uint32_t)l >> (8 * b));
                ib[b] = (uint8_t)(it >> (8 * b));
            }
        }
        if (!rc && n)
            rc = kiln_kten_write(&run->kten[s], 1, 0, labels, n * 4, err);
        if (!rc && n)
            rc = kiln_kten_write(&run->kten[s], 2, 0, items, n * 4, err);
        free(labels);
        free(items);
        if (rc)
            break;
        json_t *meta = json_object();
        json_object_set_new(meta, "format", json_string("kiln tensor file"));
        json_object_set_new(meta, "split", json_string(kiln_split_name(s)));
        json_object_set_new(meta, "records", json_integer((json_int_t)n));
        json_object_set_new(meta, "layout", json_string(kiln_layout_name(r->layout)));
        json_object_set_new(meta, "dtype", json_string(kiln_out_type_name(r->dtype)));
        json_object_set_new(meta, "record_depth", json_integer(r->depth));
        json_object_set_new(meta, "classes", json_incref(classes));
        json_object_set_new(meta, "recipe_sha256", json_string(recipe_sha));
        json_object_set_new(meta, "statistics", json_incref(json_object_get(stats_all, kiln_split_name(s))));
        if (s != KILN_SPLIT_TRAIN)
            json_object_set_new(meta, "training_statistics",
                                json_incref(json_object_get(stats_all, "train")));
        if (r->dtype == KILN_OUT_F32) {
            json_t *norm = json_object(), *m = json_array(), *sd = json_array();
            for (unsigned c = 0; c < r->channels; c++) {
                json_array_append_new(m, json_real(mean[c]));
                json_array_append_new(sd, json_real(std[c] > 0 ? std[c] : 1.0));
            }
            json_object_set_new(norm, "mean_unit", m);
            json_object_set_new(norm, "std_unit", sd);
            json_object_set_new(meta, "normalisation", norm);
        }
        char *text = kiln_json_dump(meta);
        json_decref(meta);
        if (!text) {
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot serialise metadata");
            break;
        }
        rc = kiln_kten_finish(&run->kten[s], text, strlen(text), err);
        run->kten_open[s] = false;
        free(text);
        row_base += n;
    }
    json_decref(classes);
    return rc;
}

static json_t *skipped_json(const struct kiln_catalog *cat)
{
    json_t *a = json_array();
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->status == KILN_ST_OK)
            continue;
        json_t *o = json_object();
        const char *texts[][2] = {{"source", it->source}, {"path", it->path},
                                  {"member", it->member}, {"reason", it->reason}};
        for (int t = 0; t < 3; t++) {
            char *e = kiln_text_escape(texts[t][1]);
            json_object_set_new(o, texts[t][0], json_string(e ? e : ""));
            free(e);
        }
        json_object_set_new(o, "status", json_string(kiln_status_name(it->status)));
        char *e = kiln_text_escape(it->reason);
        json_object_set_new(o, "reason", json_string(e ? e : ""));
        free(e);
        json_array_append_new(a, o);
    }
    return a;
}

struct out_hash {
    const char *name;
    char hex[KILN_SHA256_HEX];
    uint64_t size;
};

static int hash_output(const char *dir, struct out_hash *h, struct kiln_err *err)
{
    char *fp = kiln_pipeline_path(dir, h->name);
    if (!fp)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    uint8_t d[KILN_SHA256_LEN];
    int rc = kiln_file_sha256(fp, d, &h->size, err);
    free(fp);
    if (!rc)
        kiln_sha256_hex(d, h->hex);
    return rc;
}

/* SHA256SUMS in the coreutils format ("<hex>  <name>"), so `sha256sum -c` checks it. */
static int write_sums(const char *dir, const struct out_hash *h, size_t n, struct kiln_err *err)
{
    char *p = kiln_pipeline_path(dir, KILN_FILE_SUMS);
    if (!p)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    struct kiln_outfile of;
    int rc = kiln_outfile_open(&of, p, err);
    free(p);
    if (rc)
        return rc;
    FILE *f = kiln_outfile_stream(&of, err);
    if (!f) {
        kiln_outfile_abort(&of);
        return KILN_EIO;
    }
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%s  %s\n", h[i].hex, h[i].name);
    return kiln_outfile_commit(&of, err);
}

static int cmp_digest_r(const void *x, const void *y, void *ctx)
{
    const uint8_t(*digest)[KILN_RECORD_DIGEST_LEN] = ctx;
    const uint32_t i = *(const uint32_t *)x, j = *(const uint32_t *)y;
    int c = memcmp(digest[i], digest[j], KILN_RECORD_DIGEST_LEN);
    return c ? c : (i > j) - (i < j);
}

/* No record written to one split may be identical to a record in another (docs/split.md): with
 * the packed items sorted by record digest, each run of equal digests must lie in one split.
 * Returns KILN_ELEAK naming the first such pair (its smallest item and the first item of the
 * run in another split) unless o->allow_identical; counts the pairs either way. */
static int check_identical(struct pack_run *run, struct kiln_err *err)
{
    const struct kiln_catalog *cat = run->cat;
    uint32_t *ord = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *ord);
    if (!ord)
        return kiln_err_set(err, KILN_ENOMEM, "cannot sort %zu record digests", cat->n);
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].split != KILN_SPLIT_NONE)
            ord[n++] = (uint32_t)i;
    if (n > 1)
        qsort_r(ord, n, sizeof *ord, cmp_digest_r, run->digest);
    size_t pairs = 0;
    uint32_t first_a = UINT32_MAX, first_b = UINT32_MAX;
    for (size_t i = 0, j; i < n; i = j) {
        size_t per[KILN_NSPLITS] = {0, 0, 0};
        uint32_t other = UINT32_MAX; /* first item of the run in another split than ord[i]'s */
        for (j = i; j < n && memcmp(run->digest[ord[i]], run->digest[ord[j]],
                                    KILN_RECORD_DIGEST_LEN) == 0;
             j++) {
            per[cat->items[ord[j]].split]++;
            if (other == UINT32_MAX && cat->items[ord[j]].split != cat->items[ord[i]].split)
                other = ord[j];
        }
        pairs += per[0] * per[1] + per[0] * per[2] + per[1] * per[2];
        if (other != UINT32_MAX && ord[i] < first_a) {
            first_a = ord[i];
            first_b = other;
        }
    }
    free(ord);
    run->rep->identical_records = pairs;
    if (!pairs || run->o->allow_identical)
        return KILN_OK;
    char na[2048], nb[2048];
    const struct kiln_item *a = &cat->items[first_a], *b = &cat->items[first_b];
    char more[64] = "";
    if (pairs > 1)
        snprintf(more, sizeof more, " (%zu such pairs in all)", pairs);
    return kiln_err_set(err, KILN_ELEAK,
                        "identical records in two splits: %s (%s) and %s (%s) give the same "
                        "record with this recipe%s; put them in one group, or allow it (the "
                        "audit then lists them)",
                        item_name(a, na, sizeof na), kiln_split_name(a->split),
                        item_name(b, nb, sizeof nb), kiln_split_name(b->split), more);
}

int kiln_stage_pack(struct kiln_catalog *cat, const struct kiln_pack_opts *o,
                    struct kiln_pack_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    const struct kiln_recipe *r = &o->recipe;
    size_t packed = 0;
    /* Checks that need no resources come first, so their early returns leak nothing. */
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        if (it->split != KILN_SPLIT_NONE && it->status != KILN_ST_OK)
            return kiln_err_set(err, KILN_EINVAL, "catalogue row %zu has a split but status %s",
                                i + 1, kiln_status_name(it->status));
        packed += it->split != KILN_SPLIT_NONE;
    }
    rep->skipped = cat->n - packed;
    if (packed == 0)
        return kiln_err_set(err, KILN_EINVAL,
                            "no catalogue row has a split (run kiln split first, or no file was "
                            "usable)");
    struct pack_run run;
    memset(&run, 0, sizeof run);
    run.o = o;
    run.cat = cat;
    run.rep = rep;
    run.pool_fd = -1;
    struct kiln_recipe ints = *r;
    ints.dtype = r->depth == 16 ? KILN_OUT_U16 : KILN_OUT_U8;
    run.int_record = kiln_recipe_record_bytes(&ints);
    if (!run.int_record)
        return kiln_err_set(err, KILN_EINVAL, "the record size of %ux%ux%u overflows", r->width,
                            r->height, r->channels);
    int rc = pthread_mutex_init(&run.mu, NULL);
    if (rc)
        return kiln_err_sys(err, KILN_ENOMEM, rc, "cannot create a lock for the pack");
    /* From here every path ends at the clean-up at the bottom. */
    json_t *manifest = NULL;
    run.delivered = calloc(cat->n ? cat->n : 1, 1);
    run.digest = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *run.digest);
    rc = run.delivered && run.digest
             ? plan_records(&run, err)
             : kiln_err_set(err, KILN_ENOMEM, "cannot plan %zu records", cat->n);
    if (!rc && r->dtype == KILN_OUT_F32 && rep->records[KILN_SPLIT_TRAIN] == 0)
        rc = kiln_err_set(err, KILN_EINVAL,
                          "the training split is empty, so --dtype f32 has no training "
                          "statistics to normalise with (use u8 or u16, or other ratios)");
    if (!rc)
        rc = o->pool ? KILN_OK : kiln_pipeline_prepare_outdir(o->outdir, &rep->debris, err);
    if (!rc)
        rc = open_outputs(&run, err);
    run.prog.total_items = packed;
    if (!rc)
        rc = o->pool ? layout_from_pool(&run, err) : run_workers(&run, err);
    if (!rc)
        rc = check_identical(&run, err);

    json_t *recipe = kiln_recipe_to_json(r);
    char *recipe_text = kiln_json_dump(recipe);
    uint8_t rd[KILN_SHA256_LEN];
    char recipe_sha[KILN_SHA256_HEX] = "";
    if (!rc && !recipe_text)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot serialise the recipe");
    if (!rc)
        rc = kiln_sha256_buf(recipe_text, strlen(recipe_text), rd, err);
    if (!rc)
        kiln_sha256_hex(rd, recipe_sha);
    free(recipe_text);
    json_t *stats_all = json_object();
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    for (int s = 0; s < KILN_NSPLITS && !rc; s++) {
        if (!rep->present[s])
            continue;
        json_t *st = json_object();
        json_t *ch = kiln_stats_to_json(&rep->stats[s], maxv, err);
        if (!ch) {
            json_decref(st);
            rc = err->code;
            break;
        }
        json_object_set_new(st, "used_for_normalisation", json_boolean(s == KILN_SPLIT_TRAIN));
        json_object_set_new(st, "scale", json_string(r->depth == 16 ? "0-65535" : "0-255"));
        json_object_set_new(st, "records", json_integer((json_int_t)rep->records[s]));
        json_object_set_new(st, "channels", ch);
        json_object_set_new(stats_all, kiln_split_name(s), st);
    }
    if (!rc)
        rc = finish_splits(&run, stats_all, recipe_sha, err);
    if (run.pool_fd >= 0) {
        kiln_outfile_abort(&run.pool); /* the pool is scratch: never renamed into place */
        run.pool_fd = -1;
    }
    /* The one place names reach the outputs below: the catalogue's names and the records'
     * strings in their output form (hashed with --hash-paths). Nothing after this point reads
     * o->catalog_record or a name kept elsewhere. The bytes were all read before. */
    struct kiln_names namer;
    kiln_names_init(&namer, r->hash_paths, o->path_key, o->path_key_len);
    json_t *record = NULL;
    if (!rc)
        rc = kiln_names_catalog(&namer, cat, err);
    if (!rc && !(record = kiln_record_public(o->catalog_record, &namer, err)))
        rc = err->code ? err->code : KILN_ENOMEM;
    char *items_path = kiln_pipeline_path(o->outdir, KILN_FILE_ITEMS);
    char *cat_path = kiln_pipeline_path(o->outdir, KILN_FILE_CATALOG);
    if (!rc && (!items_path || !cat_path))
        rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    if (!rc)
        rc = write_items_csv(&run, items_path, err);
    if (!rc)
        rc = kiln_catalog_csv_save(cat_path, cat, err);
    free(items_path);
    free(cat_path);

    const char *names[6];
    size_t nn = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (rep->present[s])
            names[nn++] = kiln_manifest_split_files[s];
    names[nn++] = KILN_FILE_ITEMS;
    names[nn++] = KILN_FILE_CATALOG;
    if (!rc) {
        /* Remove tensor files an earlier run wrote for a split this run does not have. */
        for (int s = 0; s < KILN_NSPLITS; s++)
            if (!rep->present[s]) {
                char *p = kiln_pipeline_path(o->outdir, kiln_manifest_split_files[s]);
                if (p)
                    unlink(p);
                free(p);
            }
        manifest = json_object();
        json_object_set_new(manifest, "manifest_version", json_integer(KILN_MANIFEST_VERSION));
        json_object_set_new(manifest, "kiln_version", json_string(KILN_VERSION));
        json_object_set_new(manifest, "libraries", kiln_library_versions_json());
        json_object_set_new(manifest, "recipe", json_incref(recipe));
        json_object_set_new(manifest, "recipe_sha256", json_string(recipe_sha));
        json_t *split_rec = json_object_get(record, "split");
        json_object_set_new(manifest, "scan", json_incref(json_object_get(record, "scan")));
        json_object_set_new(manifest, "split", json_incref(split_rec));
        json_object_set_new(manifest, "classes", classes_json(cat));
        json_t *counts = json_object();
        for (int s = 0; s < KILN_NSPLITS; s++) {
            if (!rep->present[s])
                continue;
            json_t *c = json_object();
            json_object_set_new(c, "records", json_integer((json_int_t)rep->records[s]));
            json_object_set_new(c, "per_class", class_counts(cat, s));
            json_object_set_new(counts, kiln_split_name(s), c);
        }
        json_object_set_new(manifest, "counts", counts);
        json_object_set_new(manifest, "statistics", json_incref(stats_all));
        json_object_set_new(manifest, "dct_reduced_items", json_integer((json_int_t)rep->dct_reduced));
        /* The audit of the records as packed: their digests, and the near-duplicate links
         * (the split's in kiln build, else checked here). */
        struct kiln_nearlinks own;
        memset(&own, 0, sizeof own);
        const struct kiln_nearlinks *near = o->near;
        if (!near) {
            rc = kiln_stage_near(cat, &o->near_params, o->jobs, &own, err);
            near = &own;
        }
        struct kiln_audit audit;
        if (!rc)
            rc = kiln_audit_run(cat, near, (const uint8_t(*)[KILN_RECORD_DIGEST_LEN])run.digest,
                                rep->present, &audit, err);
        kiln_nearlinks_free(&own);
        if (!rc) {
            json_object_set_new(manifest, "audit", kiln_audit_record(&audit, cat));
            rep->leaks = audit.nleaks;
            rep->near_leaks = audit.per_kind[KILN_LEAK_NEAR];
            rep->missing_classes = audit.missing_count;
            kiln_audit_free(&audit);
        }
        json_t *outputs = json_array();
        json_object_set_new(manifest, "outputs", outputs);
        json_object_set_new(manifest, "skipped", skipped_json(cat));
        struct out_hash hashes[6];
        for (size_t i = 0; i < nn && !rc; i++) {
            hashes[i].name = names[i];
            rc = hash_output(o->outdir, &hashes[i], err);
            if (rc)
                break;
            json_t *ob = json_object();
            json_object_set_new(ob, "name", json_string(hashes[i].name));
            json_object_set_new(ob, "bytes", json_integer((json_int_t)hashes[i].size));
            json_object_set_new(ob, "sha256", json_string(hashes[i].hex));
            json_array_append_new(outputs, ob);
        }
        char *mp = kiln_pipeline_path(o->outdir, KILN_FILE_MANIFEST);
        if (!rc)
            rc = mp ? kiln_json_save(mp, manifest, err) : kiln_err_set(err, KILN_ENOMEM, "oom");
        free(mp);
        if (!rc) {
            hashes[nn].name = KILN_FILE_MANIFEST;
            rc = hash_output(o->outdir, &hashes[nn], err);
        }
        if (!rc)
            rc = write_sums(o->outdir, hashes, nn + 1, err);
    }
    if (rc)
        abort_outputs(&run);
    json_decref(record);
    json_decref(manifest);
    json_decref(recipe);
    json_decref(stats_all);
    for (int s = 0; s < KILN_NSPLITS; s++)
        free(run.order[s]);
    free(run.record_of);
    free(run.delivered);
    free(run.digest);
    pthread_mutex_destroy(&run.mu);
    return rc;
}
