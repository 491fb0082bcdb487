/* Fixed-point separable resampler. Coefficients are computed once per axis in double precision
 * with only +, -, *, / (no libm, so no dependence on a C library's sin), quantised to
 * KILN_RESIZE_BITS bits and applied with integer arithmetic. */
#include "resize.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "resize_simd.h"

static const char *const filter_names[KILN_FILTER_COUNT] = {"nearest", "box", "bilinear",
                                                              "bicubic", "lanczos3"};

const char *kiln_filter_name(int filter)
{
    return filter >= 0 && filter < KILN_FILTER_COUNT ? filter_names[filter] : "unknown";
}

int kiln_filter_parse(const char *name)
{
    for (int i = 0; i < KILN_FILTER_COUNT; i++)
        if (strcmp(name, filter_names[i]) == 0)
            return i;
    return -1;
}

static const char *const fit_names[KILN_FIT_COUNT] = {"stretch", "pad", "crop"};

const char *kiln_fit_name(int fit)
{
    return fit >= 0 && fit < KILN_FIT_COUNT ? fit_names[fit] : "unknown";
}

int kiln_fit_parse(const char *name)
{
    for (int i = 0; i < KILN_FIT_COUNT; i++)
        if (strcmp(name, fit_names[i]) == 0)
            return i;
    return -1;
}

#define PI 3.14159265358979323846

/* sin(pi * x) for any x, by reduction to r in [-0.5, 0.5] and the Taylor series of sin to the
 * x^23 term (error below 1e-17 there). Basic operations only, so every IEEE-754 machine gives
 * the same bits when the build disables FMA contraction (CMakeLists.txt does). */
static double sin_pi(double x)
{
    double k = (double)(long long)(x < 0 ? x - 0.5 : x + 0.5); /* nearest integer */
    double r = (x - k) * PI;
    double r2 = r * r, term = r, sum = r;
    for (int n = 1; n <= 11; n++) {
        term = -term * r2 / (double)((2 * n) * (2 * n + 1));
        sum += term;
    }
    long long ki = (long long)k;
    return (ki & 1) ? -sum : sum;
}

static double sinc(double x)
{
    if (x == 0.0)
        return 1.0;
    return sin_pi(x) / (PI * x);
}

double kiln_filter_support(int filter)
{
    switch (filter) {
    case KILN_FILTER_NEAREST:
    case KILN_FILTER_BOX: return 0.5;
    case KILN_FILTER_BILINEAR: return 1.0;
    case KILN_FILTER_BICUBIC: return 2.0;
    case KILN_FILTER_LANCZOS3: return 3.0;
    default: return 0.0;
    }
}

double kiln_filter_kernel(int filter, double x)
{
    const double a = -0.5; /* Keys (1981) cubic convolution parameter */
    switch (filter) {
    case KILN_FILTER_NEAREST:
    case KILN_FILTER_BOX:
        /* Half-open so that a sample exactly between two inputs counts once. */
        return (x > -0.5 && x <= 0.5) ? 1.0 : 0.0;
    case KILN_FILTER_BILINEAR:
        if (x < 0)
            x = -x;
        return x < 1.0 ? 1.0 - x : 0.0;
    case KILN_FILTER_BICUBIC:
        if (x < 0)
            x = -x;
        if (x < 1.0)
            return ((a + 2.0) * x - (a + 3.0)) * x * x + 1.0;
        if (x < 2.0)
            return (((x - 5.0) * x + 8.0) * x - 4.0) * a;
        return 0.0;
    case KILN_FILTER_LANCZOS3:
        if (x > -3.0 && x < 3.0)
            return sinc(x) * sinc(x / 3.0);
        return 0.0;
    default: return 0.0;
    }
}

void kiln_resize_axis_free(struct kiln_resize_axis *ax)
{
    free(ax->first);
    free(ax->count);
    free(ax->coef);
    memset(ax, 0, sizeof *ax);
}

static int32_t quantise(double w)
{
    double s = w * (double)(1 << KILN_RESIZE_BITS);
    return (int32_t)(s < 0 ? s - 0.5 : s + 0.5);
}

int kiln_resize_axis_init(struct kiln_resize_axis *ax, uint32_t in_size, uint32_t denom,
                          uint32_t shift, uint32_t box0, uint32_t box_size, uint32_t out_size,
                          int filter, struct kiln_err *err)
{
    memset(ax, 0, sizeof *ax);
    /* Sides below 2^31 keep (2i + 1) * box_size of the nearest rule inside 64 bits. */
    const uint64_t grid_end = (uint64_t)in_size * (denom ? denom : 1) - shift;
    if (in_size == 0 || out_size == 0 || box_size == 0 || denom == 0 || shift >= denom ||
        grid_end >= (1u << 31) || out_size >= (1u << 31) || box0 > grid_end ||
        box_size > grid_end - box0)
        return kiln_err_set(err, KILN_EINVAL,
                            "bad resample geometry: %u at %u of %u pixels (1/%u, shift %u) to %u",
                            box_size, box0, in_size, denom, shift, out_size);
    if (filter < 0 || filter >= KILN_FILTER_COUNT)
        return kiln_err_set(err, KILN_EINVAL, "unknown filter %d", filter);
    /* On the reduced grid the box starts at (box0 + shift) / denom and output pixels are
     * box_size / (out_size * denom) of its pixels apart; with denom 1 both are the plain
     * box0 and box_size / out_size, bit for bit. */
    const double scale = (double)box_size / ((double)out_size * (double)denom);
    const double start = ((double)box0 + (double)shift) / (double)denom;
    const double fscale = scale > 1.0 ? scale : 1.0;
    const double support = kiln_filter_support(filter) * fscale;
    uint32_t ksize = filter == KILN_FILTER_NEAREST ? 1u : (uint32_t)support * 2u + 3u;
    if (ksize > in_size + 2u)
        ksize = in_size + 2u;
    ax->in_size = in_size;
    ax->out_size = out_size;
    ax->ksize = ksize;
    ax->first = kiln_alloc_array(out_size, sizeof *ax->first);
    ax->count = kiln_alloc_array(out_size, sizeof *ax->count);
    ax->coef = kiln_alloc_array((size_t)out_size, (size_t)ksize * sizeof *ax->coef);
    double *k = kiln_alloc_array(ksize, sizeof *k);
    if (!ax->first || !ax->count || !ax->coef || !k) {
        free(k);
        kiln_resize_axis_free(ax);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate resample coefficients");
    }
    for (uint32_t i = 0; i < out_size; i++) {
        int32_t *c = ax->coef + (size_t)i * ksize;
        memset(c, 0, ksize * sizeof *c);
        if (filter == KILN_FILTER_NEAREST) {
            /* The full-size pixel whose span holds the output pixel's centre, in exact integers
             * (box0 + floor((2i + 1) * box_size / (2 * out_size))), then the input pixel that
             * covers it. */
            uint64_t full = box0 + ((2u * (uint64_t)i + 1u) * box_size) / (2u * (uint64_t)out_size);
            uint64_t src = (full + shift) / denom;
            if (src >= in_size)
                src = in_size - 1;
            ax->first[i] = (uint32_t)src;
            ax->count[i] = 1;
            c[0] = 1 << KILN_RESIZE_BITS;
            continue;
        }
        const double centre = start + ((double)i + 0.5) * scale;
        double lo = centre - support + 0.5, hi = centre + support + 0.5;
        int64_t xmin = lo < 0 ? 0 : (int64_t)lo;
        int64_t xmax = hi < 0 ? 0 : (int64_t)hi;
        if (xmax > (int64_t)in_size)
            xmax = in_size;
        if (xmin >= xmax)
            xmin = xmax > 0 ? xmax - 1 : 0;
        uint32_t n = (uint32_t)(xmax - xmin);
        if (n > ksize)
            n = ksize;
        double total = 0.0;
        for (uint32_t t = 0; t < n; t++) {
            k[t] = kiln_filter_kernel(filter, ((double)(t + xmin) - centre + 0.5) / fscale);
            total += k[t];
        }
        ax->first[i] = (uint32_t)xmin;
        if (total == 0.0) {
            /* Degenerate window (cannot happen for the filters above, kept for safety): take
             * the nearest input. */
            uint64_t src = (uint64_t)(centre < 0 ? 0 : centre);
            ax->first[i] = (uint32_t)(src < in_size ? src : in_size - 1);
            ax->count[i] = 1;
            c[0] = 1 << KILN_RESIZE_BITS;
            continue;
        }
        int64_t sum = 0;
        uint32_t big = 0;
        for (uint32_t t = 0; t < n; t++) {
            c[t] = quantise(k[t] / total);
            sum += c[t];
            if (c[t] > c[big])
                big = t;
        }
        /* Put the rounding residue on the largest weight so the integers sum to exactly
         * 1 << BITS: a constant image then stays exactly constant. */
        c[big] += (int32_t)((1 << KILN_RESIZE_BITS) - sum);
        /* Trim zero weights at both ends; they cost time and change nothing. */
        uint32_t lead = 0;
        while (lead + 1 < n && c[lead] == 0)
            lead++;
        while (n > lead + 1 && c[n - 1] == 0)
            n--;
        if (lead) {
            memmove(c, c + lead, (n - lead) * sizeof *c);
            memset(c + (n - lead), 0, lead * sizeof *c);
            ax->first[i] += lead;
            n -= lead;
        }
        ax->count[i] = n;
    }
    ax->max_pos = ax->max_neg = 0;
    for (uint32_t i = 0; i < out_size; i++) {
        int64_t pos = 0, neg = 0;
        for (uint32_t t = 0; t < ax->count[i]; t++) {
            int32_t w = ax->coef[(size_t)i * ksize + t];
            pos += w > 0 ? w : 0;
            neg += w < 0 ? -(int64_t)w : 0;
        }
        ax->max_pos = pos > ax->max_pos ? pos : ax->max_pos;
        ax->max_neg = neg > ax->max_neg ? neg : ax->max_neg;
    }
    free(k);
    return KILN_OK;
}

void kiln_resizer_init(struct kiln_resizer *r)
{
    memset(r, 0, sizeof *r);
    r->simd = kiln_resize_simd_available();
}

void kiln_resizer_free(struct kiln_resizer *r)
{
    kiln_resize_axis_free(&r->x);
    kiln_resize_axis_free(&r->y);
    kiln_resize_wide_free(&r->wide);
    free(r->acc);
    kiln_image_free(&r->tmp);
    memset(r, 0, sizeof *r);
}

/* Horizontal pass over rows [y0, y1) of in into out (out has y1 - y0 rows). */
#define HPASS(T, C, A)                                                                             \
    do {                                                                                           \
        for (uint32_t y = y0; y < y1; y++) {                                                       \
            const T *src = (const T *)((const uint8_t *)in->data + (size_t)y * in->stride);        \
            T *dst = (T *)((uint8_t *)out->data + (size_t)(y - y0) * out->stride);                 \
            for (uint32_t i = 0; i < ax->out_size; i++) {                                          \
                const int32_t *k = ax->coef + (size_t)i * ax->ksize;                               \
                const T *s = src + (size_t)ax->first[i] * (C);                                     \
                A acc[4] = {0, 0, 0, 0};                                                           \
                for (uint32_t t = 0; t < ax->count[i]; t++, s += (C))                              \
                    for (unsigned c = 0; c < (C); c++)                                             \
                        acc[c] += (A)k[t] * s[c];                                                  \
                for (unsigned c = 0; c < (C); c++)                                                 \
                    dst[(size_t)i * (C) + c] = (T)kiln_resize_round(acc[c], maxv);                 \
            }                                                                                      \
        }                                                                                          \
    } while (0)

/* True when 8-bit samples weighted by ax cannot leave the int32_t range at any partial sum
 * (every filter at 22 bits qualifies; the check keeps that true if the precision changes).
 * The narrower accumulator is then exact and lets the compiler use wider vector lanes. */
static bool fits_i32(const struct kiln_resize_axis *ax)
{
    return 255 * ax->max_pos <= INT32_MAX && 255 * ax->max_neg <= INT32_MAX;
}

/* The horizontal pass with r's x axis; the vector kernels take the two layouts the benchmark's
 * profile shows hot (8-bit RGB, 16-bit grey) when the window has at least one group of 4 taps. */
static void hpass(struct kiln_resizer *r, const struct kiln_image *in, uint32_t y0, uint32_t y1,
                  struct kiln_image *out)
{
    const struct kiln_resize_axis *ax = &r->x;
    const int64_t maxv = in->depth == 16 ? 65535 : 255;
    const unsigned ch = in->channels;
    if (r->simd && ax->ksize >= 4 && in->depth == 8 && ch == 3 && fits_i32(ax) &&
        (r->wide.w || kiln_resize_wide_init(&r->wide, ax))) {
        for (uint32_t y = y0; y < y1; y++)
            kiln_hrow_u8c3_avx2(ax, &r->wide, (const uint8_t *)in->data + (size_t)y * in->stride,
                                (uint8_t *)out->data + (size_t)(y - y0) * out->stride);
        return;
    }
    if (r->simd && ax->ksize >= 4 && in->depth == 16 && ch == 1) {
        for (uint32_t y = y0; y < y1; y++)
            kiln_hrow_u16c1_avx2(
                ax, (const uint16_t *)((const uint8_t *)in->data + (size_t)y * in->stride),
                (uint16_t *)((uint8_t *)out->data + (size_t)(y - y0) * out->stride));
        return;
    }
    if (in->depth == 8 && fits_i32(ax)) {
        switch (ch) {
        case 1: HPASS(uint8_t, 1, int32_t); break;
        case 2: HPASS(uint8_t, 2, int32_t); break;
        case 3: HPASS(uint8_t, 3, int32_t); break;
        default: HPASS(uint8_t, 4, int32_t); break;
        }
    } else if (in->depth == 8) {
        switch (ch) {
        case 1: HPASS(uint8_t, 1, int64_t); break;
        case 2: HPASS(uint8_t, 2, int64_t); break;
        case 3: HPASS(uint8_t, 3, int64_t); break;
        default: HPASS(uint8_t, 4, int64_t); break;
        }
    } else {
        switch (ch) {
        case 1: HPASS(uint16_t, 1, int64_t); break;
        case 2: HPASS(uint16_t, 2, int64_t); break;
        case 3: HPASS(uint16_t, 3, int64_t); break;
        default: HPASS(uint16_t, 4, int64_t); break;
        }
    }
}

/* Vertical pass: row i of out = weighted rows of in, where in row 0 is input row `row0`.
 * Accumulates whole rows so memory is read sequentially. */
#define VPASS(T, A)                                                                                \
    do {                                                                                           \
        for (uint32_t i = 0; i < ax->out_size; i++) {                                              \
            const int32_t *k = ax->coef + (size_t)i * ax->ksize;                                   \
            A *a = (A *)acc;                                                                       \
            memset(a, 0, n * sizeof *a);                                                           \
            for (uint32_t t = 0; t < ax->count[i]; t++) {                                          \
                const T *s = (const T *)((const uint8_t *)in->data +                               \
                                         (size_t)(ax->first[i] + t - row0) * in->stride);          \
                const A w = (A)k[t];                                                               \
                for (size_t j = 0; j < n; j++)                                                     \
                    a[j] += w * s[j];                                                              \
            }                                                                                      \
            T *d = (T *)((uint8_t *)out->data + (size_t)i * out->stride);                          \
            for (size_t j = 0; j < n; j++)                                                         \
                d[j] = (T)kiln_resize_round(a[j], maxv);                                           \
        }                                                                                          \
    } while (0)

static void vpass(const struct kiln_resize_axis *ax, const struct kiln_image *in, uint32_t row0,
                  int64_t *acc, struct kiln_image *out)
{
    const int64_t maxv = in->depth == 16 ? 65535 : 255;
    const size_t n = (size_t)in->width * in->channels;
    if (in->depth == 8 && fits_i32(ax))
        VPASS(uint8_t, int32_t);
    else if (in->depth == 8)
        VPASS(uint8_t, int64_t);
    else
        VPASS(uint16_t, int64_t);
}

int kiln_resize(struct kiln_resizer *r, const struct kiln_image *in, const struct kiln_box *box,
                uint32_t out_w, uint32_t out_h, int filter, struct kiln_image *out,
                struct kiln_err *err)
{
    return kiln_resize_grid(r, in, NULL, box, out_w, out_h, filter, out, err);
}

/* The coefficient tables for an in_w x in_h input (kept from the last call when it had the
 * same geometry), and the input rows [*y0, *y1) some output row reads. */
static int setup_axes(struct kiln_resizer *r, uint32_t in_w, uint32_t in_h,
                      const struct kiln_grid *grid, const struct kiln_box *box, uint32_t out_w,
                      uint32_t out_h, int filter, uint32_t *y0, uint32_t *y1,
                      struct kiln_err *err)
{
    uint32_t key[10] = {in_w,   in_h,   box->x,           box->y,       box->w,
                        box->h, (uint32_t)filter, grid->denom, grid->shift_x, grid->shift_y};
    if (!r->valid || memcmp(key, r->key, sizeof key) != 0 || r->x.out_size != out_w ||
        r->y.out_size != out_h) {
        kiln_resize_axis_free(&r->x);
        kiln_resize_axis_free(&r->y);
        kiln_resize_wide_free(&r->wide);
        r->valid = false;
        int rc = kiln_resize_axis_init(&r->x, in_w, grid->denom, grid->shift_x, box->x, box->w,
                                       out_w, filter, err);
        if (!rc)
            rc = kiln_resize_axis_init(&r->y, in_h, grid->denom, grid->shift_y, box->y, box->h,
                                       out_h, filter, err);
        if (rc)
            return rc;
        memcpy(r->key, key, sizeof key);
        r->valid = true;
    }
    /* Only the input rows some output row reads go through the horizontal pass. */
    *y0 = r->y.first[0];
    *y1 = 0;
    for (uint32_t i = 0; i < out_h; i++) {
        if (r->y.first[i] < *y0)
            *y0 = r->y.first[i];
        if (r->y.first[i] + r->y.count[i] > *y1)
            *y1 = r->y.first[i] + r->y.count[i];
    }
    return KILN_OK;
}

int kiln_resize_grid(struct kiln_resizer *r, const struct kiln_image *in,
                     const struct kiln_grid *grid, const struct kiln_box *box, uint32_t out_w,
                     uint32_t out_h, int filter, struct kiln_image *out, struct kiln_err *err)
{
    static const struct kiln_grid same = {1, 0, 0};
    if (!grid)
        grid = &same;
    struct kiln_box whole = {0, 0, in->width, in->height};
    if (!box)
        box = &whole;
    uint32_t y0, y1;
    int rc = setup_axes(r, in->width, in->height, grid, box, out_w, out_h, filter, &y0, &y1, err);
    if (rc)
        return rc;
    const bool same_grid = grid->denom == 1;
    const bool need_x = !(same_grid && out_w == in->width && box->x == 0 && box->w == in->width);
    const bool need_y = !(same_grid && out_h == in->height && box->y == 0 && box->h == in->height);
    rc = kiln_image_reshape(out, out_w, out_h, in->channels, in->depth, err);
    if (rc)
        return rc;
    if (!need_x && !need_y) {
        memcpy(out->data, in->data, (size_t)in->height * in->stride);
        return KILN_OK;
    }
    if (!need_y) {
        hpass(r, in, 0, in->height, out);
        return KILN_OK;
    }
    const struct kiln_image *vin = in;
    uint32_t row0 = 0;
    if (need_x) {
        rc = kiln_image_reshape(&r->tmp, out_w, y1 - y0, in->channels, in->depth, err);
        if (rc)
            return rc;
        hpass(r, in, y0, y1, &r->tmp);
        vin = &r->tmp;
        row0 = y0;
    }
    size_t n = (size_t)vin->width * vin->channels;
    if (!kiln_grow((void **)&r->acc, &r->acc_cap, n, sizeof *r->acc))
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a resample row");
    vpass(&r->y, vin, row0, r->acc, out);
    return KILN_OK;
}

int kiln_resize_rows_begin(struct kiln_resizer *r, uint32_t in_w, uint32_t in_h,
                           unsigned channels, unsigned depth, const struct kiln_box *box,
                           uint32_t out_w, uint32_t out_h, int filter, struct kiln_err *err)
{
    static const struct kiln_grid same = {1, 0, 0};
    struct kiln_box whole = {0, 0, in_w, in_h};
    if (!box)
        box = &whole;
    uint32_t y0, y1;
    int rc = setup_axes(r, in_w, in_h, &same, box, out_w, out_h, filter, &y0, &y1, err);
    if (rc)
        return rc;
    r->rows_w = in_w;
    r->rows_h = in_h;
    r->rows_channels = channels;
    r->rows_depth = depth;
    r->rows_need_x = !(out_w == in_w && box->x == 0 && box->w == in_w);
    r->rows_need_y = !(out_h == in_h && box->y == 0 && box->h == in_h);
    /* Without a vertical pass every row is kept (there are out_h of them); with one, the rows
     * it reads, as kiln_resize_grid holds them between its passes. */
    r->rows_y0 = r->rows_need_y ? y0 : 0;
    r->rows_y1 = r->rows_need_y ? y1 : in_h;
    return kiln_image_reshape(&r->tmp, r->rows_need_x ? out_w : in_w, r->rows_y1 - r->rows_y0,
                              channels, depth, err);
}

void kiln_resize_rows_put(struct kiln_resizer *r, uint32_t y, const void *row)
{
    if (y < r->rows_y0 || y >= r->rows_y1)
        return;
    uint8_t *dst = (uint8_t *)r->tmp.data + (size_t)(y - r->rows_y0) * r->tmp.stride;
    const struct kiln_image in = {r->rows_w, 1, r->rows_channels, r->rows_depth,
                                  (size_t)r->rows_w * r->rows_channels * (r->rows_depth / 8),
                                  (void *)row, 0};
    if (!r->rows_need_x) {
        memcpy(dst, row, in.stride);
        return;
    }
    struct kiln_image out = r->tmp;
    out.height = 1;
    out.data = dst;
    hpass(r, &in, 0, 1, &out);
}

int kiln_resize_rows_end(struct kiln_resizer *r, struct kiln_image *out, struct kiln_err *err)
{
    if (!r->rows_need_y) {
        kiln_image_swap(out, &r->tmp);
        return KILN_OK;
    }
    int rc = kiln_image_reshape(out, r->x.out_size, r->y.out_size, r->rows_channels,
                                r->rows_depth, err);
    if (rc)
        return rc;
    size_t n = (size_t)r->tmp.width * r->tmp.channels;
    if (!kiln_grow((void **)&r->acc, &r->acc_cap, n, sizeof *r->acc))
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a resample row");
    vpass(&r->y, &r->tmp, r->rows_y0, r->acc, out);
    return KILN_OK;
}

void kiln_fit_compute(uint32_t src_w, uint32_t src_h, uint32_t dst_w, uint32_t dst_h, int fit,
                      struct kiln_fit_geometry *g)
{
    const uint64_t w = src_w, h = src_h, W = dst_w, H = dst_h;
    g->src = (struct kiln_box){0, 0, src_w, src_h};
    g->inner_w = dst_w;
    g->inner_h = dst_h;
    g->off_x = g->off_y = 0;
    if (fit == KILN_FIT_PAD) {
        /* Scale by min(W/w, H/h); the other side is rounded half up, at least 1 pixel. */
        if (W * h <= H * w) {
            uint64_t ih = (2 * h * W + w) / (2 * w);
            g->inner_h = (uint32_t)(ih < 1 ? 1 : ih > H ? H : ih);
        } else {
            uint64_t iw = (2 * w * H + h) / (2 * h);
            g->inner_w = (uint32_t)(iw < 1 ? 1 : iw > W ? W : iw);
        }
        /* Odd margins put the extra pixel on the right or bottom. */
        g->off_x = (dst_w - g->inner_w) / 2;
        g->off_y = (dst_h - g->inner_h) / 2;
    } else if (fit == KILN_FIT_CROP) {
        /* Scale by max(W/w, H/h); the source box on the other side is rounded half up. */
        if (W * h >= H * w) {
            uint64_t bh = (2 * w * H + W) / (2 * W);
            g->src.h = (uint32_t)(bh < 1 ? 1 : bh > h ? h : bh);
            g->src.y = (src_h - g->src.h) / 2;
        } else {
            uint64_t bw = (2 * h * W + H) / (2 * H);
            g->src.w = (uint32_t)(bw < 1 ? 1 : bw > w ? w : bw);
            g->src.x = (src_w - g->src.w) / 2;
        }
    }
}
