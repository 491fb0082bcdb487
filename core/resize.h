/* Separable fixed-point resampling with antialiasing and the fit rules (stretch, pad, crop).
 * docs/resize.md gives every formula; the per-pixel path uses integers only, so results are
 * identical on every machine, compiler and thread count. */
#ifndef KILN_RESIZE_H
#define KILN_RESIZE_H

#include <stdbool.h>
#include <stdint.h>

#include "err.h"
#include "image.h"

enum kiln_filter {
    KILN_FILTER_NEAREST = 0,
    KILN_FILTER_BOX,
    KILN_FILTER_BILINEAR,
    KILN_FILTER_BICUBIC, /* Keys cubic convolution, a = -0.5 */
    KILN_FILTER_LANCZOS3,
    KILN_FILTER_COUNT
};

const char *kiln_filter_name(int filter);
int kiln_filter_parse(const char *name); /* -1 when unknown */

/* Fixed-point precision of the quantised coefficients: each output row's coefficients are
 * integers summing to exactly 1 << KILN_RESIZE_BITS. */
#define KILN_RESIZE_BITS 22

/* Evaluates a filter kernel at x (in input-pixel units of the unscaled kernel). Exposed so the
 * tests can check the kernels against their published definitions. */
double kiln_filter_kernel(int filter, double x);
double kiln_filter_support(int filter);

/* A rectangle of the source image, in whole pixels of the full-size grid (see kiln_grid). */
struct kiln_box {
    uint32_t x, y, w, h;
};

/* Where the pixels handed to the resampler lie on the full-size grid that boxes are given in.
 * A JPEG decoded at 1/denom scale (docs/pixels.md 1a) has pixel t of an axis covering full-size
 * pixels [t * denom - shift, (t + 1) * denom - shift): shift is 0 unless orientation reversed
 * that axis, which moves the stored image's partial last block to the front (shift = the part
 * of it past the image edge). {1, 0, 0} is the identity. See docs/resize.md, "Reduced
 * sources". */
struct kiln_grid {
    uint32_t denom, shift_x, shift_y;
};

/* Coefficients for one axis: output i reads count[i] inputs from first[i] with weights
 * coef[i * ksize ...]. */
struct kiln_resize_axis {
    uint32_t in_size, out_size, ksize;
    uint32_t *first, *count;
    int32_t *coef;
    /* Largest sum of the positive and of the negative weights of any output: they bound every
     * partial sum, so 8-bit samples can accumulate in 32 bits when 255 times each fits. */
    int64_t max_pos, max_neg;
};

/* Builds the coefficient table mapping the full-size interval [box0, box0 + box_size) onto
 * out_size outputs, reading an axis of in_size pixels that each cover denom full-size pixels
 * starting at -shift (denom 1, shift 0: the pixels are the full-size ones). The box may be any
 * part of [0, in_size * denom - shift). Windows may reach outside the box (they are cut at the
 * image edge and renormalised). Returns KILN_OK, KILN_EINVAL or KILN_ENOMEM. */
int kiln_resize_axis_init(struct kiln_resize_axis *ax, uint32_t in_size, uint32_t denom,
                          uint32_t shift, uint32_t box0, uint32_t box_size, uint32_t out_size,
                          int filter, struct kiln_err *err);
void kiln_resize_axis_free(struct kiln_resize_axis *ax);

/* The 8-bit RGB vector kernel's weight layout for one axis: each coefficient split as
 * hi * 2^15 + lo (lo in [0, 2^15), so both fit 16 bits), four taps per 32-byte vector. */
struct kiln_resize_wide {
    int16_t *w;      /* per output: groups x 2 vectors of 16 int16 (lo, then hi) */
    uint32_t groups; /* whole groups of 4 taps per output (ksize / 4) */
};

/* Per-worker resampler: caches the last coefficient tables (consecutive images often share a
 * size) and scratch buffers. Not shared between threads. */
struct kiln_resizer {
    struct kiln_resize_axis x, y;
    bool valid;
    uint32_t key[10]; /* in_w, in_h, box x,y,w,h, filter, grid (out size is in the axes) */
    int64_t *acc;
    size_t acc_cap;
    struct kiln_image tmp;
    /* Row by row (kiln_resize_rows_*): the input's shape, the input rows the vertical pass
     * reads [rows_y0, rows_y1), and which passes run. */
    uint32_t rows_w, rows_h, rows_y0, rows_y1;
    unsigned rows_channels, rows_depth;
    bool rows_need_x, rows_need_y;
    /* Vector kernels (core/resize_simd.h): used when simd is true, which kiln_resizer_init
     * sets when the processor has them (the tests clear it to compare with the scalar path).
     * wide is the horizontal axis's weight table for them, built on first use. */
    bool simd;
    struct kiln_resize_wide wide;
};

void kiln_resizer_init(struct kiln_resizer *r);
void kiln_resizer_free(struct kiln_resizer *r);

/* Resamples box of in (NULL = whole image) to out_w x out_h with the given filter, horizontal
 * pass first, into out (reshaped; same channels and depth as in). */
int kiln_resize(struct kiln_resizer *r, const struct kiln_image *in, const struct kiln_box *box,
                uint32_t out_w, uint32_t out_h, int filter, struct kiln_image *out,
                struct kiln_err *err);

/* The same for an image that is a reduced decode of a larger one: box is on the full-size grid
 * and grid says where in's pixels lie on it (NULL = in is full size), so the result is the
 * full-size image's resampled as closely as in's pixels allow. */
int kiln_resize_grid(struct kiln_resizer *r, const struct kiln_image *in,
                     const struct kiln_grid *grid, const struct kiln_box *box, uint32_t out_w,
                     uint32_t out_h, int filter, struct kiln_image *out, struct kiln_err *err);

/* The same as kiln_resize on an in_w x in_h image of the given channels and depth, given one
 * row at a time (in any order), so that only the horizontal pass's output of the rows the
 * vertical pass reads is held -- out_w x (about in_h) samples instead of the whole image, for a
 * picture too large to decode whole. The result is bit for bit kiln_resize's. _begin sets up
 * (KILN_ENOMEM, KILN_EINVAL); _put takes input row y (in_w pixels, packed), ignoring rows no
 * output reads; _end writes the result to out (reshaped). */
int kiln_resize_rows_begin(struct kiln_resizer *r, uint32_t in_w, uint32_t in_h,
                           unsigned channels, unsigned depth, const struct kiln_box *box,
                           uint32_t out_w, uint32_t out_h, int filter, struct kiln_err *err);
void kiln_resize_rows_put(struct kiln_resizer *r, uint32_t y, const void *row);
int kiln_resize_rows_end(struct kiln_resizer *r, struct kiln_image *out, struct kiln_err *err);

enum kiln_fit { KILN_FIT_STRETCH = 0, KILN_FIT_PAD, KILN_FIT_CROP, KILN_FIT_COUNT };
const char *kiln_fit_name(int fit);
int kiln_fit_parse(const char *name);

/* Where a src_w x src_h image goes in a dst_w x dst_h frame under a fit rule: the source box
 * to resample, the size it is resampled to, and its offset in the frame (pad leaves the rest of
 * the frame to the pad value). Pure integer arithmetic, see docs/resize.md. */
struct kiln_fit_geometry {
    struct kiln_box src;
    uint32_t inner_w, inner_h, off_x, off_y;
};
void kiln_fit_compute(uint32_t src_w, uint32_t src_h, uint32_t dst_w, uint32_t dst_h, int fit,
                      struct kiln_fit_geometry *g);

#endif
