/* The decode limit for the benchmark: reads and decodes every image file under a folder with
 * kiln's own decoders, at the JPEG DCT reduction pack would use for the given size, on N
 * threads, and does nothing else. kiln pack and build are measured against this.
 *
 *   kiln-bench-decode DIR WxH JOBS [--full] [--trusted] [--library]
 *
 * --full: no DCT reduction, as scan decodes. --trusted: skip the formats' own checksums (PNG
 * CRC-32 and Adler-32), as pack does once a file's SHA-256 matched; without it, checksums are
 * verified, as scan and build must. --library: the image libraries' own code only (libpng with
 * zlib for PNG image data instead of kiln's libdeflate path): the limit "with the standard
 * libraries" the benchmark also reports. */
#include <ftw.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../../core/prepare.h"
#include "../../formats/decoders/decoder.h"
#include "../../formats/sources/source.h"

struct limit_files {
    char **path;
    size_t n, cap;
};

static struct limit_files *limit_collect; /* nftw has no context argument; tool code only */

static int limit_add(const char *p, const struct stat *st, int type, struct FTW *ftw)
{
    (void)st;
    (void)ftw;
    if (type != FTW_F)
        return 0;
    struct limit_files *f = limit_collect;
    if (f->n == f->cap) {
        size_t cap = f->cap ? f->cap * 2 : 1024;
        char **np = realloc(f->path, cap * sizeof *np);
        if (!np)
            return 1;
        f->path = np;
        f->cap = cap;
    }
    f->path[f->n] = strdup(p);
    return f->path[f->n++] ? 0 : 1;
}

struct limit_run {
    struct limit_files files;
    struct kiln_recipe recipe;
    int full;    /* no DCT reduction, as scan decodes */
    int trusted; /* skip the formats' own checksums, as pack does after its SHA-256 check */
    int library; /* the libraries' own decoding only */
    atomic_size_t next, decoded, failed;
};

static void *limit_worker(void *arg)
{
    struct limit_run *run = arg;
    struct kiln_image img = {0};
    for (;;) {
        size_t i = atomic_fetch_add(&run->next, 1);
        if (i >= run->files.n)
            break;
        uint8_t *data;
        size_t size;
        struct kiln_err err;
        if (kiln_source_read_file(run->files.path[i], 0, &data, &size, &err) != 0)
            continue;
        const struct kiln_decoder *dec = kiln_decoder_find(data, size);
        struct kiln_image_info info;
        int rc = dec ? dec->read_info(data, size, NULL, &info, &err) : -1;
        if (rc == 0) {
            uint32_t d = run->full ? 1
                                   : kiln_prep_choose_denom(&run->recipe, info.width, info.height,
                                                            info.orientation, info.max_scale_denom);
            rc = kiln_decoded_shape(&info, d, &img, &err);
            info.trusted = (uint32_t)run->trusted;
            info.library_only = (uint32_t)run->library;
            if (rc == 0)
                rc = dec->decode(data, size, &info, d, &img, &err);
        }
        atomic_fetch_add(rc == 0 ? &run->decoded : &run->failed, 1);
        free(data);
    }
    kiln_image_free(&img);
    return NULL;
}

int main(int argc, char **argv)
{
    if (argc < 4) {
        fprintf(stderr, "usage: kiln-bench-decode DIR WxH JOBS [--full] [--trusted] [--library]\n");
        return 2;
    }
    struct limit_run run;
    memset(&run, 0, sizeof run);
    kiln_recipe_defaults(&run.recipe);
    struct kiln_err err;
    if (kiln_recipe_set(&run.recipe, "size", argv[2], &err) || kiln_recipe_finish(&run.recipe, &err)) {
        fprintf(stderr, "kiln-bench-decode: error: %s\n", err.msg);
        return 2;
    }
    int jobs = atoi(argv[3]);
    for (int a = 4; a < argc; a++) {
        if (strcmp(argv[a], "--full") == 0)
            run.full = 1;
        else if (strcmp(argv[a], "--trusted") == 0)
            run.trusted = 1;
        else if (strcmp(argv[a], "--library") == 0)
            run.library = 1;
        else
            return 2;
    }
    if (jobs < 1 || jobs > 256)
        return 2;
    limit_collect = &run.files;
    if (nftw(argv[1], limit_add, 32, FTW_PHYS) != 0) {
        fprintf(stderr, "kiln-bench-decode: error: cannot list %s\n", argv[1]);
        return 1;
    }
    struct timespec t0, t1;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    pthread_t tid[256];
    for (int j = 0; j < jobs; j++)
        pthread_create(&tid[j], NULL, limit_worker, &run);
    for (int j = 0; j < jobs; j++)
        pthread_join(tid[j], NULL);
    clock_gettime(CLOCK_MONOTONIC, &t1);
    double s = (double)(t1.tv_sec - t0.tv_sec) + (double)(t1.tv_nsec - t0.tv_nsec) / 1e9;
    printf("%.4f s  %zu decoded  %zu not decodable\n", s, (size_t)run.decoded, (size_t)run.failed);
    for (size_t i = 0; i < run.files.n; i++)
        free(run.files.path[i]);
    free(run.files.path);
    return 0;
}
