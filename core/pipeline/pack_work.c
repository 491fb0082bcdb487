/* Pack's work: --jobs workers verify each item's SHA-256, decode it (at a DCT reduction when
 * allowed), prepare the record and pwrite it at its planned offset, each summing exact
 * statistics that are merged at the end; for kiln build, the records prepared during scan are
 * copied from the record pool instead. Nothing depends on scheduling. */
#include <stdlib.h>
#include <string.h>

#include "../../formats/decoders/decoder.h"
#include "../prepare.h"
#include "../sha256.h"
#include "pack.h"
#include "record_pool.h"

struct pack_worker {
    struct pack_run *run;
    struct kiln_prep prep;
    struct kiln_image img;
    uint8_t *record;
    struct kiln_stats stats[KILN_NSPLITS];
    size_t dct_reduced;
    struct kiln_err row_err; /* a failure of the record chain while a decoder hands rows over */
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

/* A picture whose decode would take more than this goes row by row when its decoder and the
 * recipe allow (kiln_prep_streams): memory then follows what the resampler keeps, not the
 * picture (a 20000 x 20000 RGBA PNG: 1.6 GB whole). Below it, whole decodes are faster. */
#define PACK_ROWS_ABOVE ((uint64_t)32 << 20)

static int put_row(void *ctx, uint32_t y, const void *pixels)
{
    struct pack_worker *w = ctx;
    return kiln_prep_stream_row(&w->prep, y, pixels, &w->row_err);
}

/* The record of a large picture from its rows; KILN_DECODE_ROWS_DECLINED when the decoder
 * cannot give this file so. */
static int prepare_by_rows(struct pack_worker *w, const struct kiln_decoder *dec,
                           const struct pack_job *j, const struct kiln_image_info *info,
                           const struct kiln_prep_source *src, struct kiln_err *e)
{
    const struct kiln_recipe *r = &w->run->o->recipe;
    int rc = kiln_prep_stream_begin(&w->prep, r, src, info->channels, info->depth, e);
    if (rc)
        return rc;
    kiln_err_clear(&w->row_err);
    rc = dec->decode_rows(j->data, j->size, info, put_row, w, e);
    if (rc && rc != KILN_DECODE_ROWS_DECLINED && w->row_err.code)
        *e = w->row_err; /* the preparation's failure, not the decoder's */
    if (!rc)
        rc = kiln_prep_stream_end(&w->prep, w->record, e);
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
                            kiln_pack_item_name(it, name, sizeof name));
    const struct kiln_decoder *dec = kiln_decoder_find(j->data, j->size);
    if (!dec)
        return kiln_err_set(e, KILN_ECORRUPT, "%s: no decoder takes it any more",
                            kiln_pack_item_name(it, name, sizeof name));
    struct kiln_image_info info;
    const struct kiln_decode_limits lim = {r->max_pixels, r->max_side};
    rc = dec->read_info(j->data, j->size, &lim, &info, e);
    if (!rc && ((uint64_t)info.width * info.height > r->max_pixels || info.width > r->max_side ||
                info.height > r->max_side || !info.width || !info.height))
        rc = kiln_err_set(e, KILN_ETOOLARGE, "%ux%u is outside the limits", info.width,
                          info.height);
    uint32_t denom = 1;
    if (!rc)
        denom = kiln_prep_choose_denom(r, info.width, info.height, info.orientation,
                                       info.max_scale_denom);
    info.trusted = 1; /* the SHA-256 check above passed */
    const struct kiln_prep_source src = {info.width, info.height, denom, info.orientation, false};
    bool whole = true;
    if (!rc && dec->decode_rows && kiln_prep_streams(r, &src) &&
        (uint64_t)info.width * info.height * info.channels * (info.depth / 8) > PACK_ROWS_ABOVE) {
        rc = prepare_by_rows(w, dec, j, &info, &src, e);
        whole = rc == KILN_DECODE_ROWS_DECLINED;
        if (whole)
            rc = KILN_OK;
    }
    if (!rc && whole)
        rc = kiln_decoded_shape(&info, denom, &w->img, e);
    if (!rc && whole)
        rc = dec->decode(j->data, j->size, &info, denom, &w->img, e);
    if (!rc && whole)
        rc = kiln_prep_record(&w->prep, r, &w->img, &src, w->record, e);
    if (rc) {
        kiln_err_prefix(e, "%s", kiln_pack_item_name(it, name, sizeof name));
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
        return kiln_outfile_write_at(&run->pool, w->record, run->int_record,
                                     run->pool_base[s] + off, e);
    return kiln_kten_write(&run->kten[s], 0, off, w->record, run->int_record, e);
}

static void *worker_main(void *arg)
{
    struct pack_worker *w = arg;
    struct pack_run *run = w->run;
    struct pack_job *j;
    while ((j = kiln_queue_pop(&run->q)) != NULL) {
        if (!kiln_pack_failed(run)) {
            struct kiln_err e;
            kiln_err_clear(&e);
            int rc = pack_one(w, j, &e);
            if (rc)
                kiln_pack_fail(run, &e);
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
    const size_t qbytes = o->queue_bytes ? o->queue_bytes : kiln_queue_bytes_for(jobs);
    int rc = kiln_queue_init(&run->q, 1024, qbytes, err);
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
    bool reader_ok = started > 0 && pthread_create(&reader, NULL, kiln_pack_read, run) == 0;
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

int kiln_pack_work(struct pack_run *run, struct kiln_err *err)
{
    return run->o->pool ? layout_from_pool(run, err) : run_workers(run, err);
}
