/* kiln-demo-data: writes a small demo source folder for kiln, photographs of fired glaze test
 * tiles in four defect classes with several shots per tile, plus the awkward files a real lab
 * folder holds (grey and 16-bit images, an EXIF-rotated JPEG, a truncated JPEG, a mislabelled
 * duplicate, OS junk). Everything comes from a fixed-seed integer PRNG and integer arithmetic,
 * so every run on every machine writes the same bytes (for the same libjpeg-turbo, libpng and
 * zlib), and the data can sit in tests, tutorials and bug reports.
 *
 * Each tile is rendered once into a texture (colour and surface slope) and every shot samples
 * it through its own camera placement and lighting: the shots of one tile show the same defects,
 * which is what makes grouping by tile necessary when splitting. */
#include <stdio.h> /* jpeglib.h needs FILE */

#include <dirent.h>
#include <errno.h>
#include <jpeglib.h>
#include <png.h>
#include <setjmp.h>
#include <stddef.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <sys/types.h>

#define DEMO_SEED 0x6b696c6e64656d6fULL /* "kilndemo" */
#define DEMO_ROOT "glaze-tiles"
#define DEMO_TEX 640          /* texels across a tile: no ordinary shot shows a tile larger */
#define DEMO_TEX_CH 5         /* texture channels: R, G, B, slope along u, slope along v */
#define DEMO_BEVEL 24         /* texels over which the glaze thins at the tile's rounded edge */
#define DEMO_LATTICE_N 64     /* largest value-noise lattice side */
#define DEMO_MAX_PATCHES 4
#define DEMO_MAX_CRAZE 13     /* most crack cells across a tile */
#define DEMO_MAX_SHOTS 4
#define DEMO_JPEG_QUALITY 90
#define DEMO_PNG_LEVEL 3

enum demo_class { DEMO_CRAWLING, DEMO_CRAZING, DEMO_PINHOLING, DEMO_SOUND, DEMO_NCLASS };

static const char *const demo_class_name[DEMO_NCLASS] = {"crawling", "crazing", "pinholing",
                                                         "sound"};

/* Most fired tiles come out sound; the classifier must cope with the imbalance. */
enum { DEMO_N_CRAWLING = 12, DEMO_N_CRAZING = 16, DEMO_N_PINHOLING = 14, DEMO_N_SOUND = 24 };
#define DEMO_NTILES (DEMO_N_CRAWLING + DEMO_N_CRAZING + DEMO_N_PINHOLING + DEMO_N_SOUND)
static const unsigned demo_class_tiles[DEMO_NCLASS] = {DEMO_N_CRAWLING, DEMO_N_CRAZING,
                                                       DEMO_N_PINHOLING, DEMO_N_SOUND};

/* Glaze and clay colours, display-referred 16-bit RGB. */
static const uint16_t demo_glazes[][3] = {
    {36000, 44500, 37500}, /* celadon */
    {21000, 12500, 8000},  /* tenmoku */
    {54000, 51000, 45500}, /* shino */
    {11000, 19000, 38000}, /* cobalt */
    {38000, 9000, 10500},  /* copper red */
    {42000, 40000, 27000}, /* wood ash */
    {15500, 30000, 31000}, /* teal */
    {50000, 36000, 17000}, /* amber */
};
static const uint16_t demo_bodies[][3] = {
    {52000, 45500, 36000}, /* buff stoneware */
    {46000, 29000, 20500}, /* terracotta */
    {57000, 55000, 51000}, /* porcelain */
};

/* Frame sizes of the bench camera's modes, weighted by how often the studio used them; the
 * portrait ones are shots with the camera turned and no orientation tag. */
static const struct demo_size {
    uint16_t w, h, weight;
} demo_sizes[] = {{640, 480, 10}, {800, 600, 6}, {512, 512, 5},
                  {1024, 768, 2}, {480, 640, 1}, {600, 800, 1}};

/* Unit light directions in Q8, so a raking shot can come from any side. */
static const int16_t demo_light_dirs[8][2] = {{256, 0},  {181, 181},   {0, 256},  {-181, 181},
                                              {-256, 0}, {-181, -181}, {0, -256}, {181, -181}};

/* APP1 payload: "Exif\0\0", a little-endian TIFF header and IFD0 with one entry,
 * Orientation (0x0112, SHORT, count 1) = 6: the camera was turned 90 degrees clockwise. */
static const uint8_t demo_exif_orient6[] = {
    'E', 'x', 'i', 'f', 0, 0,   'I', 'I', 0x2A, 0, 8, 0, 0, 0, /* header, IFD0 at 8 */
    1,   0,                                                    /* one entry */
    0x12, 0x01, 3, 0, 1, 0, 0, 0, 6, 0, 0, 0,                  /* Orientation = 6 */
    0,   0,   0,   0};                                         /* no IFD1 */

enum demo_format { DEMO_JPEG_RGB, DEMO_JPEG_GREY, DEMO_PNG_RGB, DEMO_PNG_GREY8, DEMO_PNG_GREY16 };

/* What happens to a shot's file besides being written. */
enum demo_fate { DEMO_PLAIN, DEMO_EXIF6, DEMO_TRUNCATE, DEMO_DUPLICATE };

struct demo_shot {
    uint16_t w, h; /* as the viewer sees it, before any EXIF rotation of the stored pixels */
    uint8_t format, fate;
    bool raking, closeup;
};

/* A crawled patch: bare clay where the glaze pulled back, in texels. */
struct demo_patch {
    int32_t x, y, r, rim;
    uint64_t seed;
};

struct demo_tile {
    unsigned id;
    enum demo_class cls;
    uint64_t seed;
    int64_t glaze[3], body[3];
    unsigned npatches;
    struct demo_patch patch[DEMO_MAX_PATCHES];
    int32_t craze_cells, craze_w16; /* crack cells across the tile; crack half-width, Q4 texels */
    int32_t pin_cells, pin_density; /* pinhole cells across the tile; percent of cells holed */
    unsigned nshots;
    struct demo_shot shot[DEMO_MAX_SHOTS];
};

struct demo_buf {
    uint8_t *data;
    size_t len, cap;
};

/* libjpeg's state lives outside the function that calls setjmp, so nothing it changes becomes
 * indeterminate after a longjmp. */
struct demo_jpeg {
    struct jpeg_compress_struct cinfo;
    struct jpeg_error_mgr pub;
    jmp_buf jump;
    unsigned char *mem;
    unsigned long len;
};

struct demo_ctx {
    const char *outdir;
    char path[4096];
    char msg[JMSG_LENGTH_MAX + 32]; /* codec message for the failure report */
    struct demo_tile tile[DEMO_NTILES];
    unsigned dup_id; /* the fresh tile number the mislabelled copy was filed under */
    uint16_t *tex, *height; /* current tile, see demo_tile_texture */
    uint16_t *canvas, *turned;
    uint8_t *pix;
    int64_t *colx;
    struct demo_buf out;
    struct demo_jpeg jpeg;
    unsigned per_class[DEMO_NCLASS], njpeg, npng;
};

/* ---- failure ------------------------------------------------------------------------------ */

static _Noreturn void demo_fail(const char *problem, const char *file)
{
    fprintf(stderr, "kiln-demo-data: error: %s: %s\n", problem, file);
    exit(1);
}

static _Noreturn void demo_fail_errno(const char *problem, const char *file)
{
    char text[256];
    snprintf(text, sizeof text, "%s (%s)", problem, strerror(errno));
    demo_fail(text, file);
}

static void *demo_alloc(size_t a, size_t b, size_t c, const char *what)
{
    size_t ab, total;
    if (__builtin_mul_overflow(a, b, &ab) || __builtin_mul_overflow(ab, c, &total))
        demo_fail("allocation size overflows", what);
    void *p = malloc(total ? total : 1);
    if (!p)
        demo_fail("out of memory", what);
    return p;
}

static bool demo_buf_append(struct demo_buf *b, const void *data, size_t n)
{
    size_t need;
    if (n == 0)
        return true;
    if (__builtin_add_overflow(b->len, n, &need))
        return false;
    if (need > b->cap) {
        size_t cap = b->cap ? b->cap : 65536;
        while (cap < need)
            if (__builtin_mul_overflow(cap, 2, &cap))
                return false;
        uint8_t *p = realloc(b->data, cap);
        if (!p)
            return false;
        b->data = p;
        b->cap = cap;
    }
    memcpy(b->data + b->len, data, n);
    b->len = need;
    return true;
}

/* ---- integer randomness and noise ----------------------------------------------------------- */

static uint64_t demo_mix(uint64_t z)
{
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
}

/* splitmix64: tiny, and defined by integer operations alone. */
struct demo_rng {
    uint64_t s;
};

static uint64_t demo_next(struct demo_rng *r)
{
    r->s += 0x9e3779b97f4a7c15ULL;
    return demo_mix(r->s);
}

static uint32_t demo_below(struct demo_rng *r, uint32_t n)
{
    return (uint32_t)(((demo_next(r) >> 32) * n) >> 32);
}

static int32_t demo_range(struct demo_rng *r, int32_t lo, int32_t hi)
{
    return lo + (int32_t)demo_below(r, (uint32_t)(hi - lo + 1));
}

/* A hash of a lattice point, so texture features need no stored tables. */
static uint32_t demo_hash(uint64_t seed, int32_t x, int32_t y)
{
    return (uint32_t)(demo_mix(seed ^ ((uint64_t)(uint32_t)x * 0x9e3779b97f4a7c15ULL) ^
                               ((uint64_t)(uint32_t)y * 0xc2b2ae3d27d4eb4fULL)) >> 32);
}

static int64_t demo_clamp(int64_t v, int64_t lo, int64_t hi)
{
    return v < lo ? lo : v > hi ? hi : v;
}

static int64_t demo_min(int64_t a, int64_t b)
{
    return a < b ? a : b;
}

static uint64_t demo_isqrt(uint64_t n)
{
    uint64_t root = 0, bit = 1ULL << 62;
    while (bit > n)
        bit >>= 2;
    while (bit) {
        if (n >= root + bit) {
            n -= root + bit;
            root = (root >> 1) + bit;
        } else {
            root >>= 1;
        }
        bit >>= 2;
    }
    return root;
}

/* Value noise over precomputed lattice values and a precomputed smoothstep per offset within a
 * cell: smooth, 0..65535, and cheap enough to evaluate for every texel of every tile. */
struct demo_lattice {
    int32_t cell, n;
    uint16_t v[DEMO_LATTICE_N * DEMO_LATTICE_N];
    int32_t smooth[DEMO_TEX];
};

static int64_t demo_smooth(int64_t f)
{
    return f * f / 65536 * (3 * 65536 - 2 * f) / 65536;
}

static void demo_lattice_init(struct demo_lattice *l, uint64_t seed, int32_t cell)
{
    const int32_t min_cell = DEMO_TEX / (DEMO_LATTICE_N - 2) + 1;
    l->cell = cell < min_cell ? min_cell : cell > DEMO_TEX ? DEMO_TEX : cell;
    l->n = DEMO_TEX / l->cell + 2;
    for (int32_t j = 0; j < l->n; j++)
        for (int32_t i = 0; i < l->n; i++)
            l->v[j * l->n + i] = (uint16_t)(demo_hash(seed, i, j) >> 16);
    for (int32_t k = 0; k < l->cell; k++)
        l->smooth[k] = (int32_t)demo_smooth((int64_t)k * 65536 / l->cell);
}

static int64_t demo_lattice_mix(const struct demo_lattice *l, int32_t ix, int32_t iy, int64_t fx,
                                int64_t fy)
{
    const uint16_t *r0 = l->v + iy * l->n, *r1 = r0 + l->n;
    int64_t top = r0[ix] + (r0[ix + 1] - r0[ix]) * fx / 65536;
    int64_t bot = r1[ix] + (r1[ix + 1] - r1[ix]) * fx / 65536;
    return top + (bot - top) * fy / 65536;
}

static int64_t demo_lattice_at(const struct demo_lattice *l, int32_t x, int32_t y)
{
    int32_t ix = x / l->cell, iy = y / l->cell;
    return demo_lattice_mix(l, ix, iy, l->smooth[x - ix * l->cell], l->smooth[y - iy * l->cell]);
}

/* The noise along a whole texture row, stepping through cells instead of dividing per texel. */
static void demo_lattice_row(const struct demo_lattice *l, int32_t y, int64_t *out)
{
    int32_t iy = y / l->cell, ix = 0, k = 0;
    int64_t fy = l->smooth[y - iy * l->cell];
    for (int32_t x = 0; x < DEMO_TEX; x++) {
        out[x] = demo_lattice_mix(l, ix, iy, l->smooth[k], fy);
        if (++k == l->cell) {
            k = 0;
            ix++;
        }
    }
}

/* ---- the tiles ------------------------------------------------------------------------------ */

static void demo_tile_init(struct demo_tile *t, unsigned id, enum demo_class cls)
{
    /* Seeded by the tile number alone, so a tile looks the same whatever else changes. */
    struct demo_rng r = {demo_mix(DEMO_SEED ^ id)};
    memset(t, 0, sizeof *t);
    t->id = id;
    t->cls = cls;
    t->seed = demo_next(&r);
    const uint16_t *g = demo_glazes[demo_below(&r, sizeof demo_glazes / sizeof demo_glazes[0])];
    const uint16_t *b = demo_bodies[demo_below(&r, sizeof demo_bodies / sizeof demo_bodies[0])];
    for (int c = 0; c < 3; c++) {
        t->glaze[c] = demo_clamp(g[c] + demo_range(&r, -2500, 2500), 0, 65535);
        t->body[c] = demo_clamp(b[c] + demo_range(&r, -1500, 1500), 0, 65535);
    }
    t->npatches = cls == DEMO_CRAWLING ? (unsigned)demo_range(&r, 2, DEMO_MAX_PATCHES) : 0;
    for (unsigned i = 0; i < t->npatches; i++) {
        struct demo_patch *p = &t->patch[i];
        p->r = demo_range(&r, 40, 100);
        p->x = demo_range(&r, 60, DEMO_TEX - 60);
        p->y = demo_range(&r, 60, DEMO_TEX - 60);
        p->rim = demo_range(&r, 5, 9);
        p->seed = demo_next(&r);
    }
    t->craze_cells = demo_range(&r, 7, DEMO_MAX_CRAZE);
    t->craze_w16 = demo_range(&r, 10, 16);
    t->pin_cells = demo_range(&r, 12, 18);
    t->pin_density = demo_range(&r, 15, 40);

    uint32_t total_weight = 0;
    for (size_t i = 0; i < sizeof demo_sizes / sizeof demo_sizes[0]; i++)
        total_weight += demo_sizes[i].weight;
    t->nshots = (unsigned)demo_range(&r, 2, DEMO_MAX_SHOTS);
    for (unsigned i = 0; i < t->nshots; i++) {
        struct demo_shot *s = &t->shot[i];
        uint32_t pick = demo_below(&r, total_weight);
        size_t k = 0;
        while (pick >= demo_sizes[k].weight)
            pick -= demo_sizes[k++].weight;
        s->w = demo_sizes[k].w;
        s->h = demo_sizes[k].h;
        /* Lossless saves were the exception, and only for the smaller frames. */
        s->format = (uint32_t)s->w * s->h <= 640 * 480 && demo_below(&r, 100) < 12 ? DEMO_PNG_RGB
                                                                                   : DEMO_JPEG_RGB;
        s->fate = DEMO_PLAIN;
        s->closeup = demo_below(&r, 100) < 12;
    }
}

static struct demo_tile *demo_nth(struct demo_ctx *ctx, enum demo_class cls, unsigned n)
{
    for (unsigned i = 0; i < DEMO_NTILES; i++)
        if (ctx->tile[i].cls == cls && n-- == 0)
            return &ctx->tile[i];
    demo_fail("internal: too few tiles of class", demo_class_name[cls]);
}

static void demo_special(struct demo_shot *s, enum demo_format format, enum demo_fate fate,
                         uint16_t w, uint16_t h)
{
    s->format = (uint8_t)format;
    s->fate = (uint8_t)fate;
    s->raking = format == DEMO_PNG_GREY16;
    s->closeup = false;
    if (w) {
        s->w = w;
        s->h = h;
    }
}

static void demo_plan(struct demo_ctx *ctx)
{
    struct demo_rng r = {DEMO_SEED};
    enum demo_class order[DEMO_NTILES];
    unsigned n = 0;
    for (int c = 0; c < DEMO_NCLASS; c++)
        for (unsigned k = 0; k < demo_class_tiles[c]; k++)
            order[n++] = (enum demo_class)c;
    /* One firing mixes outcomes, so neighbouring tile numbers have unrelated classes. */
    for (unsigned i = n - 1; i > 0; i--) {
        unsigned j = demo_below(&r, i + 1);
        enum demo_class tmp = order[i];
        order[i] = order[j];
        order[j] = tmp;
    }
    /* Numbers start at 101 and skip the odd tile that broke in the kiln. */
    unsigned id = 101;
    for (unsigned i = 0; i < n; i++) {
        demo_tile_init(&ctx->tile[i], id, order[i]);
        id += 1 + (demo_below(&r, 6) == 0 ? 1 + demo_below(&r, 3) : 0);
    }
    ctx->dup_id = id + 3;

    /* The awkward files, each on a tile where it shows something; first and last shots of a
     * tile are always distinct since every tile has at least two. */
    struct demo_tile *t;
    t = demo_nth(ctx, DEMO_CRAWLING, 0);
    demo_special(&t->shot[t->nshots - 1], DEMO_PNG_GREY16, DEMO_PLAIN, 640, 480);
    t = demo_nth(ctx, DEMO_PINHOLING, 0);
    demo_special(&t->shot[t->nshots - 1], DEMO_PNG_GREY16, DEMO_PLAIN, 512, 512);
    t = demo_nth(ctx, DEMO_CRAZING, 0);
    demo_special(&t->shot[t->nshots - 1], DEMO_PNG_GREY8, DEMO_PLAIN, 640, 480);
    t = demo_nth(ctx, DEMO_SOUND, 1);
    demo_special(&t->shot[t->nshots - 1], DEMO_JPEG_GREY, DEMO_PLAIN, 0, 0);
    t = demo_nth(ctx, DEMO_CRAZING, 2);
    demo_special(&t->shot[0], DEMO_JPEG_RGB, DEMO_EXIF6, 800, 600);
    t = demo_nth(ctx, DEMO_SOUND, 3);
    demo_special(&t->shot[t->nshots - 1], DEMO_JPEG_RGB, DEMO_TRUNCATE, 0, 0);
    t = demo_nth(ctx, DEMO_PINHOLING, 1);
    demo_special(&t->shot[0], DEMO_JPEG_RGB, DEMO_DUPLICATE, 0, 0);
}

/* Crawling: the glaze pulled back off patches of bare clay and rolled into a bead around them. */
static void demo_crawl(const struct demo_tile *t, const struct demo_lattice *edge, int32_t x,
                       int32_t y, int64_t rgb[3], int64_t *hgt)
{
    for (unsigned i = 0; i < t->npatches; i++) {
        const struct demo_patch *p = &t->patch[i];
        int64_t dx = x - p->x, dy = y - p->y, d2 = dx * dx + dy * dy;
        int64_t reach = 2 * p->r + p->rim;
        if (d2 >= reach * reach)
            continue;
        /* The edge wanders because the glaze retreats further where it was laid thinner. */
        int64_t r16 = p->r * 16 * (45875 + demo_lattice_at(&edge[i], x, y) * 39321 / 65536) / 65536;
        int64_t t16 = (int64_t)demo_isqrt((uint64_t)d2 * 256) - r16; /* Q4 texels outside */
        if (t16 >= 0 && t16 < p->rim * 16) {
            int64_t bead = (p->rim * 16 - t16) * 65536 / (p->rim * 16);
            for (int c = 0; c < 3; c++)
                rgb[c] = rgb[c] * (65536 - bead * 3 / 10) / 65536;
            *hgt += bead * 2600 / 65536;
        }
        int64_t cover = demo_clamp(128 - t16 * 16, 0, 256);
        if (cover) {
            int64_t grain = (int64_t)(demo_hash(p->seed, x, y) >> 20) - 2048; /* matte body */
            for (int c = 0; c < 3; c++) {
                int64_t bare = t->body[c] * (65536 + grain * 2) / 65536;
                rgb[c] += (bare - rgb[c]) * cover / 256;
            }
            *hgt += (27500 + grain - *hgt) * cover / 256;
        }
    }
}

/* Crack cell centres of one tile, for cells -1 .. craze_cells + 1 in each direction (a texel's
 * cell index reaches craze_cells when DEMO_TEX is not a multiple of it). */
#define DEMO_CRAZE_SIDE (DEMO_MAX_CRAZE + 3)
struct demo_sites {
    int32_t cs; /* cell size, texels */
    int64_t x[DEMO_CRAZE_SIDE * DEMO_CRAZE_SIDE], y[DEMO_CRAZE_SIDE * DEMO_CRAZE_SIDE];
};

static void demo_sites_init(struct demo_sites *st, const struct demo_tile *t)
{
    st->cs = DEMO_TEX / t->craze_cells;
    for (int32_t j = 0; j < t->craze_cells + 3; j++)
        for (int32_t i = 0; i < t->craze_cells + 3; i++) {
            uint32_t h = demo_hash(t->seed ^ 0xC7A2E, i, j);
            /* Centres jitter by up to 0.4 cell, so the nearest two to a texel are nearly always
             * in its 3 x 3 cells; a rare miss only bends a crack. */
            int64_t cs = st->cs;
            int64_t jx = (int64_t)(h & 0xFFFF) - 32768, jy = (int64_t)(h >> 16) - 32768;
            st->x[j * DEMO_CRAZE_SIDE + i] = (i - 1) * cs + cs / 2 + jx * cs / 81920;
            st->y[j * DEMO_CRAZE_SIDE + i] = (j - 1) * cs + cs / 2 + jy * cs / 81920;
        }
}

/* Crazing: the glaze shrank more than the body and cracked into cells. The cracks are the
 * borders of a jittered Voronoi diagram; the distance to the bisector of the two nearest cell
 * centres, (d2^2 - d1^2) / (2 |c1 - c2|), gives them an even width. */
static void demo_craze(const struct demo_tile *t, const struct demo_sites *st, int32_t x,
                       int32_t y, int64_t rgb[3], int64_t *hgt)
{
    int32_t gx = x / st->cs + 1, gy = y / st->cs + 1; /* +1: the table starts at cell -1 */
    int64_t best[2] = {INT64_MAX, INT64_MAX}, bx[2] = {0, 0}, by[2] = {0, 0};
    int32_t id[2] = {0, 0};
    for (int32_t j = -1; j <= 1; j++)
        for (int32_t i = -1; i <= 1; i++) {
            int32_t cid = (gy + j) * DEMO_CRAZE_SIDE + gx + i;
            int64_t px = st->x[cid], py = st->y[cid];
            int64_t d = (x - px) * (x - px) + (y - py) * (y - py);
            if (d < best[0]) {
                best[1] = best[0], bx[1] = bx[0], by[1] = by[0], id[1] = id[0];
                best[0] = d, bx[0] = px, by[0] = py, id[0] = cid;
            } else if (d < best[1]) {
                best[1] = d, bx[1] = px, by[1] = py, id[1] = cid;
            }
        }
    int64_t sx = bx[0] - bx[1], sy = by[0] - by[1];
    int64_t len = (int64_t)demo_isqrt((uint64_t)(sx * sx + sy * sy));
    int64_t d16 = (best[1] - best[0]) * 8 / (len > 0 ? len : 1);
    if (d16 >= t->craze_w16)
        return;
    int64_t k = (t->craze_w16 - d16) * 256 / t->craze_w16;
    /* Cracks take up dirt unevenly, so some segments read darker than others. */
    uint32_t seg = demo_hash(t->seed ^ 0x5E6, id[0] < id[1] ? id[0] : id[1],
                             id[0] < id[1] ? id[1] : id[0]);
    int64_t depth = 80 + (int64_t)(seg >> 24) * 110 / 255;
    for (int c = 0; c < 3; c++)
        rgb[c] = rgb[c] * (65536 - k * depth) / 65536;
    *hgt -= k * 4;
}

/* Pinholing: gas escaped through the melt and left small pits with a raised lip. At most one
 * pit per cell of a grid, kept clear of the cell border, so a texel looks at its own cell only. */
static void demo_pinhole(const struct demo_tile *t, int32_t x, int32_t y, int64_t rgb[3],
                         int64_t *hgt)
{
    int32_t cs = DEMO_TEX / t->pin_cells, gx = x / cs, gy = y / cs;
    uint32_t h = demo_hash(t->seed ^ 0x9190, gx, gy);
    if ((int64_t)(h & 0xFF) * 100 >= (int64_t)t->pin_density * 256)
        return;
    int64_t r16 = 24 + (h >> 8 & 0x1F); /* 1.5 to 3.4 texels */
    int64_t margin = r16 * 2 / 16 + 2;
    int64_t px = (int64_t)gx * cs + margin + (int64_t)(h >> 13 & 0x3FF) * (cs - 2 * margin) / 1024;
    int64_t py = (int64_t)gy * cs + margin + (int64_t)(h >> 23) * (cs - 2 * margin) / 512;
    int64_t d16 = (int64_t)demo_isqrt((uint64_t)((x - px) * (x - px) + (y - py) * (y - py)) * 256);
    if (d16 >= 2 * r16)
        return;
    if (d16 >= r16) {
        int64_t lip = (2 * r16 - d16) * 65536 / r16;
        for (int c = 0; c < 3; c++)
            rgb[c] = rgb[c] * (65536 + lip * 5 / 64) / 65536;
        *hgt += lip * 1500 / 65536;
    }
    int64_t cover = demo_clamp((r16 - d16) * 16 + 128, 0, 256);
    for (int c = 0; c < 3; c++)
        rgb[c] -= rgb[c] * 78 / 100 * cover / 256;
    *hgt -= cover * 25;
}

/* Renders the tile into tex: R, G, B and the height slopes along u and v (h(+1) - h(-1), biased
 * by 32768), which is all a shot needs to light the surface from any side. height is scratch. */
static void demo_tile_texture(const struct demo_tile *t, uint16_t *tex, uint16_t *height)
{
    /* Two octaves of mottling: the glaze pools broadly and speckles finely. */
    struct demo_lattice broad, fine, edge[DEMO_MAX_PATCHES];
    struct demo_sites sites;
    demo_sites_init(&sites, t);
    demo_lattice_init(&broad, t->seed ^ 1, 96);
    demo_lattice_init(&fine, t->seed ^ 2, 24);
    for (unsigned i = 0; i < t->npatches; i++)
        demo_lattice_init(&edge[i], t->patch[i].seed, t->patch[i].r / 2);
    int64_t row1[DEMO_TEX], row2[DEMO_TEX];
    for (int32_t y = 0; y < DEMO_TEX; y++) {
        demo_lattice_row(&broad, y, row1);
        demo_lattice_row(&fine, y, row2);
        for (int32_t x = 0; x < DEMO_TEX; x++) {
            int64_t m1 = row1[x] - 32768, m2 = row2[x] - 32768;
            int64_t rgb[3], hgt = 32768 + m1 / 16 + m2 / 64;
            for (int c = 0; c < 3; c++)
                rgb[c] = t->glaze[c] * (65536 + m1 / 8 + m2 / 32) / 65536;
            int64_t de = demo_min(demo_min(x, y), demo_min(DEMO_TEX - 1 - x, DEMO_TEX - 1 - y));
            if (de < DEMO_BEVEL) {
                /* Glaze runs thin over the rounded edge and the body shows through. */
                int64_t k = (DEMO_BEVEL - de) * 65536 / DEMO_BEVEL;
                for (int c = 0; c < 3; c++)
                    rgb[c] += (t->body[c] - rgb[c]) * k / 65536 * 2 / 5;
                hgt -= k * k / 65536 * 5000 / 65536;
            }
            switch (t->cls) {
            case DEMO_CRAWLING: demo_crawl(t, edge, x, y, rgb, &hgt); break;
            case DEMO_CRAZING: demo_craze(t, &sites, x, y, rgb, &hgt); break;
            case DEMO_PINHOLING: demo_pinhole(t, x, y, rgb, &hgt); break;
            default: break;
            }
            size_t at = (size_t)y * DEMO_TEX + (size_t)x;
            for (int c = 0; c < 3; c++)
                tex[at * DEMO_TEX_CH + (size_t)c] = (uint16_t)demo_clamp(rgb[c], 0, 65535);
            height[at] = (uint16_t)demo_clamp(hgt, 0, 65535);
        }
    }
    for (int32_t y = 0; y < DEMO_TEX; y++)
        for (int32_t x = 0; x < DEMO_TEX; x++) {
            const uint16_t *row = height + (size_t)y * DEMO_TEX;
            const uint16_t *above = y > 0 ? row - DEMO_TEX : row;
            const uint16_t *below = y < DEMO_TEX - 1 ? row + DEMO_TEX : row;
            int32_t gu = row[x < DEMO_TEX - 1 ? x + 1 : x] - row[x > 0 ? x - 1 : x];
            int32_t gv = below[x] - above[x];
            uint16_t *p = tex + ((size_t)y * DEMO_TEX + (size_t)x) * DEMO_TEX_CH;
            p[3] = (uint16_t)(demo_clamp(gu, -32768, 32767) + 32768);
            p[4] = (uint16_t)(demo_clamp(gv, -32768, 32767) + 32768);
        }
}

/* ---- the shots ------------------------------------------------------------------------------ */

/* How one shot sees its tile: placement, rotation, lighting and sensor. */
struct demo_view {
    int64_t side;               /* tile side in pixels */
    int64_t cx, cy;             /* tile centre in pixels */
    int64_t kux, kuy, kvx, kvy; /* pixel step to texture step, Q24 texels */
    int64_t ltx, lty;           /* light direction in texture space, Q8 */
    int64_t shu, shv;           /* shadow offset, Q8 texels */
    int64_t base, gx, gy, vig;  /* illumination, Q16 */
    int64_t relief;             /* how strongly surface slope shades: raking light is grazing */
    int64_t wb[3];
    int32_t noise[511]; /* sensor noise for each triangular draw -255 .. 255 */
    int64_t bench[3];
    uint64_t noise_seed;
};

static void demo_view_init(struct demo_view *v, const struct demo_tile *t, unsigned index)
{
    const struct demo_shot *s = &t->shot[index];
    struct demo_rng r = {demo_mix(t->seed + 0x100 + index)};
    int64_t w = s->w, h = s->h, m = demo_min(w, h);
    v->side = m * (s->closeup ? demo_range(&r, 104, 120) : demo_range(&r, 62, 82)) / 100;
    /* Keep the whole (slightly turned) tile in frame, except in close-ups. */
    int64_t slack_x = s->closeup ? m / 12 : demo_clamp((w - v->side * 116 / 100) / 2, 0, w);
    int64_t slack_y = s->closeup ? m / 12 : demo_clamp((h - v->side * 116 / 100) / 2, 0, h);
    v->cx = w / 2 + demo_range(&r, -(int32_t)slack_x, (int32_t)slack_x);
    v->cy = h / 2 + demo_range(&r, -(int32_t)slack_y, (int32_t)slack_y);
    /* Rotation by the rational point ((1 - q^2) / (1 + q^2), 2q / (1 + q^2)) on the unit circle:
     * exact in integers, no trigonometry whose last bit could differ between libms. */
    int64_t q = demo_range(&r, -70, 70), den = 1000000 + q * q;
    int64_t cs = (1000000 - q * q) * 65536 / den, sn = 2000 * q * 65536 / den;
    v->kux = cs * DEMO_TEX * 256 / v->side;
    v->kuy = sn * DEMO_TEX * 256 / v->side;
    v->kvx = -sn * DEMO_TEX * 256 / v->side;
    v->kvy = cs * DEMO_TEX * 256 / v->side;
    const int16_t *dir = demo_light_dirs[demo_below(&r, 8)];
    v->ltx = (cs * dir[0] + sn * dir[1]) / 65536;
    v->lty = (-sn * dir[0] + cs * dir[1]) / 65536;
    v->shu = v->ltx * 14;
    v->shv = v->lty * 14;
    int64_t grad = s->raking ? 45000 : demo_range(&r, 5000, 16000);
    v->gx = dir[0] * grad / 256;
    v->gy = dir[1] * grad / 256;
    v->base = s->raking ? 48000 : demo_range(&r, 56000, 68000);
    v->vig = s->raking ? 12000 : demo_range(&r, 3000, 9000);
    v->relief = s->raking ? 40 : demo_range(&r, 3, 7);
    for (int c = 0; c < 3; c++)
        v->wb[c] = 65536 + demo_range(&r, -1800, 1800);
    int32_t amp = demo_range(&r, 300, 650);
    for (int32_t k = 0; k < 511; k++)
        v->noise[k] = (k - 255) * amp / 255;
    int64_t grey = demo_range(&r, 8500, 10500);
    v->bench[0] = grey;
    v->bench[1] = grey + 400;
    v->bench[2] = grey + 1200;
    v->noise_seed = demo_next(&r);
}

/* Bilinear sample of every texture channel at Q8 texel coordinates. */
static void demo_sample(const uint16_t *tex, int64_t u, int64_t v, int64_t out[DEMO_TEX_CH])
{
    const int64_t top = (DEMO_TEX - 1) * 256;
    u = demo_clamp(u, 0, top);
    v = demo_clamp(v, 0, top);
    /* Unsigned 32-bit is exact here (at most 65535 * 65536 + 32768) and faster. */
    uint32_t x0 = (uint32_t)u / 256, y0 = (uint32_t)v / 256, fx = (uint32_t)u % 256,
             fy = (uint32_t)v % 256;
    size_t right = x0 < DEMO_TEX - 1 ? DEMO_TEX_CH : 0;
    size_t down = y0 < DEMO_TEX - 1 ? (size_t)DEMO_TEX * DEMO_TEX_CH : 0;
    const uint16_t *p00 = tex + ((size_t)y0 * DEMO_TEX + x0) * DEMO_TEX_CH, *p10 = p00 + down;
    for (int c = 0; c < DEMO_TEX_CH; c++) {
        uint32_t a = p00[c] * (256 - fx) + p00[c + right] * fx;
        uint32_t b = p10[c] * (256 - fx) + p10[c + right] * fx;
        out[c] = (a * (256 - fy) + b * fy + 32768) / 65536;
    }
}

/* Signed distance inside the tile's square, Q8 texels (negative outside). */
static int64_t demo_inside(int64_t u, int64_t v)
{
    const int64_t edge = (int64_t)DEMO_TEX * 256;
    return demo_min(demo_min(u, edge - u), demo_min(v, edge - v));
}

static void demo_render(const struct demo_view *v, const uint16_t *tex, uint32_t w, uint32_t h,
                        int64_t *colx, uint16_t *canvas)
{
    /* Illumination is a sum of a column and a row term; folding the white balance into each
     * leaves one multiplication per sample. */
    for (uint32_t x = 0; x < w; x++) {
        int64_t d = 2 * (int64_t)x - w;
        int64_t light = v->gx * d / (2 * (int64_t)w) - v->vig * d * d / ((int64_t)w * w);
        for (int c = 0; c < 3; c++)
            colx[(size_t)x * 3 + (size_t)c] = light * v->wb[c] / 65536;
    }
    struct demo_rng noise = {v->noise_seed};
    for (uint32_t y = 0; y < h; y++) {
        int64_t d = 2 * (int64_t)y - h;
        int64_t light = v->base + v->gy * d / (2 * (int64_t)h) - v->vig * d * d / ((int64_t)h * h);
        int64_t rowlight[3];
        for (int c = 0; c < 3; c++)
            rowlight[c] = light * v->wb[c] / 65536;
        int64_t dx = -v->cx, dy = (int64_t)y - v->cy;
        int64_t u24 = ((int64_t)DEMO_TEX << 23) + dx * v->kux + dy * v->kuy;
        int64_t v24 = ((int64_t)DEMO_TEX << 23) + dx * v->kvx + dy * v->kvy;
        uint16_t *out = canvas + (size_t)y * w * 3;
        for (uint32_t x = 0; x < w; x++, u24 += v->kux, v24 += v->kvx, out += 3) {
            int64_t tu = u24 / 65536, tv = v24 / 65536, col[3] = {0, 0, 0};
            int64_t alpha = demo_clamp(demo_inside(tu, tv) * v->side / DEMO_TEX + 128, 0, 256);
            if (alpha < 256) {
                /* The tile's shadow falls on the bench away from the light, with a soft edge. */
                int64_t in_shadow = demo_inside(tu + v->shu, tv + v->shv) * v->side / DEMO_TEX;
                int64_t shadow = demo_clamp((in_shadow + 8 * 256) / 16, 0, 256);
                for (int c = 0; c < 3; c++)
                    col[c] = v->bench[c] * (65536 - shadow * 115) / 65536;
            }
            if (alpha > 0) {
                int64_t s[DEMO_TEX_CH];
                demo_sample(tex, tu, tv, s);
                /* Slopes rising towards the light face away from it. */
                int64_t rise = (v->ltx * (s[3] - 32768) + v->lty * (s[4] - 32768)) / 256;
                int64_t shade = demo_clamp(65536 - rise * v->relief, 13107, 131072);
                for (int c = 0; c < 3; c++) {
                    int64_t lit = s[c] * shade / 65536;
                    col[c] = alpha == 256 ? lit : col[c] + (lit - col[c]) * alpha / 256;
                }
            }
            uint64_t n = demo_next(&noise);
            for (int c = 0; c < 3; c++) {
                /* Triangular noise from two bytes: sensor noise without a long tail. */
                unsigned tri = (unsigned)((n >> (16 * c) & 0xFF) + (n >> (16 * c + 8) & 0xFF));
                int64_t gain = rowlight[c] + colx[(size_t)x * 3 + (size_t)c];
                int64_t val = col[c] * gain / 65536 + v->noise[tri];
                out[c] = (uint16_t)demo_clamp(val, 0, 65535);
            }
        }
    }
}

/* The capture software burns a scale bar (a fifth of the tile's width) into the lower left
 * corner. It also tells which way is up, which is what shows whether a reader applied the EXIF
 * orientation. */
static void demo_scale_bar(uint16_t *canvas, uint32_t w, uint32_t h, int64_t side)
{
    uint32_t len = (uint32_t)(side / 5), thick = h / 60 > 4 ? h / 60 : 4;
    uint32_t x0 = w / 25, y0 = h - h / 25 - thick;
    for (uint32_t y = y0; y < y0 + thick; y++)
        for (uint32_t x = x0; x < x0 + len && x < w; x++) {
            bool border = y == y0 || y == y0 + thick - 1 || x == x0 || x == x0 + len - 1;
            uint16_t *p = canvas + ((size_t)y * w + x) * 3;
            p[0] = p[1] = p[2] = border ? 0 : 65535;
        }
}

/* Stores the upright w x h view as a camera turned 90 degrees clockwise would (an h x w frame
 * whose viewer must turn it clockwise, i.e. EXIF orientation 6): stored (sx, sy) shows upright
 * (w - 1 - sy, sx). */
static void demo_turn_for_exif6(const uint16_t *up, uint32_t w, uint32_t h, uint16_t *out)
{
    for (uint32_t sy = 0; sy < w; sy++)
        for (uint32_t sx = 0; sx < h; sx++)
            memcpy(out + ((size_t)sy * h + sx) * 3, up + ((size_t)sx * w + (w - 1 - sy)) * 3,
                   3 * sizeof *out);
}

static uint32_t demo_luma(const uint16_t *p)
{
    return (19595u * p[0] + 38470u * p[1] + 7471u * p[2] + 32768u) >> 16; /* BT.601 */
}

static uint8_t demo_to8(uint32_t v)
{
    return (uint8_t)((v * 255u + 32767u) / 65535u);
}

/* Packs the 16-bit canvas into the file's sample layout; returns bytes per row. */
static size_t demo_pack(const uint16_t *img, uint32_t w, uint32_t h, enum demo_format fmt,
                        uint8_t *out)
{
    size_t npix = (size_t)w * h; /* fits: the buffers were sized for the largest frame */
    if (fmt == DEMO_JPEG_RGB || fmt == DEMO_PNG_RGB) {
        for (size_t i = 0; i < npix * 3; i++)
            out[i] = demo_to8(img[i]);
        return (size_t)w * 3;
    }
    if (fmt != DEMO_PNG_GREY16) {
        for (size_t i = 0; i < npix; i++)
            out[i] = demo_to8(demo_luma(img + i * 3));
        return w;
    }
    /* The raking-light camera software stretches levels, so the values span the 16-bit range
     * as a scanner must expect of real 16-bit data. */
    uint32_t lo = 65535, hi = 0;
    for (size_t i = 0; i < npix; i++) {
        uint32_t y = demo_luma(img + i * 3);
        lo = y < lo ? y : lo;
        hi = y > hi ? y : hi;
    }
    if (hi <= lo)
        hi = lo + 1;
    for (size_t i = 0; i < npix; i++) {
        uint32_t y = demo_luma(img + i * 3);
        uint32_t v = 600 + (uint32_t)((uint64_t)(y - lo) * 64300 / (hi - lo));
        out[2 * i] = (uint8_t)(v >> 8); /* PNG is big-endian */
        out[2 * i + 1] = (uint8_t)(v & 0xFF);
    }
    return (size_t)w * 2;
}

/* ---- encoders: both fill ctx->out and leave a message in ctx->msg on failure ---------------- */

static void demo_jpeg_error_exit(j_common_ptr cinfo)
{
    char *pub = (char *)cinfo->err;
    struct demo_jpeg *j = (struct demo_jpeg *)(pub - offsetof(struct demo_jpeg, pub));
    longjmp(j->jump, 1);
}

/* Encodes the packed samples in ctx->pix. */
static bool demo_jpeg_encode(struct demo_ctx *ctx, uint32_t w, uint32_t h, int comps, bool exif6)
{
    struct demo_jpeg *j = &ctx->jpeg;
    j->cinfo.err = jpeg_std_error(&j->pub);
    j->pub.error_exit = demo_jpeg_error_exit;
    j->mem = NULL;
    j->len = 0;
    if (setjmp(j->jump)) {
        char text[JMSG_LENGTH_MAX];
        j->pub.format_message((j_common_ptr)&j->cinfo, text);
        snprintf(ctx->msg, sizeof ctx->msg, "libjpeg: %s", text);
        jpeg_destroy_compress(&j->cinfo);
        free(j->mem);
        j->mem = NULL;
        return false;
    }
    jpeg_create_compress(&j->cinfo);
    jpeg_mem_dest(&j->cinfo, &j->mem, &j->len);
    j->cinfo.image_width = w;
    j->cinfo.image_height = h;
    j->cinfo.input_components = comps;
    j->cinfo.in_color_space = comps == 1 ? JCS_GRAYSCALE : JCS_RGB;
    jpeg_set_defaults(&j->cinfo);
    jpeg_set_quality(&j->cinfo, DEMO_JPEG_QUALITY, TRUE);
    /* The integer DCT is the one libjpeg-turbo computes identically on every machine. */
    j->cinfo.dct_method = JDCT_ISLOW;
    if (exif6)
        j->cinfo.write_JFIF_header = FALSE; /* cameras write Exif instead */
    jpeg_start_compress(&j->cinfo, TRUE);
    if (exif6)
        jpeg_write_marker(&j->cinfo, JPEG_APP0 + 1, demo_exif_orient6, sizeof demo_exif_orient6);
    while (j->cinfo.next_scanline < h) {
        JSAMPROW row = ctx->pix + (size_t)j->cinfo.next_scanline * w * (size_t)comps;
        jpeg_write_scanlines(&j->cinfo, &row, 1);
    }
    jpeg_finish_compress(&j->cinfo);
    bool ok = demo_buf_append(&ctx->out, j->mem, j->len);
    if (!ok)
        snprintf(ctx->msg, sizeof ctx->msg, "out of memory");
    jpeg_destroy_compress(&j->cinfo);
    free(j->mem);
    j->mem = NULL;
    return ok;
}

static void demo_png_error(png_structp png, png_const_charp text)
{
    struct demo_ctx *ctx = png_get_error_ptr(png);
    snprintf(ctx->msg, sizeof ctx->msg, "libpng: %s", text);
    png_longjmp(png, 1);
}

static void demo_png_write(png_structp png, png_bytep data, size_t len)
{
    struct demo_ctx *ctx = png_get_io_ptr(png);
    if (!demo_buf_append(&ctx->out, data, len))
        png_error(png, "out of memory");
}

static void demo_png_flush(png_structp png)
{
    (void)png; /* the bytes stay in memory until the file is written whole */
}

/* Encodes the packed samples in ctx->pix. */
static bool demo_png_encode(struct demo_ctx *ctx, uint32_t w, uint32_t h, size_t stride,
                            int colour, int depth)
{
    /* A warning would mean the file is not what was asked for: treat it as an error too. */
    png_structp png =
        png_create_write_struct(PNG_LIBPNG_VER_STRING, ctx, demo_png_error, demo_png_error);
    png_infop info = png ? png_create_info_struct(png) : NULL;
    if (!info) {
        png_destroy_write_struct(&png, NULL);
        snprintf(ctx->msg, sizeof ctx->msg, "libpng: cannot create a writer");
        return false;
    }
    if (setjmp(png_jmpbuf(png))) {
        png_destroy_write_struct(&png, &info);
        return false;
    }
    png_set_write_fn(png, ctx, demo_png_write, demo_png_flush);
    png_set_IHDR(png, info, w, h, depth, colour, PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT,
                 PNG_FILTER_TYPE_DEFAULT);
    /* A fixed level and a single filter leave libpng no heuristic choice to vary; no tIME chunk
     * is ever written, so the bytes do not depend on the clock. */
    png_set_compression_level(png, DEMO_PNG_LEVEL);
    png_set_filter(png, PNG_FILTER_TYPE_BASE, PNG_FILTER_PAETH);
    png_write_info(png, info);
    for (uint32_t y = 0; y < h; y++)
        png_write_row(png, ctx->pix + (size_t)y * stride);
    png_write_end(png, NULL);
    png_destroy_write_struct(&png, &info);
    return true;
}

/* ---- files ---------------------------------------------------------------------------------- */

/* Sets ctx->path to OUTDIR/glaze-tiles[/folder][/name]. */
static const char *demo_join(struct demo_ctx *ctx, const char *folder, const char *name)
{
    int n = snprintf(ctx->path, sizeof ctx->path, "%s/%s%s%s%s%s", ctx->outdir, DEMO_ROOT,
                     folder ? "/" : "", folder ? folder : "", name ? "/" : "", name ? name : "");
    if (n < 0 || (size_t)n >= sizeof ctx->path)
        demo_fail("output path is too long", ctx->outdir);
    return ctx->path;
}

static void demo_write_file(const char *path, const void *data, size_t len)
{
    FILE *f = fopen(path, "wbx"); /* x: never replace a file that is already there */
    if (!f)
        demo_fail_errno("cannot create file", path);
    if (len && fwrite(data, 1, len, f) != len) {
        int e = errno;
        fclose(f);
        errno = e;
        demo_fail_errno("cannot write file", path);
    }
    if (fclose(f) != 0)
        demo_fail_errno("cannot write file", path);
}

static void demo_mkdir(const char *path)
{
    if (mkdir(path, 0777) != 0)
        demo_fail_errno("cannot create directory", path);
}

/* OUTDIR may exist if it is empty, so that a freshly made temporary directory works. */
static void demo_make_outdir(const char *dir)
{
    if (mkdir(dir, 0777) == 0)
        return;
    if (errno != EEXIST)
        demo_fail_errno("cannot create directory", dir);
    DIR *d = opendir(dir);
    if (!d)
        demo_fail_errno("cannot open directory", dir);
    struct dirent *e;
    errno = 0;
    while ((e = readdir(d)) != NULL)
        if (strcmp(e->d_name, ".") != 0 && strcmp(e->d_name, "..") != 0) {
            closedir(d);
            demo_fail("output directory exists and is not empty", dir);
        }
    if (errno != 0)
        demo_fail_errno("cannot read directory", dir);
    closedir(d);
}

static void demo_write_shot(struct demo_ctx *ctx, const struct demo_tile *t, unsigned index)
{
    const struct demo_shot *s = &t->shot[index];
    enum demo_format fmt = (enum demo_format)s->format;
    bool is_png = fmt == DEMO_PNG_RGB || fmt == DEMO_PNG_GREY8 || fmt == DEMO_PNG_GREY16;
    char name[32];
    snprintf(name, sizeof name, "T%04u_%c.%s", t->id, 'a' + (int)index, is_png ? "png" : "jpg");
    demo_join(ctx, demo_class_name[t->cls], name);

    struct demo_view view;
    demo_view_init(&view, t, index);
    demo_render(&view, ctx->tex, s->w, s->h, ctx->colx, ctx->canvas);
    demo_scale_bar(ctx->canvas, s->w, s->h, view.side);
    const uint16_t *img = ctx->canvas;
    uint32_t w = s->w, h = s->h;
    if (s->fate == DEMO_EXIF6) {
        demo_turn_for_exif6(ctx->canvas, s->w, s->h, ctx->turned);
        img = ctx->turned;
        w = s->h;
        h = s->w;
    }
    size_t stride = demo_pack(img, w, h, fmt, ctx->pix);

    ctx->out.len = 0;
    bool ok;
    switch (fmt) {
    case DEMO_JPEG_RGB: ok = demo_jpeg_encode(ctx, w, h, 3, s->fate == DEMO_EXIF6); break;
    case DEMO_JPEG_GREY: ok = demo_jpeg_encode(ctx, w, h, 1, false); break;
    case DEMO_PNG_RGB: ok = demo_png_encode(ctx, w, h, stride, PNG_COLOR_TYPE_RGB, 8); break;
    case DEMO_PNG_GREY8: ok = demo_png_encode(ctx, w, h, stride, PNG_COLOR_TYPE_GRAY, 8); break;
    default: ok = demo_png_encode(ctx, w, h, stride, PNG_COLOR_TYPE_GRAY, 16); break;
    }
    if (!ok)
        demo_fail(ctx->msg, ctx->path);
    /* The truncated file stands for a copy that was cut off: half the bytes, a normal name. */
    size_t keep = s->fate == DEMO_TRUNCATE ? ctx->out.len / 2 : ctx->out.len;
    demo_write_file(ctx->path, ctx->out.data, keep);
    ctx->per_class[t->cls]++;
    if (is_png)
        ctx->npng++;
    else
        ctx->njpeg++;
    if (s->fate == DEMO_DUPLICATE) {
        /* A copy filed as a clean tile under a new number: the labelling slip that makes one
         * picture land in two classes, and possibly in two splits. */
        snprintf(name, sizeof name, "T%04u_a.jpg", ctx->dup_id);
        demo_write_file(demo_join(ctx, demo_class_name[DEMO_SOUND], name), ctx->out.data,
                        ctx->out.len);
        ctx->per_class[DEMO_SOUND]++;
        ctx->njpeg++;
    }
}

static const char demo_notes[] =
    "Glaze test tiles, bench camera (synthetic demo data written by kiln-demo-data).\n"
    "\n"
    "Test tiles from one series of glaze firings, photographed after firing to train a\n"
    "defect classifier. The folder a picture is in is the defect seen on the tile:\n"
    "\n"
    "  crawling    glaze pulled back, leaving bare patches of clay\n"
    "  crazing     network of fine dark cracks in the glaze\n"
    "  pinholing   small dark pits\n"
    "  sound       clean glaze\n"
    "\n"
    "Each tile was photographed 2-4 times (lighting, position, slight rotation, close-up),\n"
    "and the file name carries the tile number: T0107_b.jpg is shot b of tile 107. Shots of\n"
    "one tile must stay in one split: --group-regex '/(T[0-9]+)_'.\n"
    "Raking-light shots were saved as 16-bit grey PNG; a few shots are 8-bit grey.\n";

/* Bytes that only need to look like what the OS leaves behind: a scanner skips these by name. */
static const uint8_t demo_ds_store[] = {0, 0, 0, 1, 'B', 'u', 'd', '1', 0, 0, 0x10, 0,
                                        0, 0, 0x08, 0, 0, 0, 0x10, 0, 0, 0, 0, 0x0C};
static const uint8_t demo_thumbs_db[] = {0xD0, 0xCF, 0x11, 0xE0, 0xA1, 0xB1, 0x1A, 0xE1, 0, 0, 0,
                                         0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0x3E, 0, 3, 0,
                                         0xFE, 0xFF, 9, 0, 6, 0, 0, 0, 0, 0};

static void demo_usage(FILE *f)
{
    fprintf(f, "usage: kiln-demo-data OUTDIR\n\n"
               "Writes OUTDIR/" DEMO_ROOT "/, a deterministic demo folder of glaze test tile\n"
               "photographs in four defect classes, for trying kiln. OUTDIR must not exist or\n"
               "must be empty. Shots of one tile share a group: --group-regex '/(T[0-9]+)_'.\n");
}

int main(int argc, char **argv)
{
    if (argc == 2 && (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0)) {
        demo_usage(stdout);
        return 0;
    }
    if (argc != 2 || argv[1][0] == '\0' || argv[1][0] == '-') {
        demo_usage(stderr);
        return 2;
    }
    struct demo_ctx *ctx = calloc(1, sizeof *ctx); /* large: keep it off the stack */
    if (!ctx)
        demo_fail("out of memory", "context");
    ctx->outdir = argv[1];
    demo_plan(ctx);

    /* One set of buffers, sized for the largest frame planned, serves every shot. */
    size_t max_px = 0, max_side = 0;
    for (unsigned i = 0; i < DEMO_NTILES; i++)
        for (unsigned k = 0; k < ctx->tile[i].nshots; k++) {
            const struct demo_shot *s = &ctx->tile[i].shot[k];
            size_t px = (size_t)s->w * s->h;
            max_px = px > max_px ? px : max_px;
            max_side = s->w > max_side ? s->w : max_side;
            max_side = s->h > max_side ? s->h : max_side;
        }
    const size_t texels = (size_t)DEMO_TEX * DEMO_TEX;
    ctx->tex = demo_alloc(texels, DEMO_TEX_CH, sizeof(uint16_t), "tile texture");
    ctx->height = demo_alloc(texels, 1, sizeof(uint16_t), "tile texture");
    ctx->canvas = demo_alloc(max_px, 3, sizeof(uint16_t), "image buffer");
    ctx->turned = demo_alloc(max_px, 3, sizeof(uint16_t), "image buffer");
    ctx->pix = demo_alloc(max_px, 3, 1, "image buffer");
    ctx->colx = demo_alloc(max_side, 3, sizeof(int64_t), "image buffer");

    demo_make_outdir(ctx->outdir);
    demo_mkdir(demo_join(ctx, NULL, NULL));
    for (int c = 0; c < DEMO_NCLASS; c++)
        demo_mkdir(demo_join(ctx, demo_class_name[c], NULL));
    for (unsigned i = 0; i < DEMO_NTILES; i++) {
        demo_tile_texture(&ctx->tile[i], ctx->tex, ctx->height);
        for (unsigned k = 0; k < ctx->tile[i].nshots; k++)
            demo_write_shot(ctx, &ctx->tile[i], k);
    }
    demo_write_file(demo_join(ctx, NULL, "notes.txt"), demo_notes, sizeof demo_notes - 1);
    demo_write_file(demo_join(ctx, NULL, ".DS_Store"), demo_ds_store, sizeof demo_ds_store);
    demo_write_file(demo_join(ctx, demo_class_name[DEMO_SOUND], "Thumbs.db"), demo_thumbs_db,
                    sizeof demo_thumbs_db);

    unsigned total = ctx->njpeg + ctx->npng;
    printf("kiln-demo-data: wrote %u images of %u tiles (crawling %u, crazing %u, pinholing %u, "
           "sound %u; %u JPEG, %u PNG; one truncated, one duplicate) and 3 non-image files to "
           "%s/" DEMO_ROOT "\n",
           total, DEMO_NTILES, ctx->per_class[DEMO_CRAWLING], ctx->per_class[DEMO_CRAZING],
           ctx->per_class[DEMO_PINHOLING], ctx->per_class[DEMO_SOUND], ctx->njpeg, ctx->npng,
           ctx->outdir);
    if (fflush(stdout) != 0)
        demo_fail_errno("cannot write", "standard output");
    free(ctx->out.data);
    free(ctx->colx);
    free(ctx->pix);
    free(ctx->turned);
    free(ctx->canvas);
    free(ctx->height);
    free(ctx->tex);
    free(ctx);
    return 0;
}
