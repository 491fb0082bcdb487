/* Benchmark (not a test): the cost of kiln's resampler (core/resize.c) on one thread, in
 * milliseconds per input megapixel, for every filter on two typical reductions:
 *
 *   4000 x 3000 RGB 8-bit   -> 224 x 224   (a camera photo to a network input)
 *   1024 x 1024 grey 16-bit -> 256 x 256   (a microscope frame)
 *
 * Each figure is the median of 5 runs timed with clock_gettime(CLOCK_MONOTONIC). "warm" reuses
 * the resampler, whose coefficient tables stay cached (consecutive images of one size, as in
 * pack); "cold" starts from a fresh resampler each run (tables and buffers built again). The
 * input is a deterministic smooth pattern; the work does not depend on the pixel values.
 *
 *   kiln-bench-resize [RUNS]      (default 5)
 *
 * Speed belongs in benchmarks only, never in a timed test (DEVELOPERS.md). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../../core/err.h"
#include "../../core/image.h"
#include "../../core/resize.h"

#define MAX_RUNS 101

static double now_ms(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec * 1e3 + (double)ts.tv_nsec / 1e6;
}

static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

static double median(double *v, int n)
{
    qsort(v, (size_t)n, sizeof *v, cmp_double);
    return n % 2 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2;
}

/* Smooth gradients with a little integer "texture", so no sample path is special-cased. */
static void fill(struct kiln_image *img)
{
    const uint32_t maxv = img->depth == 16 ? 65535u : 255u;
    for (uint32_t y = 0; y < img->height; y++)
        for (uint32_t x = 0; x < img->width; x++)
            for (uint32_t c = 0; c < img->channels; c++) {
                uint32_t v = (x * (c + 1) * maxv / img->width + y * maxv / img->height +
                              ((x * 7919u + y * 104729u + c * 31u) % 97u) * maxv / 970u) %
                             (maxv + 1);
                size_t i = ((size_t)y * img->width + x) * img->channels + c;
                if (img->depth == 16)
                    ((uint16_t *)img->data)[i] = (uint16_t)v;
                else
                    ((uint8_t *)img->data)[i] = (uint8_t)v;
            }
}

/* One resize, timed; exits on error (a benchmark has no way to carry on). */
static double timed_resize(struct kiln_resizer *rs, const struct kiln_image *in, uint32_t ow,
                           uint32_t oh, int filter, struct kiln_image *out)
{
    struct kiln_err err = {0};
    double t0 = now_ms();
    if (kiln_resize(rs, in, NULL, ow, oh, filter, out, &err)) {
        fprintf(stderr, "kiln-bench-resize: %s\n", err.msg);
        exit(1);
    }
    return now_ms() - t0;
}

static void bench(const char *label, uint32_t w, uint32_t h, uint32_t ch, uint32_t depth,
                  uint32_t ow, uint32_t oh, int runs)
{
    struct kiln_err err = {0};
    struct kiln_image in = {0}, out = {0};
    if (kiln_image_reshape(&in, w, h, ch, depth, &err)) {
        fprintf(stderr, "kiln-bench-resize: %s\n", err.msg);
        exit(1);
    }
    fill(&in);
    const double mpix = (double)w * h / 1e6;
    printf("%s: %ux%u, %u channel(s), %u-bit -> %ux%u (%.2f input megapixels)\n", label, w, h,
           ch, depth, ow, oh, mpix);
    printf("  %-9s %12s %12s %12s\n", "filter", "warm ms", "warm ms/MP", "cold ms/MP");
    for (int f = 0; f < KILN_FILTER_COUNT; f++) {
        double warm[MAX_RUNS], cold[MAX_RUNS];
        struct kiln_resizer rs;
        kiln_resizer_init(&rs);
        timed_resize(&rs, &in, ow, oh, f, &out); /* builds the tables, touches the buffers */
        for (int r = 0; r < runs; r++)
            warm[r] = timed_resize(&rs, &in, ow, oh, f, &out);
        kiln_resizer_free(&rs);
        for (int r = 0; r < runs; r++) {
            kiln_resizer_init(&rs);
            cold[r] = timed_resize(&rs, &in, ow, oh, f, &out);
            kiln_resizer_free(&rs);
        }
        double mw = median(warm, runs), mc = median(cold, runs);
        printf("  %-9s %12.2f %12.3f %12.3f\n", kiln_filter_name(f), mw, mw / mpix, mc / mpix);
    }
    kiln_image_free(&in);
    kiln_image_free(&out);
}

int main(int argc, char **argv)
{
    int runs = 5;
    if (argc > 2 || (argc == 2 && ((runs = atoi(argv[1])) < 1 || runs > MAX_RUNS))) {
        fprintf(stderr, "usage: kiln-bench-resize [RUNS]   (1 to %d, default 5)\n", MAX_RUNS);
        return 1;
    }
    printf("kiln resampler, one thread, median of %d runs (CLOCK_MONOTONIC)\n", runs);
    bench("photo", 4000, 3000, 3, 8, 224, 224, runs);
    bench("frame", 1024, 1024, 1, 16, 256, 256, runs);
    return 0;
}
