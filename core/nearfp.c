/* Near-duplicate fingerprint and pixel check (method in nearfp.h, specification in
 * docs/near-duplicates.md). All arithmetic that decides anything is on integers: the cosine
 * tables are fixed Q14 constants, sums are exact, square roots are integer square roots. */
#include "nearfp.h"

#include <assert.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#if defined(__x86_64__) || defined(__i386__)
#include <immintrin.h>
#endif

#define G KILN_NEARFP_GRID
#define S KILN_NEARFP_SIDE
#define NCELL (S * S)
#define CENTRE_FROM 6 /* central region: grid cells 6..25 on both axes */
#define CENTRE_N 20
#define HASH_K 8   /* hash coefficients: u, v < 8, for both hashes */
#define TRIM 31    /* cells left out of the trimmed correlations (12 % of 256) */
#define Q20 (INT64_C(1) << 20)

/* round(16384 * cos(pi * k / 64)), k = 0..32, halves away from zero (generated with numpy; the
 * unit test recomputes it). The other k follow by symmetry, so the table is exactly even and
 * odd where the cosine is, which makes the orientation identities hold exactly. */
static const int32_t cos64[33] = {16384, 16364, 16305, 16207, 16069, 15893, 15679, 15426, 15137,
                                  14811, 14449, 14053, 13623, 13160, 12665, 12140, 11585, 11003,
                                  10394, 9760,  9102,  8423,  7723,  7005,  6270,  5520,  4756,
                                  3981,  3196,  2404,  1606,  804,   0};
/* round(16384 * cos(pi * k / 40)), k = 0..20: the 20-point DCT of the central region. */
static const int32_t cos40[21] = {16384, 16333, 16182, 15931, 15582, 15137, 14598,
                                  13970, 13255, 12458, 11585, 10641, 9630,  8561,
                                  7438,  6270,  5063,  3825,  2563,  1285,  0};

/* 16384 cos(pi k / (2n)) for the n-point DCT (n = 32 or 20) from the quarter-wave table: the
 * cosine has period 4n, is even about 0 and 2n, and odd about n. */
static int32_t qcos(unsigned k, unsigned n)
{
    const int32_t *t = n == G ? cos64 : cos40;
    k %= 4 * n;
    if (k > 2 * n)
        k = 4 * n - k;
    if (k > n)
        return -t[2 * n - k];
    return t[k];
}

/* floor(sqrt(x)), exact: a double estimate corrected with integer arithmetic, so the result
 * does not depend on how the platform rounds (the correction loops run at most a step or two). */
static uint64_t isqrt64(uint64_t x)
{
    uint64_t r = (uint64_t)sqrt((double)x);
    if (r > UINT64_C(4294967295))
        r = UINT64_C(4294967295);
    while (r * r > x)
        r--;
    while (r < UINT64_C(4294967295) && (r + 1) * (r + 1) <= x)
        r++;
    return r;
}

static uint64_t isqrt128(unsigned __int128 x)
{
    if (x >> 64 == 0)
        return isqrt64((uint64_t)x);
    unsigned __int128 r = 0, bit = (unsigned __int128)1 << 126;
    while (bit > x)
        bit >>= 2;
    while (bit) {
        if (x >= r + bit) {
            x -= r + bit;
            r = (r >> 1) + bit;
        } else {
            r >>= 1;
        }
        bit >>= 2;
    }
    return (uint64_t)r;
}

/* ---- the grid ----------------------------------------------------------------------------- */

/* Alpha compositing over white, rounded to nearest, as core/convert.c does. */
static inline uint32_t over_white(uint32_t c, uint32_t a, uint32_t maxv)
{
    return (uint32_t)(((uint64_t)c * a + (uint64_t)maxv * (maxv - a) + maxv / 2) / maxv);
}

/* Luma of pixel x of a row, and its colour composited over white in px (when 3+ channels). */
static inline uint32_t luma_at(const struct kiln_image *img, const void *row, uint32_t x,
                               uint32_t px[3])
{
    const unsigned ch = img->channels;
    uint32_t r, g, b, a, maxv = img->depth == 8 ? 255u : 65535u;
    if (img->depth == 8) {
        const uint8_t *p = (const uint8_t *)row + (size_t)x * ch;
        r = p[0];
        g = ch >= 3 ? p[1] : r;
        b = ch >= 3 ? p[2] : r;
        a = ch == 2 ? p[1] : ch == 4 ? p[3] : maxv;
    } else {
        const uint16_t *p = (const uint16_t *)row + (size_t)x * ch;
        r = p[0];
        g = ch >= 3 ? p[1] : r;
        b = ch >= 3 ? p[2] : r;
        a = ch == 2 ? p[1] : ch == 4 ? p[3] : maxv;
    }
    if (a != maxv) {
        r = over_white(r, a, maxv);
        g = over_white(g, a, maxv);
        b = over_white(b, a, maxv);
    }
    px[0] = r;
    px[1] = g;
    px[2] = b;
    return ch >= 3 ? (299u * r + 587u * g + 114u * b + 500u) / 1000u : r;
}

/* One pixel row's luma (and colour composited over white, when 3+ channels) into lum and px.
 * The common cases (8 bits without alpha) get loops of their own; the sums they feed are the
 * same integers either way. */
static void row_values(const struct kiln_image *img, const uint8_t *line, uint32_t *lum,
                       uint32_t *px[3])
{
    const uint32_t W = img->width;
    if (img->depth == 8 && img->channels == 1) {
        for (uint32_t x = 0; x < W; x++)
            lum[x] = line[x];
        return;
    }
    if (img->depth == 16 && img->channels == 1) {
        const uint16_t *p = (const uint16_t *)(const void *)line;
        for (uint32_t x = 0; x < W; x++)
            lum[x] = p[x];
        return;
    }
    if (img->depth == 8 && img->channels == 3) {
        for (uint32_t x = 0; x < W; x++) {
            const uint32_t r = line[3 * x], g = line[3 * x + 1], b = line[3 * x + 2];
            px[0][x] = r;
            px[1][x] = g;
            px[2][x] = b;
            lum[x] = (299u * r + 587u * g + 114u * b + 500u) / 1000u;
        }
        return;
    }
    for (uint32_t x = 0; x < W; x++) {
        uint32_t c[3];
        lum[x] = luma_at(img, line, x, c);
        if (img->channels >= 3)
            for (int k = 0; k < 3; k++)
                px[k][x] = c[k];
    }
}

/* Where the cells of one axis fall on its pixels: pixel t covers [32t, 32t + 32) and cell c
 * covers [cN, cN + N) (N the axis's pixels). With N >= 32 every pixel inside a cell has weight
 * 32, so a cell is the run of pixels first[c]..last[c], the two ends weighted by their exact
 * overlaps wf[c] and wl[c] (a single pixel when first == last, weighted wf). Returns 0 when
 * N < 32, where a pixel can meet more than two cells (the general loop below). */
struct axis_runs {
    uint32_t first[G], last[G];
    uint32_t wf[G], wl[G];
};

static int axis_runs(uint64_t N, struct axis_runs *r)
{
    if (N < G)
        return 0;
    for (uint64_t c = 0; c < G; c++) {
        const uint64_t lo = c * N, hi = lo + N, f = lo / 32, l = (hi - 1) / 32;
        const uint64_t fe = 32 * f + 32, ls = 32 * l;
        r->first[c] = (uint32_t)f;
        r->last[c] = (uint32_t)l;
        r->wf[c] = (uint32_t)((fe < hi ? fe : hi) - lo);
        r->wl[c] = (uint32_t)(hi - (ls > lo ? ls : lo));
    }
    return 1;
}

/* The weighted sum of a row's values over cell c's run. */
static inline uint64_t run_sum(const struct axis_runs *r, unsigned c, const uint32_t *v)
{
    const uint32_t f = r->first[c], l = r->last[c];
    if (f == l)
        return (uint64_t)r->wf[c] * v[f];
    uint64_t inner = 0;
    for (uint32_t x = f + 1; x < l; x++)
        inner += v[x];
    return 32 * inner + (uint64_t)r->wf[c] * v[f] + (uint64_t)r->wl[c] * v[l];
}

/* 8-bit RGB luma as everywhere in this module: (299r + 587g + 114b + 500) div 1000. */
static inline uint32_t luma8(const uint8_t *p)
{
    return (299u * p[0] + 587u * p[1] + 114u * p[2] + 500u) / 1000u;
}

/* Sums of luma, r, g and b over pixels [x0, x1) of an 8-bit RGB row. */
static void rgb8_sums_scalar(const uint8_t *line, uint32_t x0, uint32_t x1, uint64_t s[4])
{
    uint64_t sl = 0, sr = 0, sg = 0, sb = 0;
    for (uint32_t x = x0; x < x1; x++) {
        const uint8_t *p = line + (size_t)3 * x;
        sl += luma8(p);
        sr += p[0];
        sg += p[1];
        sb += p[2];
    }
    s[0] += sl, s[1] += sr, s[2] += sg, s[3] += sb;
}

#if defined(__x86_64__) || defined(__i386__)
/* The same eight pixels at a time. The division by 1000 is floor(floor(t / 8) * 33555 / 2^22),
 * equal for every t up to 255 500 (checked exhaustively by test_grid in test_nearfp.c); t / 8
 * fits 15 bits, so the product's top 16 bits come from one 16-bit multiply (the lane's high
 * half is zero). The weighted sum 299 r + 587 g + 114 b is two multiply-adds of 16-bit pairs
 * ((r, g) and (b, 0)), cheaper than three 32-bit multiplies. */
__attribute__((target("avx2"))) static void rgb8_sums_avx2(const uint8_t *line, uint32_t x0,
                                                           uint32_t x1, uint64_t s[4])
{
    const __m256i spread = _mm256_setr_epi32(0, 1, 2, 3, 3, 4, 5, 6);
    const __m256i mr = _mm256_setr_epi8(0, -1, -1, -1, 3, -1, -1, -1, 6, -1, -1, -1, 9, -1, -1, -1,
                                        0, -1, -1, -1, 3, -1, -1, -1, 6, -1, -1, -1, 9, -1, -1, -1);
    const __m256i mg = _mm256_add_epi8(mr, _mm256_set1_epi32(1));
    const __m256i mb = _mm256_add_epi8(mr, _mm256_set1_epi32(2));
    const __m256i wrg = _mm256_set1_epi32(587 << 16 | 299), wb = _mm256_set1_epi32(114);
    const __m256i half = _mm256_set1_epi32(500), inv = _mm256_set1_epi32(33555);
    uint32_t x = x0;
    /* 32 bytes are read for 24: stop while 11 pixels remain inside [x0, x1). */
    while ((uint64_t)x + 11 <= x1) {
        /* At most 2^24 pixels a round, so that a round's totals (255 * 2^24) fit 32 bits. */
        const uint64_t stop = (uint64_t)x + (UINT32_C(1) << 24);
        __m256i al = _mm256_setzero_si256(), ar = al, ag = al, ab = al;
        for (; (uint64_t)x + 11 <= x1 && x < stop; x += 8) {
            __m256i v = _mm256_loadu_si256((const __m256i *)(line + (size_t)3 * x));
            v = _mm256_permutevar8x32_epi32(v, spread); /* pixels 4-7 to the high lane */
            const __m256i r = _mm256_shuffle_epi8(v, mr), g = _mm256_shuffle_epi8(v, mg),
                          b = _mm256_shuffle_epi8(v, mb);
            __m256i t = _mm256_madd_epi16(_mm256_or_si256(r, _mm256_slli_epi32(g, 16)), wrg);
            t = _mm256_add_epi32(_mm256_add_epi32(t, _mm256_madd_epi16(b, wb)), half);
            t = _mm256_srli_epi32(_mm256_mulhi_epu16(_mm256_srli_epi32(t, 3), inv), 6);
            al = _mm256_add_epi32(al, t);
            ar = _mm256_add_epi32(ar, r);
            ag = _mm256_add_epi32(ag, g);
            ab = _mm256_add_epi32(ab, b);
        }
        /* The four totals across the lanes by vector adds (a cell is a few dozen pixels, so
         * this step costs as much as the loop when done lane by lane). */
        const __m256i h = _mm256_hadd_epi32(_mm256_hadd_epi32(al, ar), _mm256_hadd_epi32(ag, ab));
        uint32_t tot[4];
        _mm_storeu_si128((__m128i *)tot, _mm_add_epi32(_mm256_castsi256_si128(h),
                                                       _mm256_extracti128_si256(h, 1)));
        for (int k = 0; k < 4; k++)
            s[k] += tot[k];
    }
    rgb8_sums_scalar(line, x, x1, s);
}
#endif

/* Cell sums of one 8-bit RGB row when every cell is a run of pixels: the luma and colour
 * values are summed straight from the row, in one pass instead of four over row_values'
 * arrays (the common case of a fingerprint, so worth its own loop). */
static void rgb8_row_cells(const struct axis_runs *xr, const uint8_t *line, int wide,
                           uint64_t row[G], uint64_t crow[3][G])
{
    for (unsigned c = 0; c < G; c++) {
        const uint32_t f = xr->first[c], l = xr->last[c];
        const uint8_t *pf = line + (size_t)3 * f, *pl = line + (size_t)3 * l;
        const uint64_t wf = xr->wf[c], wl = xr->wl[c];
        if (f == l) {
            row[c] = wf * luma8(pf);
            for (int k = 0; k < 3; k++)
                crow[k][c] = wf * pf[k];
            continue;
        }
        uint64_t s[4] = {0, 0, 0, 0};
#if defined(__x86_64__) || defined(__i386__)
        if (wide)
            rgb8_sums_avx2(line, f + 1, l, s);
        else
#endif
            rgb8_sums_scalar(line, f + 1, l, s);
        row[c] = 32 * s[0] + wf * luma8(pf) + wl * luma8(pl);
        for (int k = 0; k < 3; k++)
            crow[k][c] = 32 * s[k + 1] + wf * pf[k] + wl * pl[k];
    }
}

/* The cells pixel t of an axis of N pixels meets, with weights: the general case. */
static unsigned pixel_cells(uint64_t t, uint64_t N, uint32_t *cell, uint64_t *w)
{
    const uint64_t lo = 32 * t, hi = lo + 32;
    unsigned k = 0;
    for (uint64_t c = lo / N; c < G && c * N < hi; c++) {
        const uint64_t cl = c * N, ch = cl + N;
        cell[k] = (uint32_t)c;
        w[k++] = (hi < ch ? hi : ch) - (lo > cl ? lo : cl);
    }
    return k;
}

/* Cell means of the luma on the G x G grid, in 1/16 units of the 16-bit scale. Pixel x covers
 * [32x, 32x + 32) and cell i covers [iW, iW + W) in units of 1/(32W) of the width, so every
 * weight is an integer overlap and each cell's weights sum to W (and H vertically). Returns
 * KILN_ENOMEM when the row buffers cannot be had. */
static int grid_means(const struct kiln_image *img, int wide, int32_t g[G][G],
                      int64_t rgb[3][G][G])
{
    const uint64_t W = img->width, H = img->height;
    const int colour = img->channels >= 3;
    uint32_t *lum = malloc(W * sizeof *lum * (colour ? 4 : 1));
    if (!lum)
        return KILN_ENOMEM;
    uint32_t *px[3] = {lum + W, lum + 2 * W, lum + 3 * W};
    struct axis_runs xr;
    const int fast = axis_runs(W, &xr);
    uint64_t sum[G][G], csum[3][G][G];
    memset(sum, 0, sizeof sum);
    if (colour)
        memset(csum, 0, sizeof csum);
    for (uint64_t y = 0; y < H; y++) {
        uint64_t row[G] = {0}, crow[3][G] = {{0}};
        const uint8_t *line = (const uint8_t *)img->data + y * img->stride;
        if (fast && img->depth == 8 && img->channels == 3) {
            rgb8_row_cells(&xr, line, wide, row, crow);
        } else if (fast) {
            row_values(img, line, lum, px);
            for (unsigned c = 0; c < G; c++) {
                row[c] = run_sum(&xr, c, lum);
                for (int k = 0; colour && k < 3; k++)
                    crow[k][c] = run_sum(&xr, c, px[k]);
            }
        } else {
            row_values(img, line, lum, px);
            for (uint64_t x = 0; x < W; x++) {
                uint32_t cell[G];
                uint64_t w[G];
                const unsigned n = pixel_cells(x, W, cell, w);
                for (unsigned k = 0; k < n; k++) {
                    row[cell[k]] += w[k] * lum[x];
                    for (int j = 0; colour && j < 3; j++)
                        crow[j][cell[k]] += w[k] * px[j][x];
                }
            }
        }
        uint32_t cell[G];
        uint64_t w[G];
        const unsigned n = pixel_cells(y, H, cell, w);
        for (unsigned k = 0; k < n; k++)
            for (uint32_t c = 0; c < G; c++) {
                sum[cell[k]][c] += w[k] * row[c];
                if (colour)
                    for (int j = 0; j < 3; j++)
                        csum[j][cell[k]][c] += w[k] * crow[j][c];
            }
    }
    free(lum);
    /* Each cell's weights total W * H; 8-bit samples move to the 16-bit scale (x 257). */
    const unsigned __int128 scale = 16u * (img->depth == 8 ? 257u : 1u), area = W * H;
    for (int r = 0; r < G; r++)
        for (int c = 0; c < G; c++) {
            g[r][c] = (int32_t)((sum[r][c] * scale + area / 2) / area);
            for (int k = 0; k < 3; k++)
                rgb[k][r][c] = colour ? (int64_t)((csum[k][r][c] * scale + area / 2) / area) : 0;
        }
    return KILN_OK;
}

/* The grid (and colour grid, which the caller frees) of a valid image. */
static int checked_grid(const struct kiln_image *img, int wide, int32_t g[G][G],
                        int64_t (**rgb)[G][G], struct kiln_err *err)
{
    if (!img || !img->data || img->width == 0 || img->height == 0 || img->channels < 1 ||
        img->channels > 4 || (img->depth != 8 && img->depth != 16))
        return kiln_err_set(err, KILN_EINVAL, "no picture to fingerprint");
    if ((uint64_t)img->width * img->height > (UINT64_C(1) << 40))
        return kiln_err_set(err, KILN_ETOOLARGE,
                            "%ux%u is too large for the near-duplicate fingerprint (2^40 pixels)",
                            img->width, img->height);
    *rgb = malloc(3 * sizeof **rgb);
    if (!*rgb || grid_means(img, wide, g, *rgb) != KILN_OK) {
        free(*rgb);
        *rgb = NULL;
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate the fingerprint's grids");
    }
    return KILN_OK;
}

/* Whether this processor runs the AVX2 loop of the grid. */
static int vector_unit(void)
{
#if defined(__x86_64__) || defined(__i386__)
    return __builtin_cpu_supports("avx2");
#else
    return 0;
#endif
}

int kiln_nearfp_grid(const struct kiln_image *img, int32_t grid[KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                     struct kiln_err *err)
{
    return kiln_nearfp_grid_path(img, 1, grid, NULL, err);
}

int kiln_nearfp_grid_path(const struct kiln_image *img, int vector,
                          int32_t grid[KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                          int64_t colour[3][KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                          struct kiln_err *err)
{
    int64_t(*rgb)[G][G] = NULL;
    int rc = checked_grid(img, vector && vector_unit(), grid, &rgb, err);
    if (!rc && colour)
        memcpy(colour, rgb, 3 * sizeof *rgb);
    free(rgb);
    return rc;
}

/* ---- DCT hashes ----------------------------------------------------------------------------- */

/* Unnormalised 2-D DCT-II coefficients c[v][u], u, v < k, of the n x n block of g starting at
 * (from, from), after subtracting the block's mean (rounded), times 2^28. Exact integers:
 * |g - mean| < 2^21, so rows stay below 2^40 and coefficients below 2^59. */
static void dct_block(const int32_t g[G][G], unsigned from, unsigned n, unsigned k,
                      int64_t c[HASH_K][HASH_K]);

void kiln_nearfp_dct(const int32_t g[G][G], unsigned from, unsigned n, int64_t c[8][8])
{
    static_assert(HASH_K == 8, "the exposed DCT is the hashes' 8x8 block");
    dct_block(g, from, n, HASH_K, c);
}

static void dct_block(const int32_t g[G][G], unsigned from, unsigned n, unsigned k,
                      int64_t c[HASH_K][HASH_K])
{
    int64_t total = 0;
    for (unsigned y = 0; y < n; y++)
        for (unsigned x = 0; x < n; x++)
            total += g[from + y][from + x];
    const int64_t cells = (int64_t)n * n, mean = (total + cells / 2) / cells;
    int64_t basis[HASH_K][G], rowc[G][HASH_K];
    for (unsigned u = 0; u < k; u++)
        for (unsigned x = 0; x < n; x++)
            basis[u][x] = qcos((2 * x + 1) * u, n);
    for (unsigned y = 0; y < n; y++)
        for (unsigned u = 0; u < k; u++) {
            int64_t acc = 0;
            for (unsigned x = 0; x < n; x++)
                acc += basis[u][x] * (g[from + y][from + x] - mean);
            rowc[y][u] = acc;
        }
    for (unsigned v = 0; v < k; v++)
        for (unsigned u = 0; u < k; u++) {
            int64_t acc = 0;
            for (unsigned y = 0; y < n; y++)
                acc += basis[v][y] * rowc[y][u];
            c[v][u] = acc;
        }
}

static uint64_t sign_bits(const int64_t c[HASH_K][HASH_K], unsigned k)
{
    uint64_t h = 0;
    for (unsigned v = 0; v < k; v++)
        for (unsigned u = 0; u < k; u++)
            if ((u || v) && c[v][u] > 0)
                h |= UINT64_C(1) << (64 - (k * v + u));
    return h;
}

uint64_t kiln_nearfp_orient_hash(uint64_t hash, unsigned o)
{
    const unsigned k = HASH_K;
    if (o < 1 || o > 8)
        o = 1;
    const int transpose = o >= 5, fx = o == 2 || o == 3 || o == 6 || o == 7,
              fy = o == 3 || o == 4 || o == 7 || o == 8;
    uint64_t out = 0;
    for (unsigned v = 0; v < k; v++)
        for (unsigned u = 0; u < k; u++) {
            if (!u && !v)
                continue;
            unsigned sv = transpose ? u : v, su = transpose ? v : u;
            uint64_t bit = hash >> (64 - (k * sv + su)) & 1;
            bit ^= (uint64_t)((fx && (u & 1)) ^ (fy && (v & 1)));
            out |= bit << (64 - (k * v + u));
        }
    return out;
}

/* ---- thumbnail -------------------------------------------------------------------------------- */

/* Ascending order of NCELL non-negative values below 2^24: three byte-wide passes of a stable
 * counting sort (faster than qsort with a comparator for the one sort every fingerprint makes). */
static void sort_cells(int32_t *v)
{
    int32_t tmp[NCELL], *src = v, *dst = tmp;
    for (int shift = 0; shift < 24; shift += 8) {
        uint32_t count[257] = {0};
        for (int i = 0; i < NCELL; i++)
            count[((uint32_t)src[i] >> shift & 255) + 1]++;
        for (int k = 0; k < 256; k++)
            count[k + 1] += count[k];
        for (int i = 0; i < NCELL; i++)
            dst[count[(uint32_t)src[i] >> shift & 255]++] = src[i];
        int32_t *t = src;
        src = dst;
        dst = t;
    }
    if (src != v)
        memcpy(v, src, sizeof tmp);
}

/* floor(num / den + 1/2) for den > 0 and any sign of num. */
static int64_t div_round(int64_t num, int64_t den)
{
    int64_t t = 2 * num + den, d = 2 * den;
    return t >= 0 ? t / d : -((-t + d - 1) / d);
}

static void make_thumb(const int32_t g[G][G], uint8_t *thumb)
{
    int32_t t[NCELL], sorted[NCELL];
    int64_t sum = 0, sq = 0;
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++) {
            int32_t v = g[2 * y][2 * x] + g[2 * y][2 * x + 1] + g[2 * y + 1][2 * x] +
                        g[2 * y + 1][2 * x + 1];
            t[y * S + x] = sorted[y * S + x] = v;
            sum += v;
            sq += (int64_t)v * v;
        }
    sort_cells(sorted);
    const int64_t med = ((int64_t)sorted[127] + sorted[128]) / 2, iqr = sorted[191] - sorted[64];
    /* Robust scale 27 sigma, times 256: the interquartile range (20 IQR = 27 sigma for a normal
     * distribution) unless it collapses (most of the picture one value), then a third of the
     * standard deviation, so a label or a bright speck cannot squeeze the rest into few levels. */
    const uint64_t var = (uint64_t)((int64_t)NCELL * sq - sum * sum);
    const int64_t sd256 = (int64_t)isqrt64(var);
    int64_t den = 20 * iqr * NCELL;
    if (9 * sd256 > den)
        den = 9 * sd256;
    for (int i = 0; i < NCELL; i++) {
        int64_t q = den ? 128 + div_round(36 * 27 * (int64_t)NCELL * (t[i] - med), den) : 128;
        thumb[i] = (uint8_t)(q < 0 ? 0 : q > 255 ? 255 : q);
    }
}

void kiln_nearfp_orient_thumb(const uint8_t *thumb, unsigned side, unsigned o, uint8_t *out)
{
    if (o < 1 || o > 8)
        o = 1;
    const int transpose = o >= 5, fx = o == 2 || o == 3 || o == 6 || o == 7,
              fy = o == 3 || o == 4 || o == 7 || o == 8;
    for (unsigned y = 0; y < side; y++)
        for (unsigned x = 0; x < side; x++) {
            unsigned ty = fy ? side - 1 - y : y, tx = fx ? side - 1 - x : x;
            unsigned sy = transpose ? tx : ty, sx = transpose ? ty : tx;
            out[y * side + x] = thumb[sy * side + sx];
        }
}

/* ---- colour ------------------------------------------------------------------------------------ */

/* Saturation below which a region's hue says nothing: 3 levels of 8 bits, in grid units. */
#define HUE_FLOOR (3 * 257 * 16)

/* The colour of 4x4 regions (8x8 grid cells each): (R - Y, B - Y) of their mean R, G, B with Y
 * by BT.601 as for the luma, scaled so the largest magnitude is 127. A picture none of whose
 * regions reaches HUE_FLOOR counts as grey (scale 0). */
static void make_chroma(const int64_t rgb[3][G][G], struct kiln_nearfp *fp)
{
    const int B = G / KILN_NEARFP_HUE;
    int64_t c[KILN_NEARFP_HUE * KILN_NEARFP_HUE][2], top = 0;
    int coloured = 0;
    for (int ry = 0; ry < KILN_NEARFP_HUE; ry++)
        for (int rx = 0; rx < KILN_NEARFP_HUE; rx++) {
            int64_t m[3] = {0, 0, 0};
            for (int k = 0; k < 3; k++) {
                for (int y = 0; y < B; y++)
                    for (int x = 0; x < B; x++)
                        m[k] += rgb[k][ry * B + y][rx * B + x];
                m[k] = (m[k] + B * B / 2) / (B * B);
            }
            int64_t yl = (299 * m[0] + 587 * m[1] + 114 * m[2] + 500) / 1000;
            int64_t *cell = c[ry * KILN_NEARFP_HUE + rx];
            cell[0] = m[0] - yl;
            cell[1] = m[2] - yl;
            for (int k = 0; k < 2; k++)
                top = cell[k] > top ? cell[k] : -cell[k] > top ? -cell[k] : top;
            coloured |= cell[0] * cell[0] + cell[1] * cell[1] >= (int64_t)HUE_FLOOR * HUE_FLOOR;
        }
    if (!coloured || top == 0)
        return;
    fp->chroma_scale = (uint32_t)top;
    for (int i = 0; i < KILN_NEARFP_HUE * KILN_NEARFP_HUE; i++)
        for (int k = 0; k < 2; k++)
            fp->chroma[i][k] = (int8_t)div_round(127 * c[i][k], top);
}

static int cmp_i64(const void *a, const void *b)
{
    int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;
    return (x > y) - (x < y);
}

/* Hue agreement of a and b (b's regions as displayed under o): the lower quartile of the
 * cosines between their colours over the regions where both reach HUE_FLOOR, Q20. Q20 (no
 * evidence against) when either picture is grey or fewer than 4 regions are coloured in both. */
static int32_t hue_agreement(const struct kiln_nearfp *a, const struct kiln_nearfp *b, unsigned o)
{
    if (!a->chroma_scale || !b->chroma_scale)
        return (int32_t)Q20;
    const int n = KILN_NEARFP_HUE;
    uint8_t idx[KILN_NEARFP_HUE * KILN_NEARFP_HUE], map[KILN_NEARFP_HUE * KILN_NEARFP_HUE];
    for (int i = 0; i < n * n; i++)
        idx[i] = (uint8_t)i;
    kiln_nearfp_orient_thumb(idx, n, o, map); /* map[i]: b's region shown at i */
    int64_t cosv[KILN_NEARFP_HUE * KILN_NEARFP_HUE];
    int k = 0;
    const __int128 fa = (__int128)HUE_FLOOR * 127, fb = fa;
    for (int i = 0; i < n * n; i++) {
        const int8_t *p = a->chroma[i], *q = b->chroma[map[i]];
        int64_t na = p[0] * p[0] + p[1] * p[1], nb = q[0] * q[0] + q[1] * q[1];
        /* |c| >= floor  <=>  |q|^2 scale^2 >= (127 floor)^2 */
        if ((__int128)na * a->chroma_scale * a->chroma_scale < fa * fa ||
            (__int128)nb * b->chroma_scale * b->chroma_scale < fb * fb)
            continue;
        int64_t dot = p[0] * q[0] + p[1] * q[1];
        uint64_t den = isqrt64((uint64_t)na) * isqrt64((uint64_t)nb);
        cosv[k++] = den ? dot * Q20 / (int64_t)den : 0;
    }
    if (k < 4)
        return (int32_t)Q20;
    qsort(cosv, (size_t)k, sizeof *cosv, cmp_i64);
    int64_t q = cosv[k / 4];
    return (int32_t)(q > Q20 ? Q20 : q < -Q20 ? -Q20 : q);
}

/* ---- the fingerprint -------------------------------------------------------------------------- */

int kiln_nearfp_compute(const struct kiln_image *img, struct kiln_nearfp *fp,
                        struct kiln_err *err)
{
    memset(fp, 0, sizeof *fp);
    int32_t g[G][G];
    static_assert(G % KILN_NEARFP_HUE == 0, "colour regions are whole grid blocks");
    int64_t(*rgb)[G][G] = NULL;
    int rc = checked_grid(img, vector_unit(), g, &rgb, err);
    if (rc)
        return rc;
    if (img->channels >= 3)
        make_chroma((const int64_t(*)[G][G])rgb, fp);
    free(rgb);

    int64_t c[HASH_K][HASH_K];
    dct_block(g, 0, G, HASH_K, c);
    fp->hash = sign_bits(c, HASH_K);
    /* Structure the hash sees: the band u, v < 8, u + v >= 3 of the orthonormal DCT, whose
     * coefficients are alpha_u alpha_v c / 2^28 with alpha^2 = 1/32 (index 0) or 2/32. Its mean
     * square over the 1024 cells is sum w_u w_v c^2 / 2^76 (w = 1 or 2), in grid units. */
    unsigned __int128 band = 0;
    for (unsigned v = 0; v < HASH_K; v++)
        for (unsigned u = 0; u < HASH_K; u++)
            if (u + v >= 3) {
                unsigned __int128 sq = (unsigned __int128)((__int128)c[v][u] * c[v][u]);
                band += sq * (u ? 2u : 1u) * (v ? 2u : 1u);
            }
    const uint64_t rms = isqrt128(band >> 76), lsb = img->depth == 8 ? 257 : 1;
    const uint64_t info = rms / lsb; /* grid units are 1/16 of the 16-bit scale */
    fp->info = (uint16_t)(info > 65535 ? 65535 : info);

    int64_t cc[HASH_K][HASH_K];
    dct_block(g, CENTRE_FROM, CENTRE_N, HASH_K, cc);
    fp->centre = sign_bits(cc, HASH_K);
    make_thumb(g, fp->thumb);

    if (img->width < KILN_NEARFP_MIN_SIDE || img->height < KILN_NEARFP_MIN_SIDE)
        fp->flags |= KILN_NEARFP_SMALL | KILN_NEARFP_LOWINFO;
    if (fp->info < KILN_NEARFP_MIN_INFO)
        fp->flags |= KILN_NEARFP_LOWINFO;
    return KILN_OK;
}

/* ---- bytes ------------------------------------------------------------------------------------ */

static void put_be(uint8_t *p, uint64_t v, unsigned n)
{
    for (unsigned i = 0; i < n; i++)
        p[i] = (uint8_t)(v >> (8 * (n - 1 - i)));
}

static uint64_t get_be(const uint8_t *p, unsigned n)
{
    uint64_t v = 0;
    for (unsigned i = 0; i < n; i++)
        v = v << 8 | p[i];
    return v;
}

#define HUE_CELLS (KILN_NEARFP_HUE * KILN_NEARFP_HUE)

void kiln_nearfp_encode(const struct kiln_nearfp *fp, uint8_t out[KILN_NEARFP_BYTES])
{
    static_assert(24 + 2 * HUE_CELLS + NCELL == KILN_NEARFP_BYTES, "the documented layout");
    out[0] = KILN_NEARFP_VERSION;
    out[1] = fp->flags;
    put_be(out + 2, fp->info, 2);
    put_be(out + 4, fp->hash, 8);
    put_be(out + 12, fp->centre, 8);
    put_be(out + 20, fp->chroma_scale, 4);
    for (int i = 0; i < HUE_CELLS; i++)
        for (int k = 0; k < 2; k++)
            out[24 + 2 * i + k] = (uint8_t)fp->chroma[i][k];
    memcpy(out + 24 + 2 * HUE_CELLS, fp->thumb, NCELL);
}

int kiln_nearfp_decode(const uint8_t in[KILN_NEARFP_BYTES], struct kiln_nearfp *fp)
{
    memset(fp, 0, sizeof *fp);
    if (in[0] != KILN_NEARFP_VERSION || (in[1] & ~(KILN_NEARFP_LOWINFO | KILN_NEARFP_SMALL)) ||
        ((in[1] & KILN_NEARFP_SMALL) && !(in[1] & KILN_NEARFP_LOWINFO)))
        return -1;
    fp->flags = in[1];
    fp->info = (uint16_t)get_be(in + 2, 2);
    fp->hash = get_be(in + 4, 8);
    fp->centre = get_be(in + 12, 8);
    fp->chroma_scale = (uint32_t)get_be(in + 20, 4);
    if (((fp->hash | fp->centre) & 1) ||
        (fp->info < KILN_NEARFP_MIN_INFO && !(fp->flags & KILN_NEARFP_LOWINFO)))
        return -1;
    for (int i = 0; i < HUE_CELLS; i++)
        for (int k = 0; k < 2; k++) {
            int8_t c = (int8_t)in[24 + 2 * i + k];
            if (c < -127 || (c && !fp->chroma_scale))
                return -1;
            fp->chroma[i][k] = c;
        }
    memcpy(fp->thumb, in + 24 + 2 * HUE_CELLS, NCELL);
    return 0;
}

/* ---- verification ------------------------------------------------------------------------------ */

/* Per-axis alignments: (scale, offset) in fortieths of the picture. */
static const uint8_t axis_opt[7][2] = {{40, 0}, {38, 0}, {38, 1}, {38, 2},
                                       {36, 0}, {36, 2}, {36, 4}};

int kiln_nearfp_warp(unsigned w, unsigned *sx, unsigned *ox, unsigned *sy, unsigned *oy,
                     unsigned *moves_b)
{
    if (w > 96)
        return 0;
    unsigned ix = 0, iy = 0, dir = 0;
    if (w > 0) {
        unsigned k = (w - 1) % 48 + 1;
        dir = (w - 1) / 48;
        ix = k / 7;
        iy = k % 7;
    }
    *sx = axis_opt[ix][0];
    *ox = axis_opt[ix][1];
    *sy = axis_opt[iy][0];
    *oy = axis_opt[iy][1];
    *moves_b = dir;
    return 1;
}

/* Sample positions along one axis for alignment option opt, in 1/256 of a cell: output cell x
 * reads the source at 16 * offset + scale * (x + 1/2) - 1/2 (cell centres), clamped to the
 * picture. */
static void axis_map(unsigned opt, uint32_t idx[S], uint32_t frac[S])
{
    const int64_t sn = axis_opt[opt][0], on = axis_opt[opt][1];
    for (int x = 0; x < S; x++) {
        int64_t num = 32 * on + sn * (2 * x + 1) - 40; /* position times 80 */
        int64_t p = num * 256 + 40;
        p = p >= 0 ? p / 80 : -((-p + 79) / 80);
        if (p < 0)
            p = 0;
        if (p >= (S - 1) * 256)
            p = (S - 1) * 256;
        idx[x] = (uint32_t)(p >> 8);
        frac[x] = (uint32_t)(p & 255);
    }
}

/* out = src (8-bit) resampled bilinearly at the alignment's positions, in 1/16 units. */
static void warp_apply(const uint8_t *src, unsigned ix, unsigned iy, int32_t *out)
{
    uint32_t xi[S], xf[S], yi[S], yf[S];
    axis_map(ix, xi, xf);
    axis_map(iy, yi, yf);
    uint32_t tmp[NCELL];
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++) {
            const uint8_t *r = src + y * S;
            uint32_t i = xi[x], f = xf[x];
            tmp[y * S + x] = r[i] * (256 - f) + (f ? r[i + 1] * f : 0);
        }
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++) {
            uint32_t i = yi[y], f = yf[y];
            uint64_t v = (uint64_t)tmp[i * S + x] * (256 - f) + (f ? (uint64_t)tmp[(i + 1) * S + x] * f : 0);
            out[y * S + x] = (int32_t)((v + 2048) >> 12);
        }
}

/* Column sums (cols) or row sums of a 16x16 array. */
static void profile(const int32_t *v, int cols, int64_t out[S])
{
    for (int i = 0; i < S; i++)
        out[i] = 0;
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++)
            out[cols ? x : y] += v[y * S + x];
}

/* Pearson correlation of two 16-value profiles compared as numbers: returns cov^2 sign-kept
 * over the variances' product as a Q20 fraction, enough to rank alignments. */
static int64_t profile_score(const int64_t *a, const int64_t *b)
{
    __int128 sa = 0, sb = 0, saa = 0, sbb = 0, sab = 0;
    for (int i = 0; i < S; i++) {
        sa += a[i];
        sb += b[i];
        saa += (__int128)a[i] * a[i];
        sbb += (__int128)b[i] * b[i];
        sab += (__int128)a[i] * b[i];
    }
    __int128 cov = S * sab - sa * sb, va = S * saa - sa * sa, vb = S * sbb - sb * sb;
    uint64_t da = isqrt128((unsigned __int128)va), db = isqrt128((unsigned __int128)vb);
    if (!da || !db)
        return 0;
    return (int64_t)(cov * Q20 / ((__int128)da * db));
}

/* The alignment option of one axis (0 = none) under which p's profile best matches f's
 * (the first on ties): profiles are resampled like the cells. */
static unsigned best_axis(const int32_t *p, const int32_t *f, int cols)
{
    int64_t pp[S], ff[S], w[S];
    profile(p, cols, pp);
    profile(f, cols, ff);
    unsigned best = 0;
    int64_t best_s = profile_score(pp, ff);
    for (unsigned opt = 1; opt < 7; opt++) {
        uint32_t idx[S], frac[S];
        axis_map(opt, idx, frac);
        for (int x = 0; x < S; x++)
            w[x] = pp[idx[x]] * (256 - frac[x]) + (frac[x] ? pp[idx[x] + 1] * frac[x] : 0);
        int64_t sc = profile_score(w, ff);
        if (sc > best_s) {
            best_s = sc;
            best = opt;
        }
    }
    return best;
}

/* Pearson correlation of a and b over the cells with mask set (all when mask is NULL), in Q20:
 * trunc(2^20 cov / (isqrt(var_a) isqrt(var_b))) with cov and var from exact sums (n times the
 * usual ones). 0 when either side is constant or fewer than two cells take part. Values must
 * stay below 2^16 in magnitude. */
static int32_t ncc_q20(const int32_t *a, const int32_t *b, const uint8_t *mask)
{
    int64_t n = 0, sa = 0, sb = 0, saa = 0, sbb = 0, sab = 0;
    for (int i = 0; i < NCELL; i++) {
        if (mask && !mask[i])
            continue;
        n++;
        sa += a[i];
        sb += b[i];
        saa += (int64_t)a[i] * a[i];
        sbb += (int64_t)b[i] * b[i];
        sab += (int64_t)a[i] * b[i];
    }
    if (n < 2)
        return 0;
    __int128 cov = (__int128)n * sab - (__int128)sa * sb;
    __int128 va = (__int128)n * saa - (__int128)sa * sa, vb = (__int128)n * sbb - (__int128)sb * sb;
    uint64_t da = isqrt128((unsigned __int128)va), db = isqrt128((unsigned __int128)vb);
    if (da == 0 || db == 0)
        return 0;
    __int128 r;
    if (cov < ((__int128)1 << 42) && cov > -((__int128)1 << 42) && da < (UINT64_C(1) << 31) &&
        db < (UINT64_C(1) << 31))
        r = (int64_t)cov * Q20 / (int64_t)(da * db); /* the same quotient, in 64 bits */
    else
        r = cov * Q20 / ((__int128)da * db);
    return (int32_t)(r > Q20 ? Q20 : r < -Q20 ? -Q20 : r);
}

int32_t kiln_nearfp_correlation(const int32_t *a, const int32_t *b, const uint8_t *mask)
{
    return ncc_q20(a, b, mask);
}

/* Locally normalised detail: each cell minus the mean of its 3x3 neighbourhood (cut at the
 * border), over that neighbourhood's standard deviation plus a fiftieth of the picture's, in
 * 1/1024 units. */
static void local_detail(const int32_t *v, int32_t *out)
{
    int64_t s = 0, ss = 0;
    for (int i = 0; i < NCELL; i++) {
        s += v[i];
        ss += (int64_t)v[i] * v[i];
    }
    const int64_t sd_n = (int64_t)isqrt64((uint64_t)(NCELL * ss - s * s));
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++) {
            int64_t c = 0, ls = 0, lss = 0;
            for (int dy = -1; dy <= 1; dy++)
                for (int dx = -1; dx <= 1; dx++) {
                    int yy = y + dy, xx = x + dx;
                    if (yy < 0 || yy >= S || xx < 0 || xx >= S)
                        continue;
                    int64_t w = v[yy * S + xx];
                    c++;
                    ls += w;
                    lss += w * w;
                }
            int64_t den = (int64_t)isqrt64((uint64_t)(c * lss - ls * ls)) +
                          c * sd_n / (50 * NCELL);
            int64_t num = (c * v[y * S + x] - ls) * 1024;
            out[y * S + x] = den ? (int32_t)(num / den) : 0;
        }
}

struct cellres {
    uint64_t r;
    int index;
};

/* Whether the kept cells hold at least a quarter of v's variation (sum of squared deviations
 * from the mean): trimming is meant to drop a label or a corner, not the picture. */
static int keeps_content(const int32_t *v, const uint8_t *keep)
{
    int64_t n = 0, s = 0, ss = 0, nk = 0, sk = 0, ssk = 0;
    for (int i = 0; i < NCELL; i++) {
        n++;
        s += v[i];
        ss += (int64_t)v[i] * v[i];
        if (keep[i]) {
            nk++;
            sk += v[i];
            ssk += (int64_t)v[i] * v[i];
        }
    }
    /* SS_kept >= SS / 4  <=>  4 n (nk ssk - sk^2) >= nk (n ss - s^2) */
    __int128 lhs = (__int128)4 * n * ((__int128)nk * ssk - (__int128)sk * sk);
    __int128 rhs = (__int128)nk * ((__int128)n * ss - (__int128)s * s);
    return lhs >= rhs;
}

/* The similarities of one alignment. */
static void measure(const int32_t *a, const int32_t *b, struct kiln_nearmatch *m)
{
    m->global = ncc_q20(a, b, NULL);
    /* Residual of each cell after matching means and spreads: |(n a - Sa) sd_b - (n b - Sb) sd_a|. */
    int64_t sa = 0, sb = 0, saa = 0, sbb = 0;
    for (int i = 0; i < NCELL; i++) {
        sa += a[i];
        sb += b[i];
        saa += (int64_t)a[i] * a[i];
        sbb += (int64_t)b[i] * b[i];
    }
    const int64_t da = (int64_t)isqrt64((uint64_t)(NCELL * saa - sa * sa)),
                  db = (int64_t)isqrt64((uint64_t)(NCELL * sbb - sb * sb));
    /* The first TRIM cells in the order (residual descending, index ascending), kept in that
     * order by insertion; a cell displaces the last only when its residual is strictly larger,
     * since on equal residuals the earlier index comes first. */
    struct cellres top[TRIM];
    int ntop = 0;
    for (int i = 0; i < NCELL; i++) {
        int64_t z = (NCELL * a[i] - sa) * db - (NCELL * b[i] - sb) * da;
        uint64_t r = (uint64_t)(z < 0 ? -z : z);
        if (ntop == TRIM && r <= top[TRIM - 1].r)
            continue;
        int k = ntop < TRIM ? ntop++ : TRIM - 1;
        while (k > 0 && top[k - 1].r < r) {
            top[k] = top[k - 1];
            k--;
        }
        top[k] = (struct cellres){r, i};
    }
    uint8_t keep[NCELL], inner[NCELL];
    memset(keep, 1, sizeof keep);
    for (int k = 0; k < ntop; k++)
        keep[top[k].index] = 0;
    m->global_trim = ncc_q20(a, b, keep);
    m->trim_ok = (uint8_t)(keeps_content(a, keep) || keeps_content(b, keep));
    /* Detail is compared only where a cell and all its neighbours were kept. */
    for (int y = 0; y < S; y++)
        for (int x = 0; x < S; x++) {
            uint8_t ok = 1;
            for (int dy = -1; dy <= 1 && ok; dy++)
                for (int dx = -1; dx <= 1; dx++) {
                    int yy = y + dy, xx = x + dx;
                    if (yy >= 0 && yy < S && xx >= 0 && xx < S && !keep[yy * S + xx]) {
                        ok = 0;
                        break;
                    }
                }
            inner[y * S + x] = ok;
        }
    int32_t la[NCELL], lb[NCELL];
    local_detail(a, la);
    local_detail(b, lb);
    m->local = ncc_q20(la, lb, NULL);
    m->local_trim = ncc_q20(la, lb, inner);
}

/* The decision. In orientation 1 the trimmed correlations count, which forgive a label or a
 * corner that disagrees, unless trimming took away most of the picture itself (a small object
 * on a flat ground: neither picture keeps a quarter of its variation), then the plain ones.
 * A match that needs a turn or a mirror had eight chances to occur by accident, and a burnt-in
 * label on a turned copy is rare, so it is held to the plain correlations and a stricter bar
 * on detail; a match found by trying crop alignments had several chances too and is held to a
 * slightly stricter bar. */
static int passes(struct kiln_nearmatch *m, unsigned o, int aligned)
{
    m->trimmed = (uint8_t)(o == 1 && m->trim_ok);
    const int64_t g = kiln_nearmatch_global(m), l = kiln_nearmatch_local(m);
    const int64_t need = o != 1  ? KILN_NEARFP_MIN_LOCAL_TURNED
                         : aligned ? KILN_NEARFP_MIN_LOCAL_ALIGNED
                                   : KILN_NEARFP_MIN_LOCAL;
    return 1000 * g >= KILN_NEARFP_MIN_GLOBAL * Q20 && 1000 * l >= need * Q20;
}

void kiln_nearfp_verify(const struct kiln_nearfp *a, const struct kiln_nearfp *b, unsigned o,
                        unsigned gate, struct kiln_nearmatch *out)
{
    memset(out, 0, sizeof *out);
    if (o < 1 || o > 8)
        o = 1;
    out->orientation = (uint8_t)o;
    if ((a->flags | b->flags) & KILN_NEARFP_LOWINFO)
        return;
    /* Colour first: it is cheap, and two pictures of clearly different hues are not copies. */
    out->hue = hue_agreement(a, b, o);
    if (1000 * (int64_t)out->hue < KILN_NEARFP_MIN_HUE * Q20)
        return;
    uint8_t bt[NCELL];
    kiln_nearfp_orient_thumb(b->thumb, S, o, bt);
    int32_t va[NCELL], vb[NCELL];
    for (int i = 0; i < NCELL; i++) {
        va[i] = 16 * a->thumb[i];
        vb[i] = 16 * bt[i];
    }
    if (gate) {
        out->global = ncc_q20(va, vb, NULL);
        if (1000 * (int64_t)out->global < (int64_t)gate * Q20)
            return;
    }
    measure(va, vb, out);
    if (passes(out, o, 0)) {
        out->linked = 1;
        return;
    }
    /* A crop is tried only when the pictures already agree broadly as they are. */
    if (1000 * (int64_t)out->global < KILN_NEARFP_MIN_SEARCH * Q20)
        return;
    /* For each way round (a cropped from b's frame, or b from a's), each axis's alignment is
     * chosen on the column or row sums, then the pair of choices is tried on the cells; the
     * better way round by global correlation is checked. */
    unsigned best = 0;
    int32_t best_g = INT32_MIN, wa[NCELL];
    for (unsigned moves_b = 0; moves_b <= 1; moves_b++) {
        const int32_t *p = moves_b ? vb : va, *f = moves_b ? va : vb;
        unsigned ix = best_axis(p, f, 1), iy = best_axis(p, f, 0);
        if (ix == 0 && iy == 0)
            continue;
        warp_apply(moves_b ? bt : a->thumb, ix, iy, wa);
        int32_t g = ncc_q20(moves_b ? va : wa, moves_b ? wa : vb, NULL);
        if (g > best_g) {
            best_g = g;
            best = 1 + 48 * moves_b + (ix * 7 + iy - 1);
        }
    }
    if (best == 0)
        return;
    unsigned k = (best - 1) % 48 + 1, moves_b = (best - 1) / 48;
    warp_apply(moves_b ? bt : a->thumb, k / 7, k % 7, wa);
    measure(moves_b ? va : wa, moves_b ? wa : vb, out);
    out->warp = (uint8_t)best;
    out->linked = (uint8_t)passes(out, o, 1);
}
