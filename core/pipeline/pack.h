/* Inside the pack stage, shared by its parts: stage_pack.c checks the catalogue, plans the
 * record order and opens the outputs; pack_read.c fetches the bytes; pack_work.c turns them
 * into records (or lays out build's prepared ones) and sums the statistics; pack_finish.c
 * completes the tensor files and writes items.csv, catalog.csv, manifest.json and SHA256SUMS.
 * Not for use outside core/pipeline/pack*.c and stage_pack.c. */
#ifndef KILN_PACK_H
#define KILN_PACK_H

#include <pthread.h>
#include <stdbool.h>
#include <stdint.h>

#include "../../formats/files/kten.h"
#include "../../formats/files/manifest.h"
#include "../../formats/files/outfile.h"
#include "queue.h"
#include "stage_pack.h"

#define NO_RECORD UINT32_MAX

/* Bytes of one item, from the reader to a worker. */
struct pack_job {
    uint32_t item;
    uint8_t *data;
    size_t size;
};

/* One pack: planned by stage_pack.c, filled by the parts. */
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
    struct kiln_manifest m; /* what pack_finish.c writes into the metadata and manifest.json */
};

static inline void kiln_pack_fail(struct pack_run *run, const struct kiln_err *e)
{
    pthread_mutex_lock(&run->mu);
    if (!run->failed) {
        run->failed = true;
        run->err = *e;
    }
    pthread_mutex_unlock(&run->mu);
    kiln_queue_close(&run->q);
}

static inline bool kiln_pack_failed(struct pack_run *run)
{
    pthread_mutex_lock(&run->mu);
    bool f = run->failed;
    pthread_mutex_unlock(&run->mu);
    return f;
}

/* pack_read.c: the reader thread (arg: the run): queues every packed item's bytes, each
 * archive in one pass, and closes the queue. */
void *kiln_pack_read(void *run);
/* The name an item's bytes are read under, for messages: "source/relname". */
const char *kiln_pack_item_name(const struct kiln_item *it, char *buf, size_t len);

/* pack_work.c: every record written (decoded by --jobs workers, or copied from build's record
 * pool) and run->rep's statistics summed. */
int kiln_pack_work(struct pack_run *run, struct kiln_err *err);
/* No record written to one split may be identical to a record in another (docs/split.md): with
 * the packed items sorted by record digest, each run of equal digests must lie in one split.
 * Returns KILN_ELEAK naming the first such pair (its smallest item and the first item of the
 * run in another split) unless o->allow_identical; counts the pairs either way. */
int kiln_pack_check_identical(struct pack_run *run, struct kiln_err *err);

/* pack_finish.c: the tensor files completed (f32 conversion, labels, metadata), then items.csv,
 * catalog.csv, the audit, manifest.json and SHA256SUMS, with every name in its output form. */
int kiln_pack_finish(struct pack_run *run, struct kiln_err *err);

#endif
