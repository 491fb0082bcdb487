/* Benchmark set generator: an invented inspection line where three cameras feed one data set.
 * Camera-size JPEGs (1600x1200), 640x480 RGB PNGs and 1024x1024 16-bit grey PNGs of smooth
 * structure with sensor noise, so that decoders see realistic entropy. Deterministic.
 *
 *   kiln-bench-data OUTDIR [SCALE]     SCALE 1 = 200 + 200 + 100 images (default) */
#include <errno.h>
#include <stdint.h>
#include <stdio.h> /* before jpeglib.h, which needs FILE and size_t */
#include <stdlib.h>

#include <jpeglib.h>
#include <png.h>
#include <setjmp.h>
#include <string.h>
#include <sys/stat.h>

static const char *const bench_class[3] = {"gasket", "housing", "weld"};

static _Noreturn void bench_fail(const char *what, const char *file)
{
    fprintf(stderr, "kiln-bench-data: error: %s: %s\n", what, file);
    exit(1);
}

static uint32_t bench_hash(uint32_t a, uint32_t b, uint32_t c)
{
    uint64_t z = (uint64_t)a * 0x9E3779B97F4A7C15ull ^ (uint64_t)b * 0xC2B2AE3D27D4EB4Full ^
                 (uint64_t)c * 0x165667B19E3779F9ull;
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return (uint32_t)(z ^ (z >> 31));
}

/* Value noise on a lattice of cell pixels, bilinear between lattice points, 0..65535. */
static uint32_t bench_noise(uint32_t seed, uint32_t x, uint32_t y, uint32_t cell)
{
    uint32_t gx = x / cell, gy = y / cell, fx = (x % cell) * 256 / cell, fy = (y % cell) * 256 / cell;
    uint32_t a = bench_hash(seed, gx, gy) >> 16, b = bench_hash(seed, gx + 1, gy) >> 16;
    uint32_t c = bench_hash(seed, gx, gy + 1) >> 16, d = bench_hash(seed, gx + 1, gy + 1) >> 16;
    uint32_t top = (a * (256 - fx) + b * fx) >> 8, bot = (c * (256 - fx) + d * fx) >> 8;
    return (top * (256 - fy) + bot * fy) >> 8;
}

/* One sample of channel ch at (x, y): two octaves of structure, a gradient and noise. */
static uint32_t bench_sample(uint32_t seed, uint32_t x, uint32_t y, uint32_t ch, uint32_t w)
{
    uint32_t v = (bench_noise(seed + ch, x, y, 97) * 5 + bench_noise(seed + 7 + ch, x, y, 23) * 2 +
                  (x * 65535 / w) * 1) / 8;
    uint32_t grain = bench_hash(seed, x, y * 4 + ch) >> 22; /* 0..1023 */
    v = v + grain * 4 > 65535 ? 65535 : v + grain * 4;
    return v;
}

struct jpeg_fail {
    struct jpeg_error_mgr pub;
    jmp_buf jump;
};

static void bench_jpeg_exit(j_common_ptr c)
{
    longjmp(((struct jpeg_fail *)c->err)->jump, 1);
}

static void write_jpeg(const char *path, uint32_t w, uint32_t h, uint32_t seed)
{
    FILE *f = fopen(path, "wb");
    if (!f)
        bench_fail(strerror(errno), path);
    struct jpeg_compress_struct c;
    struct jpeg_fail e;
    c.err = jpeg_std_error(&e.pub);
    e.pub.error_exit = bench_jpeg_exit;
    uint8_t *row = malloc((size_t)w * 3);
    if (!row || setjmp(e.jump))
        bench_fail("cannot encode JPEG", path);
    jpeg_create_compress(&c);
    jpeg_stdio_dest(&c, f);
    c.image_width = w;
    c.image_height = h;
    c.input_components = 3;
    c.in_color_space = JCS_RGB;
    jpeg_set_defaults(&c);
    jpeg_set_quality(&c, 90, TRUE);
    c.dct_method = JDCT_ISLOW;
    jpeg_start_compress(&c, TRUE);
    for (uint32_t y = 0; y < h; y++) {
        for (uint32_t x = 0; x < w; x++)
            for (uint32_t ch = 0; ch < 3; ch++)
                row[3 * x + ch] = (uint8_t)(bench_sample(seed, x, y, ch, w) >> 8);
        JSAMPROW r = row;
        jpeg_write_scanlines(&c, &r, 1);
    }
    jpeg_finish_compress(&c);
    jpeg_destroy_compress(&c);
    free(row);
    if (fclose(f) != 0)
        bench_fail(strerror(errno), path);
}

static void bench_png_error(png_structp png, png_const_charp msg)
{
    (void)msg;
    longjmp(png_jmpbuf(png), 1);
}

static void write_png(const char *path, uint32_t w, uint32_t h, uint32_t seed, int grey16)
{
    FILE *f = fopen(path, "wb");
    if (!f)
        bench_fail(strerror(errno), path);
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, bench_png_error, NULL);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    const size_t stride = grey16 ? (size_t)w * 2 : (size_t)w * 3;
    uint8_t *row = malloc(stride);
    if (!png || !info || !row || setjmp(png_jmpbuf(png)))
        bench_fail("cannot encode PNG", path);
    png_init_io(png, f);
    png_set_compression_level(png, 3);
    png_set_IHDR(png, info, w, h, grey16 ? 16 : 8, grey16 ? PNG_COLOR_TYPE_GRAY : PNG_COLOR_TYPE_RGB,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (uint32_t y = 0; y < h; y++) {
        for (uint32_t x = 0; x < w; x++) {
            if (grey16) {
                uint32_t v = bench_sample(seed, x, y, 0, w);
                row[2 * x] = (uint8_t)(v >> 8); /* PNG stores 16-bit samples big-endian */
                row[2 * x + 1] = (uint8_t)v;
            } else {
                for (uint32_t ch = 0; ch < 3; ch++)
                    row[3 * x + ch] = (uint8_t)(bench_sample(seed, x, y, ch, w) >> 8);
            }
        }
        png_write_row(png, row);
    }
    png_write_end(png, info);
    png_destroy_write_struct(&png, &info);
    free(row);
    if (fclose(f) != 0)
        bench_fail(strerror(errno), path);
}

int main(int argc, char **argv)
{
    if (argc < 2 || argc > 3) {
        fprintf(stderr, "usage: kiln-bench-data OUTDIR [SCALE]\n");
        return 2;
    }
    double scale = argc == 3 ? strtod(argv[2], NULL) : 1.0;
    if (!(scale > 0 && scale <= 100)) {
        fprintf(stderr, "kiln-bench-data: error: SCALE must be in (0, 100]\n");
        return 2;
    }
    const char *out = argv[1];
    char path[4096];
    if (mkdir(out, 0755) != 0 && errno != EEXIST)
        bench_fail(strerror(errno), out);
    for (int c = 0; c < 3; c++) {
        snprintf(path, sizeof path, "%s/%s", out, bench_class[c]);
        if (mkdir(path, 0755) != 0 && errno != EEXIST)
            bench_fail(strerror(errno), path);
    }
    const unsigned njpeg = (unsigned)(200 * scale + 0.5), npng = (unsigned)(200 * scale + 0.5),
                   n16 = (unsigned)(100 * scale + 0.5);
    for (unsigned i = 0; i < njpeg; i++) {
        snprintf(path, sizeof path, "%s/%s/cam1_%04u.jpg", out, bench_class[i % 3], i);
        write_jpeg(path, 1600, 1200, 1000 + i);
    }
    for (unsigned i = 0; i < npng; i++) {
        snprintf(path, sizeof path, "%s/%s/cam2_%04u.png", out, bench_class[i % 3], i);
        write_png(path, 640, 480, 5000 + i, 0);
    }
    for (unsigned i = 0; i < n16; i++) {
        snprintf(path, sizeof path, "%s/%s/cam3_%04u.png", out, bench_class[i % 3], i);
        write_png(path, 1024, 1024, 9000 + i, 1);
    }
    printf("kiln-bench-data: %u JPEG 1600x1200, %u PNG 640x480 RGB, %u PNG 1024x1024 16-bit grey in %s\n",
           njpeg, npng, n16, out);
    return 0;
}
