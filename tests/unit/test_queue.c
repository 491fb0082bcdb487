/* Unit tests for core/queue: FIFO order, the entry and byte bounds that block producers, and
 * close-then-drain. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <pthread.h>
#include <stdatomic.h>
#include <time.h>

#include "../../core/pipeline/queue.h"

static void pause_ms(long ms)
{
    struct timespec ts = {ms / 1000, (ms % 1000) * 1000000L};
    nanosleep(&ts, NULL);
}

/* First in, first out (the definition of a FIFO queue, common practice), across the wrap of
 * the ring buffer. */
static void test_fifo_order(void **state)
{
    (void)state;
    struct kiln_queue q;
    struct kiln_err err = {0};
    assert_int_equal(kiln_queue_init(&q, 4, 1000, &err), KILN_OK);
    static int v[64];
    int next_in = 0, next_out = 0;
    /* two entries ahead, then push 2, pop 2 repeatedly (never more than 4 in the queue): the
     * ring wraps many times */
    assert_true(kiln_queue_push(&q, &v[next_in++], 10));
    assert_true(kiln_queue_push(&q, &v[next_in++], 10));
    for (int round = 0; round < 31; round++) {
        for (int k = 0; k < 2; k++)
            assert_true(kiln_queue_push(&q, &v[next_in++], 10));
        for (int k = 0; k < 2; k++)
            assert_ptr_equal(kiln_queue_pop(&q), &v[next_out++]);
    }
    while (next_out < next_in)
        assert_ptr_equal(kiln_queue_pop(&q), &v[next_out++]);
    assert_int_equal(q.count, 0);
    assert_int_equal(q.bytes, 0);
    kiln_queue_destroy(&q);
}

struct producer {
    struct kiln_queue *q;
    void *entry;
    size_t bytes;
    atomic_int started, done;
    bool result;
};

static void *produce(void *arg)
{
    struct producer *p = arg;
    atomic_store(&p->started, 1);
    p->result = kiln_queue_push(p->q, p->entry, p->bytes);
    atomic_store(&p->done, 1);
    return NULL;
}

static void start_producer(pthread_t *t, struct producer *p)
{
    assert_int_equal(pthread_create(t, NULL, produce, p), 0);
    while (!atomic_load(&p->started))
        pause_ms(1);
    pause_ms(100); /* give a wrongly non-blocking push time to finish; no speed is asserted */
}

/* A push that would take the queue past max_bytes waits until a consumer pops. */
static void test_byte_bound_blocks(void **state)
{
    (void)state;
    struct kiln_queue q;
    struct kiln_err err = {0};
    assert_int_equal(kiln_queue_init(&q, 16, 100, &err), KILN_OK);
    int a, b;
    assert_true(kiln_queue_push(&q, &a, 60));
    struct producer p = {&q, &b, 60, 0, 0, false};
    pthread_t t;
    start_producer(&t, &p);
    assert_int_equal(atomic_load(&p.done), 0); /* 60 + 60 > 100: still waiting */
    pthread_mutex_lock(&q.mu);
    assert_int_equal(q.count, 1);
    assert_int_equal(q.bytes, 60);
    pthread_mutex_unlock(&q.mu);
    assert_ptr_equal(kiln_queue_pop(&q), &a);
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_true(p.result);
    assert_ptr_equal(kiln_queue_pop(&q), &b);
    /* an entry larger than the bound is still taken by an empty queue (queue.h) */
    int big;
    assert_true(kiln_queue_push(&q, &big, 500));
    assert_ptr_equal(kiln_queue_pop(&q), &big);
    kiln_queue_destroy(&q);
}

/* A full queue (entry bound) blocks the producer the same way. */
static void test_entry_bound_blocks(void **state)
{
    (void)state;
    struct kiln_queue q;
    struct kiln_err err = {0};
    assert_int_equal(kiln_queue_init(&q, 2, 1 << 20, &err), KILN_OK);
    int v[3];
    assert_true(kiln_queue_push(&q, &v[0], 1));
    assert_true(kiln_queue_push(&q, &v[1], 1));
    struct producer p = {&q, &v[2], 1, 0, 0, false};
    pthread_t t;
    start_producer(&t, &p);
    assert_int_equal(atomic_load(&p.done), 0);
    assert_ptr_equal(kiln_queue_pop(&q), &v[0]);
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_true(p.result);
    assert_ptr_equal(kiln_queue_pop(&q), &v[1]);
    assert_ptr_equal(kiln_queue_pop(&q), &v[2]);
    kiln_queue_destroy(&q);
}

struct consumer {
    struct kiln_queue *q;
    atomic_int started;
    void *got;
};

static void *consume(void *arg)
{
    struct consumer *c = arg;
    atomic_store(&c->started, 1);
    c->got = kiln_queue_pop(c->q);
    return NULL;
}

/* After close, poppers drain what is left and then get NULL; pushes are refused; a blocked
 * producer and a blocked consumer are both released. */
static void test_close_drains(void **state)
{
    (void)state;
    struct kiln_queue q;
    struct kiln_err err = {0};
    assert_int_equal(kiln_queue_init(&q, 3, 1000, &err), KILN_OK);
    int v[4];
    for (int i = 0; i < 3; i++)
        assert_true(kiln_queue_push(&q, &v[i], 5));
    struct producer p = {&q, &v[3], 5, 0, 0, true};
    pthread_t t;
    start_producer(&t, &p); /* blocked: the queue is full */
    kiln_queue_close(&q);
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_false(p.result); /* closed while waiting: not taken */
    assert_false(kiln_queue_push(&q, &v[3], 5));
    for (int i = 0; i < 3; i++)
        assert_ptr_equal(kiln_queue_pop(&q), &v[i]);
    assert_null(kiln_queue_pop(&q));
    assert_null(kiln_queue_pop(&q));
    kiln_queue_destroy(&q);

    /* a consumer waiting on an empty open queue gets the next entry pushed */
    assert_int_equal(kiln_queue_init(&q, 3, 1000, &err), KILN_OK);
    struct consumer c = {&q, 0, NULL};
    assert_int_equal(pthread_create(&t, NULL, consume, &c), 0);
    while (!atomic_load(&c.started))
        pause_ms(1);
    pause_ms(50);
    assert_true(kiln_queue_push(&q, &v[2], 5));
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_ptr_equal(c.got, &v[2]);
    /* and a consumer waiting on an empty queue wakes with NULL at close */
    c = (struct consumer){&q, 0, &v[0]};
    assert_int_equal(pthread_create(&t, NULL, consume, &c), 0);
    while (!atomic_load(&c.started))
        pause_ms(1);
    pause_ms(50);
    kiln_queue_close(&q);
    assert_int_equal(pthread_join(t, NULL), 0);
    assert_null(c.got);
    kiln_queue_destroy(&q);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fifo_order),
        cmocka_unit_test(test_byte_bound_blocks),
        cmocka_unit_test(test_entry_bound_blocks),
        cmocka_unit_test(test_close_drains),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
