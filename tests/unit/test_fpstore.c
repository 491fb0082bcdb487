/* Unit tests for formats/files/fpstore: fingerprints put from several threads come back byte
 * for byte from their slots, the scratch file leaves no name behind, and a folder that refuses
 * it falls back to $TMPDIR, with a message naming both when that fails too. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <dirent.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/fpstore.h"

#define THREADS 4
#define PER_THREAD 500

static void fill(struct kiln_nearfp *fp, uint32_t seed)
{
    memset(fp, 0, sizeof *fp);
    uint64_t s = seed * UINT64_C(0x9e3779b97f4a7c15) + 1;
    fp->hash = (s ^ (s >> 29)) & ~UINT64_C(1);
    fp->centre = (s * 31 + 7) & ~UINT64_C(1);
    fp->info = (uint16_t)(8 + seed % 1000);
    if (seed % 2) {
        fp->chroma_scale = seed + 1;
        for (int i = 0; i < 16; i++) {
            fp->chroma[i][0] = (int8_t)((int)(seed + (uint32_t)i) % 255 - 127);
            fp->chroma[i][1] = (int8_t)(i - 8);
        }
    }
    for (int i = 0; i < 256; i++)
        fp->thumb[i] = (uint8_t)(seed * 7 + (uint32_t)i);
}

struct writer {
    struct kiln_fpstore *s;
    uint32_t first;
    uint32_t slot[PER_THREAD];
    int rc;
};

static void *put_many(void *arg)
{
    struct writer *w = arg;
    struct kiln_err err;
    w->rc = KILN_OK;
    for (uint32_t k = 0; k < PER_THREAD && !w->rc; k++) {
        struct kiln_nearfp fp;
        fill(&fp, w->first + k);
        w->rc = kiln_fpstore_put(w->s, &fp, &w->slot[k], &err);
    }
    return NULL;
}

static size_t entries(const char *dir)
{
    DIR *d = opendir(dir);
    assert_non_null(d);
    size_t n = 0;
    struct dirent *e;
    while ((e = readdir(d)))
        n += strcmp(e->d_name, ".") != 0 && strcmp(e->d_name, "..") != 0;
    closedir(d);
    return n;
}

static void test_threads_round_trip(void **state)
{
    (void)state;
    char dir[] = "/tmp/kiln-test-fpstore-XXXXXX";
    assert_non_null(mkdtemp(dir));
    struct kiln_fpstore *s;
    struct kiln_err err = {0};
    assert_int_equal(kiln_fpstore_open(&s, dir, &err), KILN_OK);
    assert_int_equal(entries(dir), 0); /* an unnamed file (or one removed at once) */
    struct writer w[THREADS];
    pthread_t tid[THREADS];
    for (int t = 0; t < THREADS; t++) {
        w[t].s = s;
        w[t].first = (uint32_t)t * PER_THREAD;
        assert_int_equal(pthread_create(&tid[t], NULL, put_many, &w[t]), 0);
    }
    for (int t = 0; t < THREADS; t++)
        pthread_join(tid[t], NULL);
    assert_int_equal(kiln_fpstore_count(s), THREADS * PER_THREAD);
    uint8_t *seen = calloc(THREADS * PER_THREAD, 1);
    assert_non_null(seen);
    for (int t = 0; t < THREADS; t++) {
        assert_int_equal(w[t].rc, KILN_OK);
        for (uint32_t k = 0; k < PER_THREAD; k++) {
            struct kiln_nearfp want, got;
            uint8_t a[KILN_NEARFP_BYTES], b[KILN_NEARFP_BYTES];
            fill(&want, w[t].first + k);
            assert_true(w[t].slot[k] < THREADS * PER_THREAD && !seen[w[t].slot[k]]);
            seen[w[t].slot[k]] = 1;
            assert_int_equal(kiln_fpstore_get(s, w[t].slot[k], &got, &err), KILN_OK);
            kiln_nearfp_encode(&want, a);
            kiln_nearfp_encode(&got, b);
            assert_memory_equal(a, b, KILN_NEARFP_BYTES);
        }
    }
    /* the raw read of a range is the encoded slots in order */
    uint8_t raw[3 * KILN_NEARFP_BYTES];
    assert_int_equal(kiln_fpstore_read(s, 10, 3, raw, &err), KILN_OK);
    for (uint32_t k = 0; k < 3; k++) {
        struct kiln_nearfp fp;
        uint8_t e[KILN_NEARFP_BYTES];
        assert_int_equal(kiln_fpstore_get(s, 10 + k, &fp, &err), KILN_OK);
        kiln_nearfp_encode(&fp, e);
        assert_memory_equal(raw + k * KILN_NEARFP_BYTES, e, KILN_NEARFP_BYTES);
    }
    /* a slot never handed out */
    struct kiln_nearfp fp;
    assert_int_equal(kiln_fpstore_get(s, THREADS * PER_THREAD, &fp, &err), KILN_EINTERNAL);
    free(seen);
    kiln_fpstore_close(s);
    assert_int_equal(entries(dir), 0);
    assert_int_equal(rmdir(dir), 0);
}

static void test_fallback(void **state)
{
    (void)state;
    char tmp[] = "/tmp/kiln-test-fpstore-tmp-XXXXXX";
    assert_non_null(mkdtemp(tmp));
    const char *old = getenv("TMPDIR");
    char *saved = old ? strdup(old) : NULL;
    setenv("TMPDIR", tmp, 1);
    struct kiln_fpstore *s;
    struct kiln_err err = {0};
    /* a folder that does not exist: the store goes to $TMPDIR and works */
    assert_int_equal(kiln_fpstore_open(&s, "/nonexistent/kiln-folder", &err), KILN_OK);
    struct kiln_nearfp in, out;
    fill(&in, 5);
    uint32_t slot;
    assert_int_equal(kiln_fpstore_put(s, &in, &slot, &err), KILN_OK);
    assert_int_equal(kiln_fpstore_get(s, slot, &out, &err), KILN_OK);
    assert_int_equal(out.hash, in.hash);
    assert_int_equal(entries(tmp), 0);
    kiln_fpstore_close(s);
    /* neither place works: an error naming both */
    setenv("TMPDIR", "/nonexistent/kiln-tmp", 1);
    assert_int_equal(kiln_fpstore_open(&s, "/nonexistent/kiln-folder", &err), KILN_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent/kiln-folder"));
    assert_non_null(strstr(err.msg, "/nonexistent/kiln-tmp"));
    assert_null(s);
    if (saved)
        setenv("TMPDIR", saved, 1);
    else
        unsetenv("TMPDIR");
    free(saved);
    assert_int_equal(rmdir(tmp), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_threads_round_trip),
        cmocka_unit_test(test_fallback),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
