/* Mutex-and-condition bounded queue. */
#include "queue.h"

#include <stdlib.h>

#include "../checked.h"

int kiln_queue_init(struct kiln_queue *q, size_t max_entries, size_t max_bytes,
                    struct kiln_err *err)
{
    q->slots = kiln_alloc_array(max_entries, sizeof *q->slots);
    q->sizes = kiln_alloc_array(max_entries, sizeof *q->sizes);
    if (!q->slots || !q->sizes) {
        free(q->slots);
        free(q->sizes);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a work queue");
    }
    pthread_mutex_init(&q->mu, NULL);
    pthread_cond_init(&q->not_empty, NULL);
    pthread_cond_init(&q->not_full, NULL);
    q->cap = max_entries;
    q->head = q->count = q->bytes = 0;
    q->max_bytes = max_bytes;
    q->closed = false;
    return KILN_OK;
}

void kiln_queue_destroy(struct kiln_queue *q)
{
    pthread_mutex_destroy(&q->mu);
    pthread_cond_destroy(&q->not_empty);
    pthread_cond_destroy(&q->not_full);
    free(q->slots);
    free(q->sizes);
    q->slots = NULL;
    q->sizes = NULL;
}

bool kiln_queue_push(struct kiln_queue *q, void *entry, size_t bytes)
{
    pthread_mutex_lock(&q->mu);
    while (!q->closed &&
           (q->count == q->cap || (q->count > 0 && q->bytes + bytes > q->max_bytes)))
        pthread_cond_wait(&q->not_full, &q->mu);
    if (q->closed) {
        pthread_mutex_unlock(&q->mu);
        return false;
    }
    size_t tail = (q->head + q->count) % q->cap;
    q->slots[tail] = entry;
    q->sizes[tail] = bytes;
    q->count++;
    q->bytes += bytes;
    pthread_cond_signal(&q->not_empty);
    pthread_mutex_unlock(&q->mu);
    return true;
}

void *kiln_queue_pop(struct kiln_queue *q)
{
    pthread_mutex_lock(&q->mu);
    while (q->count == 0 && !q->closed)
        pthread_cond_wait(&q->not_empty, &q->mu);
    void *entry = NULL;
    if (q->count) {
        entry = q->slots[q->head];
        q->bytes -= q->sizes[q->head];
        q->head = (q->head + 1) % q->cap;
        q->count--;
        pthread_cond_broadcast(&q->not_full);
    }
    pthread_mutex_unlock(&q->mu);
    return entry;
}

void kiln_queue_close(struct kiln_queue *q)
{
    pthread_mutex_lock(&q->mu);
    q->closed = true;
    pthread_cond_broadcast(&q->not_empty);
    pthread_cond_broadcast(&q->not_full);
    pthread_mutex_unlock(&q->mu);
}
