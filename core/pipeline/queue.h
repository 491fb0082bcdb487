/* A blocking FIFO bounded both in entries and in bytes: the reader of source files pushes,
 * decode workers pop, so memory in flight stays bounded whatever the data set size. */
#ifndef KILN_QUEUE_H
#define KILN_QUEUE_H

#include <pthread.h>
#include <stdbool.h>
#include <stddef.h>

#include "../err.h"

struct kiln_queue {
    pthread_mutex_t mu;
    pthread_cond_t not_empty, not_full;
    void **slots;
    size_t *sizes;
    size_t cap, head, count;
    size_t bytes, max_bytes;
    bool closed;
};

/* File bytes waiting between a reader and its workers, unless a stage is told otherwise: 1 MiB
 * per worker, at least 2 MiB and at most 64 MiB. The reader is always a file ahead (it reads
 * the next file while one waits) and from the page cache it reads far faster than the decoders
 * consume, so a deeper queue bought no speed on the benchmark set, warm or cold, while every
 * MiB of it is resident (16 MiB before: build's peak RSS 46 -> 31 MiB; docs/performance.md).
 * A file larger than the budget is still admitted into an empty queue. */
static inline size_t kiln_queue_bytes_for(unsigned jobs)
{
    const size_t mib = (size_t)1 << 20;
    return jobs > 2 ? (jobs < 64 ? jobs : 64) * mib : 2 * mib;
}

int kiln_queue_init(struct kiln_queue *q, size_t max_entries, size_t max_bytes,
                    struct kiln_err *err);
void kiln_queue_destroy(struct kiln_queue *q);

/* Blocks while the queue is full. An entry larger than max_bytes is still accepted once the
 * queue is empty, so a single huge file cannot dead-lock the pipeline. Returns false (and does
 * not take the entry) if the queue was closed. */
bool kiln_queue_push(struct kiln_queue *q, void *entry, size_t bytes);

/* Blocks until an entry is available; returns NULL once the queue is closed and drained. */
void *kiln_queue_pop(struct kiln_queue *q);

/* No more pushes; poppers drain what is left. */
void kiln_queue_close(struct kiln_queue *q);

#endif
