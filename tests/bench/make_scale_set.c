/* Scale set generator for the memory benchmark (tests/bench/scale.sh, docs/performance.md
 * "Memory at scale"): N small, distinct RGB PNGs of 16x12 pixels (smooth structure plus noise
 * from a counter-based hash, so no two are alike), spread over ten class folders. Written as
 * files, or as one POSIX tar archive so that 10^6 items cost one file and no inodes.
 *
 *   kiln-bench-scale OUT N            OUT/c0/0000000.png ... (folder)
 *   kiln-bench-scale OUT.tar N --tar  the same names as members of one archive */
#include <errno.h>
#include <png.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define W 16
#define H 12

static _Noreturn void die(const char *what, const char *file)
{
    fprintf(stderr, "kiln-bench-scale: error: %s: %s\n", what, file);
    exit(1);
}

static uint64_t mix(uint64_t z)
{
    z += 0x9E3779B97F4A7C15ull;
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    return z ^ (z >> 31);
}

struct buf {
    unsigned char *p;
    size_t n, cap;
};

static void put(png_structp png, png_bytep data, png_size_t len)
{
    struct buf *b = png_get_io_ptr(png);
    if (b->n + len > b->cap) {
        b->cap = (b->n + len) * 2;
        b->p = realloc(b->p, b->cap);
        if (!b->p)
            png_error(png, "out of memory");
    }
    memcpy(b->p + b->n, data, len);
    b->n += len;
}

static void flush(png_structp png)
{
    (void)png;
}

/* Picture i as a PNG in b. */
static void encode(uint64_t i, struct buf *b)
{
    unsigned char px[H][W * 3];
    const uint64_t seed = mix(i);
    for (unsigned y = 0; y < H; y++)
        for (unsigned x = 0; x < W; x++)
            for (unsigned c = 0; c < 3; c++) {
                unsigned base = (unsigned)((seed >> (8 * c)) & 0xff);
                unsigned slope = (unsigned)((seed >> (24 + 4 * c)) & 0x0f);
                unsigned noise = (unsigned)(mix(seed ^ ((y * W + x) * 3 + c)) & 0x3f);
                px[y][3 * x + c] = (unsigned char)((base + slope * (x + y) + noise) & 0xff);
            }
    b->n = 0;
    png_structp png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!info || setjmp(png_jmpbuf(png)))
        die("cannot encode a PNG", "memory");
    png_set_write_fn(png, b, put, flush);
    png_set_IHDR(png, info, W, H, 8, PNG_COLOR_TYPE_RGB, PNG_INTERLACE_NONE,
                 PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(png, info);
    for (unsigned y = 0; y < H; y++)
        png_write_row(png, px[y]);
    png_write_end(png, info);
    png_destroy_write_struct(&png, &info);
}

/* A ustar header for a regular file (POSIX.1-1988), checksum filled in. */
static void tar_header(unsigned char h[512], const char *name, size_t size)
{
    memset(h, 0, 512);
    snprintf((char *)h, 100, "%s", name);
    snprintf((char *)h + 100, 8, "%07o", 0644);
    snprintf((char *)h + 108, 8, "%07o", 0);
    snprintf((char *)h + 116, 8, "%07o", 0);
    snprintf((char *)h + 124, 12, "%011zo", size);
    snprintf((char *)h + 136, 12, "%011o", 0);
    h[156] = '0';
    memcpy(h + 257, "ustar", 6);
    memcpy(h + 263, "00", 2);
    memset(h + 148, ' ', 8);
    unsigned sum = 0;
    for (int k = 0; k < 512; k++)
        sum += h[k];
    snprintf((char *)h + 148, 8, "%06o", sum);
    h[155] = ' ';
}

int main(int argc, char **argv)
{
    if (argc < 3 || argc > 4 || (argc == 4 && strcmp(argv[3], "--tar") != 0)) {
        fprintf(stderr, "usage: kiln-bench-scale OUT N [--tar]\n");
        return 2;
    }
    const char *out = argv[1];
    const uint64_t n = strtoull(argv[2], NULL, 10);
    const int tar = argc == 4;
    FILE *t = NULL;
    if (tar) {
        t = fopen(out, "wb");
        if (!t)
            die(strerror(errno), out);
    } else if (mkdir(out, 0755) != 0 && errno != EEXIST) {
        die(strerror(errno), out);
    }
    char name[256], path[4096];
    for (int c = 0; c < 10 && !tar; c++) {
        snprintf(path, sizeof path, "%s/c%d", out, c);
        if (mkdir(path, 0755) != 0 && errno != EEXIST)
            die(strerror(errno), path);
    }
    struct buf b = {NULL, 0, 0};
    static const unsigned char zero[512];
    for (uint64_t i = 0; i < n; i++) {
        encode(i, &b);
        snprintf(name, sizeof name, "c%u/%07llu.png", (unsigned)(i % 10), (unsigned long long)i);
        if (tar) {
            unsigned char h[512];
            tar_header(h, name, b.n);
            if (fwrite(h, 1, 512, t) != 512 || fwrite(b.p, 1, b.n, t) != b.n ||
                fwrite(zero, 1, (512 - b.n % 512) % 512, t) != (512 - b.n % 512) % 512)
                die("cannot write", out);
        } else {
            snprintf(path, sizeof path, "%s/%s", out, name);
            FILE *f = fopen(path, "wb");
            if (!f || fwrite(b.p, 1, b.n, f) != b.n || fclose(f) != 0)
                die("cannot write", path);
        }
    }
    if (tar && (fwrite(zero, 1, 512, t) != 512 || fwrite(zero, 1, 512, t) != 512 || fclose(t)))
        die("cannot write", out);
    free(b.p);
    return 0;
}
