/* Unit tests for core/resize: kernels against their definitions, exactness properties of the
 * fixed-point resampler, and the pad/crop geometry. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/resize.h"
#include "../../core/resize_simd.h"

static const int all_filters[] = {KILN_FILTER_NEAREST, KILN_FILTER_BOX, KILN_FILTER_BILINEAR,
                                  KILN_FILTER_BICUBIC, KILN_FILTER_LANCZOS3};
#define NFILTERS (sizeof all_filters / sizeof all_filters[0])

static uint32_t px_get(const struct kiln_image *im, uint32_t x, uint32_t y, uint32_t c)
{
    size_t i = ((size_t)y * im->width + x) * im->channels + c;
    return im->depth == 16 ? ((const uint16_t *)im->data)[i] : ((const uint8_t *)im->data)[i];
}

static void px_set(struct kiln_image *im, uint32_t x, uint32_t y, uint32_t c, uint32_t v)
{
    size_t i = ((size_t)y * im->width + x) * im->channels + c;
    if (im->depth == 16)
        ((uint16_t *)im->data)[i] = (uint16_t)v;
    else
        ((uint8_t *)im->data)[i] = (uint8_t)v;
}

/* ---- kernels ---- */

/* Keys (1981), "Cubic convolution interpolation for digital image processing", eq. (15) with
 * the free parameter a (a = -0.5 gives third-order accuracy), written out here directly:
 *   |x| < 1:      (a+2)|x|^3 - (a+3)|x|^2 + 1
 *   1 <= |x| < 2: a|x|^3 - 5a|x|^2 + 8a|x| - 4a
 *   otherwise 0                                           (formula from memory) */
static double keys_ref(double x)
{
    const double a = -0.5;
    double t = fabs(x);
    if (t < 1)
        return (a + 2) * t * t * t - (a + 3) * t * t + 1;
    if (t < 2)
        return a * t * t * t - 5 * a * t * t + 8 * a * t - 4 * a;
    return 0;
}

/* Lanczos-3: sinc(x) sinc(x/3) for |x| < 3, sinc(x) = sin(pi x)/(pi x) (Duchon 1979; the
 * normalised sinc of common practice), here with the C library's sin. */
static double sinc_ref(double x)
{
    return x == 0 ? 1.0 : sin(M_PI * x) / (M_PI * x);
}

static double lanczos3_ref(double x)
{
    return fabs(x) < 3 ? sinc_ref(x) * sinc_ref(x / 3) : 0.0;
}

static void assert_near(double got, double want, double tol)
{
    if (!(fabs(got - want) <= tol)) {
        print_error("got %.17g, want %.17g (tolerance %g)\n", got, want, tol);
        fail();
    }
}

static void test_kernel_bicubic(void **state)
{
    (void)state;
    const int f = KILN_FILTER_BICUBIC;
    /* interpolating: 1 at 0, 0 at the other integers (Keys 1981) */
    assert_near(kiln_filter_kernel(f, 0.0), 1.0, 0);
    for (int n = 1; n <= 3; n++) {
        assert_near(kiln_filter_kernel(f, n), 0.0, 1e-15);
        assert_near(kiln_filter_kernel(f, -n), 0.0, 1e-15);
    }
    /* by hand with a = -0.5: k(0.5) = 1.5/8 - 2.5/4 + 1 = 0.5625;
     * k(1.5) = -0.5*3.375 + 2.5*2.25 - 4*1.5 + 2 = -0.0625 */
    assert_near(kiln_filter_kernel(f, 0.5), 0.5625, 1e-15);
    assert_near(kiln_filter_kernel(f, -0.5), 0.5625, 1e-15);
    assert_near(kiln_filter_kernel(f, 1.5), -0.0625, 1e-15);
    assert_near(kiln_filter_kernel(f, -1.5), -0.0625, 1e-15);
    assert_near(kiln_filter_kernel(f, 2.5), 0.0, 0);
    for (double x = -2.5; x <= 2.5; x += 1.0 / 64)
        assert_near(kiln_filter_kernel(f, x), keys_ref(x), 1e-14);
    /* partition of unity: sum over integer shifts is 1 (Keys 1981) */
    for (double u = 0; u < 1; u += 0.125) {
        double s = 0;
        for (int n = -3; n <= 3; n++)
            s += kiln_filter_kernel(f, u + n);
        assert_near(s, 1.0, 1e-14);
    }
    assert_near(kiln_filter_support(f), 2.0, 0);
}

static void test_kernel_lanczos3(void **state)
{
    (void)state;
    const int f = KILN_FILTER_LANCZOS3;
    assert_near(kiln_filter_kernel(f, 0.0), 1.0, 0);
    for (int n = 1; n <= 3; n++) {
        assert_near(kiln_filter_kernel(f, n), 0.0, 1e-15);
        assert_near(kiln_filter_kernel(f, -n), 0.0, 1e-15);
    }
    /* L(0.5) = sinc(0.5) sinc(1/6) = (2/pi) * sin(pi/6)/(pi/6) = (2/pi)(3/pi) = 6/pi^2 */
    assert_near(kiln_filter_kernel(f, 0.5), sinc_ref(0.5) * sinc_ref(1.0 / 6.0), 1e-15);
    assert_near(kiln_filter_kernel(f, 0.5), 6.0 / (M_PI * M_PI), 1e-15);
    for (double x = -3.5; x <= 3.5; x += 1.0 / 64)
        assert_near(kiln_filter_kernel(f, x), lanczos3_ref(x), 1e-14);
    /* large arguments too: kiln reduces sin(pi x) by itself, so check far from 0 as well */
    assert_near(kiln_filter_kernel(f, 2.987654321), lanczos3_ref(2.987654321), 1e-14);
    assert_near(kiln_filter_kernel(f, 3.0), 0.0, 0);
    assert_near(kiln_filter_support(f), 3.0, 0);
}

/* Triangle (tent) 1 - |x| on |x| < 1 and the box on (-1/2, 1/2] (common practice; the
 * half-open box is kiln's rule so that a sample on a boundary counts once). */
static void test_kernel_bilinear_box(void **state)
{
    (void)state;
    for (double x = -1.5; x <= 1.5; x += 1.0 / 32) {
        assert_near(kiln_filter_kernel(KILN_FILTER_BILINEAR, x), fabs(x) < 1 ? 1 - fabs(x) : 0,
                    1e-15);
        double box = (x > -0.5 && x <= 0.5) ? 1.0 : 0.0;
        assert_near(kiln_filter_kernel(KILN_FILTER_BOX, x), box, 0);
    }
    assert_near(kiln_filter_kernel(KILN_FILTER_BOX, -0.5), 0.0, 0);
    assert_near(kiln_filter_kernel(KILN_FILTER_BOX, 0.5), 1.0, 0);
    assert_near(kiln_filter_support(KILN_FILTER_BILINEAR), 1.0, 0);
    assert_near(kiln_filter_support(KILN_FILTER_BOX), 0.5, 0);
    assert_int_equal(kiln_filter_parse("lanczos3"), KILN_FILTER_LANCZOS3);
    assert_int_equal(kiln_filter_parse("bicubic"), KILN_FILTER_BICUBIC);
    assert_int_equal(kiln_filter_parse("cubic"), -1);
    assert_string_equal(kiln_filter_name(KILN_FILTER_BOX), "box");
}

/* ---- the resampler ---- */

/* Coefficient rows sum to exactly 1 << KILN_RESIZE_BITS (resize.h). */
static void test_axis_coefficients(void **state)
{
    (void)state;
    static const uint32_t sizes[][2] = {{17, 5}, {5, 17}, {100, 1}, {1, 9}, {64, 64}, {7, 3}};
    struct kiln_err err = {0};
    for (size_t s = 0; s < sizeof sizes / sizeof sizes[0]; s++)
        for (size_t f = 0; f < NFILTERS; f++) {
            struct kiln_resize_axis ax;
            assert_int_equal(kiln_resize_axis_init(&ax, sizes[s][0], 1, 0, 0, sizes[s][0],
                                                   sizes[s][1], all_filters[f], &err),
                             KILN_OK);
            for (uint32_t i = 0; i < ax.out_size; i++) {
                int64_t sum = 0;
                for (uint32_t t = 0; t < ax.count[i]; t++)
                    sum += ax.coef[(size_t)i * ax.ksize + t];
                assert_int_equal(sum, 1 << KILN_RESIZE_BITS);
                assert_true(ax.first[i] + ax.count[i] <= ax.in_size);
            }
            kiln_resize_axis_free(&ax);
        }
    struct kiln_resize_axis ax;
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 1, 0, 5, 6, 3, KILN_FILTER_BOX, &err),
                     KILN_EINVAL);
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 1, 0, 0, 10, 0, KILN_FILTER_BOX, &err),
                     KILN_EINVAL);
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 1, 0, 0, 10, 3, 99, &err), KILN_EINVAL);
}

/* A constant image stays exactly constant: the weights sum to one (common practice, and the
 * point of resize.c's residue rule), for every filter, size, depth and channel count. */
static void test_constant_stays_constant(void **state)
{
    (void)state;
    static const uint32_t outs[][2] = {{5, 4}, {40, 31}, {17, 7}, {9, 13}, {1, 1}, {3, 50}};
    static const uint32_t channels[] = {1, 3, 4};
    static const uint32_t v8[4] = {0, 255, 77, 200}, v16[4] = {65535, 0, 12345, 40000};
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    for (int depth = 8; depth <= 16; depth += 8)
        for (size_t ci = 0; ci < 3; ci++) {
            const uint32_t C = channels[ci];
            const uint32_t *v = depth == 8 ? v8 : v16;
            assert_int_equal(kiln_image_reshape(&in, 17, 13, C, (uint32_t)depth, &err), KILN_OK);
            for (uint32_t y = 0; y < 13; y++)
                for (uint32_t x = 0; x < 17; x++)
                    for (uint32_t c = 0; c < C; c++)
                        px_set(&in, x, y, c, v[c]);
            for (size_t f = 0; f < NFILTERS; f++)
                for (size_t o = 0; o < sizeof outs / sizeof outs[0]; o++) {
                    /* whole image, then a crop box */
                    const struct kiln_box box = {3, 2, 11, 9};
                    for (int b = 0; b < 2; b++) {
                        assert_int_equal(kiln_resize(&r, &in, b ? &box : NULL, outs[o][0],
                                                     outs[o][1], all_filters[f], &out, &err),
                                         KILN_OK);
                        assert_int_equal(out.width, outs[o][0]);
                        assert_int_equal(out.height, outs[o][1]);
                        for (uint32_t y = 0; y < out.height; y++)
                            for (uint32_t x = 0; x < out.width; x++)
                                for (uint32_t c = 0; c < C; c++)
                                    if (px_get(&out, x, y, c) != v[c]) {
                                        print_error("%s %ux%u depth %d C %u: (%u,%u,%u) = %u\n",
                                                    kiln_filter_name(all_filters[f]),
                                                    outs[o][0], outs[o][1], depth, C, x, y, c,
                                                    px_get(&out, x, y, c));
                                        fail();
                                    }
                    }
                }
        }
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

static uint32_t lcg(uint32_t *s)
{
    *s = *s * 1664525u + 1013904223u; /* Numerical Recipes LCG constants (from memory) */
    return *s >> 8;
}

/* Box filter at an integer factor k along one axis: each output is the mean of its k inputs,
 * rounded half up, floor(sum/k + 1/2) = floor((2 sum + k) / 2k) (definition of a box
 * average). */
static void test_box_integer_factor_1d(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    uint32_t seed = 7;
    for (int depth = 8; depth <= 16; depth += 8)
        for (uint32_t k = 2; k <= 4; k += 2) {
            const uint32_t maxv = depth == 8 ? 255 : 65535, W = 12 * k, H = 5;
            assert_int_equal(kiln_image_reshape(&in, W, H, 3, (uint32_t)depth, &err), KILN_OK);
            for (uint32_t y = 0; y < H; y++)
                for (uint32_t x = 0; x < W; x++)
                    for (uint32_t c = 0; c < 3; c++)
                        px_set(&in, x, y, c, lcg(&seed) % (maxv + 1));
            /* horizontal: W -> W/k, height kept */
            assert_int_equal(kiln_resize(&r, &in, NULL, W / k, H, KILN_FILTER_BOX, &out, &err),
                             KILN_OK);
            for (uint32_t y = 0; y < H; y++)
                for (uint32_t x = 0; x < W / k; x++)
                    for (uint32_t c = 0; c < 3; c++) {
                        uint64_t sum = 0;
                        for (uint32_t t = 0; t < k; t++)
                            sum += px_get(&in, x * k + t, y, c);
                        assert_int_equal(px_get(&out, x, y, c), (2 * sum + k) / (2 * k));
                    }
            /* vertical: a W x (4k) image -> W x 4 */
            assert_int_equal(kiln_image_reshape(&in, 7, 4 * k, 1, (uint32_t)depth, &err),
                             KILN_OK);
            for (uint32_t y = 0; y < 4 * k; y++)
                for (uint32_t x = 0; x < 7; x++)
                    px_set(&in, x, y, 0, lcg(&seed) % (maxv + 1));
            assert_int_equal(kiln_resize(&r, &in, NULL, 7, 4, KILN_FILTER_BOX, &out, &err),
                             KILN_OK);
            for (uint32_t y = 0; y < 4; y++)
                for (uint32_t x = 0; x < 7; x++) {
                    uint64_t sum = 0;
                    for (uint32_t t = 0; t < k; t++)
                        sum += px_get(&in, x, y * k + t, 0);
                    assert_int_equal(px_get(&out, x, y, 0), (2 * sum + k) / (2 * k));
                }
        }
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

/* Box filter at factor k in both directions. The resampler is separable with an intermediate
 * image at the output depth (horizontal pass first, resize.h), so each output is the rounded
 * mean over k rows of the rounded horizontal means. That is within 1 of the exact k x k block
 * mean, and equal to it whenever no intermediate rounding happens. */
static void test_box_integer_factor_2d(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    uint32_t seed = 11;
    for (uint32_t k = 2; k <= 4; k += 2) {
        const uint32_t W = 8 * k, H = 6 * k;
        for (int pass = 0; pass < 2; pass++) {
            assert_int_equal(kiln_image_reshape(&in, W, H, 1, 8, &err), KILN_OK);
            /* pass 0: random; pass 1: every row of a block is constant across the block, so
             * the horizontal means are exact integers and the result is the block mean */
            for (uint32_t y = 0; y < H; y++)
                for (uint32_t x = 0; x < W; x++)
                    px_set(&in, x, y, 0, pass == 0 || x % k == 0 ? lcg(&seed) % 256
                                                                 : px_get(&in, x - 1, y, 0));
            assert_int_equal(kiln_resize(&r, &in, NULL, W / k, H / k, KILN_FILTER_BOX, &out,
                                         &err),
                             KILN_OK);
            for (uint32_t y = 0; y < H / k; y++)
                for (uint32_t x = 0; x < W / k; x++) {
                    uint64_t sum = 0, rowsum = 0;
                    for (uint32_t j = 0; j < k; j++) {
                        uint64_t s = 0;
                        for (uint32_t i = 0; i < k; i++)
                            s += px_get(&in, x * k + i, y * k + j, 0);
                        sum += s;
                        rowsum += (2 * s + k) / (2 * k);
                    }
                    const uint32_t got = px_get(&out, x, y, 0);
                    const uint64_t exact = (2 * sum + k * k) / (2 * k * k);
                    assert_int_equal(got, (2 * rowsum + k) / (2 * k));
                    assert_true(got + 1 >= exact && got <= exact + 1);
                    if (pass == 1)
                        assert_int_equal(got, exact);
                }
        }
    }
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

/* Linear interpolation of a linear function is exact, and Keys' cubic reproduces polynomials
 * up to degree two (Keys 1981): upscaling a ramp v(x) = a + b x gives, at output i, the ramp at
 * the output's centre in input coordinates, (i + 1/2) * in/out - 1/2 (half-pixel centres,
 * SPEC section 4). Within +-1 for the final rounding, away from the borders where the window
 * is cut. The same holds along y. */
static void test_ramp_upscale(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    static const int filters[] = {KILN_FILTER_BILINEAR, KILN_FILTER_BICUBIC};
    for (int depth = 8; depth <= 16; depth += 8)
        for (int fi = 0; fi < 2; fi++) {
            const uint32_t Win = 16, Wout = 64, k = Wout / Win;
            const double a = depth == 8 ? 10 : 1000, b = depth == 8 ? 15 : 4000;
            /* horizontal ramp, 3 rows */
            assert_int_equal(kiln_image_reshape(&in, Win, 3, 1, (uint32_t)depth, &err), KILN_OK);
            for (uint32_t y = 0; y < 3; y++)
                for (uint32_t x = 0; x < Win; x++)
                    px_set(&in, x, y, 0, (uint32_t)(a + b * x));
            assert_int_equal(kiln_resize(&r, &in, NULL, Wout, 3, filters[fi], &out, &err),
                             KILN_OK);
            const uint32_t margin = 2 * k; /* two input pixels */
            for (uint32_t y = 0; y < 3; y++)
                for (uint32_t i = margin; i < Wout - margin; i++) {
                    double want = a + b * ((i + 0.5) * Win / Wout - 0.5);
                    assert_near(px_get(&out, i, y, 0), want, 1.0);
                }
            /* vertical ramp */
            assert_int_equal(kiln_image_reshape(&in, 2, Win, 1, (uint32_t)depth, &err), KILN_OK);
            for (uint32_t y = 0; y < Win; y++)
                for (uint32_t x = 0; x < 2; x++)
                    px_set(&in, x, y, 0, (uint32_t)(a + b * y));
            assert_int_equal(kiln_resize(&r, &in, NULL, 2, Wout, filters[fi], &out, &err),
                             KILN_OK);
            for (uint32_t j = margin; j < Wout - margin; j++) {
                double want = a + b * ((j + 0.5) * Win / Wout - 0.5);
                assert_near(px_get(&out, 1, j, 0), want, 1.0);
            }
        }
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

/* Resampling a box to its own size with an interpolating kernel (k(0) = 1, k(n) = 0; Keys
 * 1981 for the cubic, the sinc zeros for Lanczos) copies the box exactly. */
static void test_same_size_box_is_a_crop(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    uint32_t seed = 3;
    assert_int_equal(kiln_image_reshape(&in, 20, 15, 3, 16, &err), KILN_OK);
    for (uint32_t y = 0; y < 15; y++)
        for (uint32_t x = 0; x < 20; x++)
            for (uint32_t c = 0; c < 3; c++)
                px_set(&in, x, y, c, lcg(&seed) % 65536);
    const struct kiln_box box = {4, 3, 9, 7};
    for (size_t f = 0; f < NFILTERS; f++) {
        assert_int_equal(kiln_resize(&r, &in, &box, 9, 7, all_filters[f], &out, &err), KILN_OK);
        for (uint32_t y = 0; y < 7; y++)
            for (uint32_t x = 0; x < 9; x++)
                for (uint32_t c = 0; c < 3; c++)
                    assert_int_equal(px_get(&out, x, y, c), px_get(&in, 4 + x, 3 + y, c));
    }
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

/* Nearest neighbour takes the input pixel whose span [x, x+1) holds the output centre
 * (i + 1/2) * in/out (resize.c's rule): by hand, 8 -> 4 reads 1, 3, 5, 7 and 2 -> 6 reads
 * 0, 0, 0, 1, 1, 1. */
static void test_nearest(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, out = {0};
    struct kiln_err err = {0};
    assert_int_equal(kiln_image_reshape(&in, 8, 1, 1, 8, &err), KILN_OK);
    for (int x = 0; x < 8; x++)
        px_set(&in, (uint32_t)x, 0, 0, (uint32_t)(10 * x));
    assert_int_equal(kiln_resize(&r, &in, NULL, 4, 1, KILN_FILTER_NEAREST, &out, &err), KILN_OK);
    const uint8_t want4[4] = {10, 30, 50, 70};
    assert_memory_equal(out.data, want4, 4);
    assert_int_equal(kiln_image_reshape(&in, 2, 1, 1, 8, &err), KILN_OK);
    px_set(&in, 0, 0, 0, 5);
    px_set(&in, 1, 0, 0, 9);
    assert_int_equal(kiln_resize(&r, &in, NULL, 6, 1, KILN_FILTER_NEAREST, &out, &err), KILN_OK);
    const uint8_t want6[6] = {5, 5, 5, 9, 9, 9};
    assert_memory_equal(out.data, want6, 6);
    kiln_image_free(&in);
    kiln_image_free(&out);
    kiln_resizer_free(&r);
}

/* A reduced image on the full-size grid (kiln_grid, docs/resize.md "Reduced sources"): when
 * the full-size image is the reduced one with every pixel repeated over the d x d full-size
 * pixels it covers (the first ones cut by the shift), nearest neighbour reads the same value
 * either way, for any box, exactly. */
static void test_nearest_on_grid(void **state)
{
    (void)state;
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image red = {0}, full = {0}, a = {0}, b = {0};
    struct kiln_err err = {0};
    uint32_t seed = 11;
    const uint32_t rw = 9, rh = 7;
    assert_int_equal(kiln_image_reshape(&red, rw, rh, 3, 8, &err), KILN_OK);
    for (uint32_t y = 0; y < rh; y++)
        for (uint32_t x = 0; x < rw; x++)
            for (uint32_t c = 0; c < 3; c++)
                px_set(&red, x, y, c, lcg(&seed) % 256);
    static const uint32_t outs[][2] = {{5, 4}, {13, 11}, {40, 3}, {1, 1}};
    size_t checked = 0;
    for (uint32_t d = 1; d <= 8; d *= 2)
        for (uint32_t k = 0; k < 3; k++) {
            const struct kiln_grid grid = {d, (d - 1) * (k & 1), d / 2 * (k >> 1)};
            const uint32_t fw = rw * d - grid.shift_x, fh = rh * d - grid.shift_y;
            assert_int_equal(kiln_image_reshape(&full, fw, fh, 3, 8, &err), KILN_OK);
            for (uint32_t y = 0; y < fh; y++)
                for (uint32_t x = 0; x < fw; x++)
                    for (uint32_t c = 0; c < 3; c++)
                        px_set(&full, x, y, c,
                               px_get(&red, (x + grid.shift_x) / d, (y + grid.shift_y) / d, c));
            const struct kiln_box boxes[] = {{0, 0, fw, fh}, {3, 2, fw - 5, fh - 4}, {1, 0, 2, fh}};
            for (size_t bi = 0; bi < 3; bi++)
                for (size_t o = 0; o < 4; o++) {
                    assert_int_equal(kiln_resize_grid(&r, &red, &grid, &boxes[bi], outs[o][0],
                                                      outs[o][1], KILN_FILTER_NEAREST, &a, &err),
                                     KILN_OK);
                    assert_int_equal(kiln_resize(&r, &full, &boxes[bi], outs[o][0], outs[o][1],
                                                 KILN_FILTER_NEAREST, &b, &err),
                                     KILN_OK);
                    assert_memory_equal(a.data, b.data, a.stride * a.height);
                    checked++;
                }
        }
    assert_int_equal(checked, 4 * 3 * 3 * 4);
    kiln_image_free(&red);
    kiln_image_free(&full);
    kiln_image_free(&a);
    kiln_image_free(&b);
    kiln_resizer_free(&r);
}

/* The grid's own limits: the box must lie on the reduced pixels' span, [-shift, in * d -
 * shift) cut to [0, ...), and the shift must be less than one reduced pixel; a unit grid gives
 * the plain resampler's bytes. */
static void test_grid_limits(void **state)
{
    (void)state;
    struct kiln_resize_axis ax;
    struct kiln_err err = {0};
    /* 10 pixels of 1/4 shifted by 3 span full-size [0, 37). */
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 4, 3, 0, 37, 5, KILN_FILTER_BILINEAR, &err),
                     KILN_OK);
    kiln_resize_axis_free(&ax);
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 4, 3, 1, 37, 5, KILN_FILTER_BILINEAR, &err),
                     KILN_EINVAL);
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 4, 4, 0, 36, 5, KILN_FILTER_BILINEAR, &err),
                     KILN_EINVAL);
    assert_int_equal(kiln_resize_axis_init(&ax, 10, 0, 0, 0, 10, 5, KILN_FILTER_BILINEAR, &err),
                     KILN_EINVAL);
    struct kiln_resizer r;
    kiln_resizer_init(&r);
    struct kiln_image in = {0}, a = {0}, b = {0};
    uint32_t seed = 5;
    assert_int_equal(kiln_image_reshape(&in, 31, 17, 1, 16, &err), KILN_OK);
    for (uint32_t y = 0; y < 17; y++)
        for (uint32_t x = 0; x < 31; x++)
            px_set(&in, x, y, 0, lcg(&seed) % 65536);
    const struct kiln_grid unit = {1, 0, 0};
    const struct kiln_box box = {2, 1, 27, 13};
    for (size_t f = 0; f < NFILTERS; f++) {
        assert_int_equal(kiln_resize_grid(&r, &in, &unit, &box, 11, 5, all_filters[f], &a, &err),
                         KILN_OK);
        kiln_resizer_free(&r); /* no cached tables between the two */
        assert_int_equal(kiln_resize(&r, &in, &box, 11, 5, all_filters[f], &b, &err), KILN_OK);
        assert_memory_equal(a.data, b.data, a.stride * a.height);
    }
    kiln_image_free(&in);
    kiln_image_free(&a);
    kiln_image_free(&b);
    kiln_resizer_free(&r);
}

/* ---- fit geometry, every value by hand ---- */

static void expect_fit(uint32_t sw, uint32_t sh, uint32_t dw, uint32_t dh, int fit,
                       struct kiln_box src, uint32_t iw, uint32_t ih, uint32_t ox, uint32_t oy)
{
    struct kiln_fit_geometry g;
    kiln_fit_compute(sw, sh, dw, dh, fit, &g);
    if (g.src.x != src.x || g.src.y != src.y || g.src.w != src.w || g.src.h != src.h ||
        g.inner_w != iw || g.inner_h != ih || g.off_x != ox || g.off_y != oy) {
        print_error("%s %ux%u -> %ux%u: src %u,%u %ux%u inner %ux%u at %u,%u\n",
                    kiln_fit_name(fit), sw, sh, dw, dh, g.src.x, g.src.y, g.src.w, g.src.h,
                    g.inner_w, g.inner_h, g.off_x, g.off_y);
        fail();
    }
}

static void test_fit_geometry(void **state)
{
    (void)state;
    const int P = KILN_FIT_PAD, C = KILN_FIT_CROP, S = KILN_FIT_STRETCH;
    /* stretch: whole source to the whole frame */
    expect_fit(640, 480, 224, 100, S, (struct kiln_box){0, 0, 640, 480}, 224, 100, 0, 0);
    /* pad (letterbox): scale min(224/400, 224/200) = 0.56 -> 224 x 112, margins 56 */
    expect_fit(400, 200, 224, 224, P, (struct kiln_box){0, 0, 400, 200}, 224, 112, 0, 56);
    expect_fit(200, 400, 224, 224, P, (struct kiln_box){0, 0, 200, 400}, 112, 224, 56, 0);
    /* 333x100 into 100x100: 100*100/333 = 30.03 -> 30, margin (100-30)/2 = 35 */
    expect_fit(333, 100, 100, 100, P, (struct kiln_box){0, 0, 333, 100}, 100, 30, 0, 35);
    /* 300x200 into 100x99: 200*100/300 = 66.67 -> 67, margin (99-67)/2 = 16 (extra pixel at
     * the bottom) */
    expect_fit(300, 200, 100, 99, P, (struct kiln_box){0, 0, 300, 200}, 100, 67, 0, 16);
    /* 3x2 into 5x5: 2*5/3 = 3.33 -> 3, margin 1 */
    expect_fit(3, 2, 5, 5, P, (struct kiln_box){0, 0, 3, 2}, 5, 3, 0, 1);
    /* 1000x1 into 10x10: 0.01 rounds to 0, kept at 1 pixel; margin (10-1)/2 = 4 */
    expect_fit(1000, 1, 10, 10, P, (struct kiln_box){0, 0, 1000, 1}, 10, 1, 0, 4);
    /* same aspect ratio: no margins */
    expect_fit(400, 300, 200, 150, P, (struct kiln_box){0, 0, 400, 300}, 200, 150, 0, 0);
    /* 4x1 into 8x8: height 1*8/4 = 2, margin 3; 4x3 into 2x2: 3*2/4 = 1.5, a half, -> 2 */
    expect_fit(4, 1, 8, 8, P, (struct kiln_box){0, 0, 4, 1}, 8, 2, 0, 3);
    expect_fit(4, 3, 2, 2, P, (struct kiln_box){0, 0, 4, 3}, 2, 2, 0, 0); /* 1.5 -> 2 */
    /* crop (fill, centre crop): 400x200 into 224x224 -> scale 224/200, source box 200x200 at
     * x = (400-200)/2 = 100 */
    expect_fit(400, 200, 224, 224, C, (struct kiln_box){100, 0, 200, 200}, 224, 224, 0, 0);
    /* 640x480 into 100x50: scale max(100/640, 50/480) = 100/640, box height 640*50/100 = 320
     * at y = (480-320)/2 = 80 */
    expect_fit(640, 480, 100, 50, C, (struct kiln_box){0, 80, 640, 320}, 100, 50, 0, 0);
    /* 101x100 into 50x50: box 100x100 at x = (101-100)/2 = 0 */
    expect_fit(101, 100, 50, 50, C, (struct kiln_box){0, 0, 100, 100}, 50, 50, 0, 0);
    /* 7x3 into 2x2: box width 3*2/2 = 3 at x = 2 */
    expect_fit(7, 3, 2, 2, C, (struct kiln_box){2, 0, 3, 3}, 2, 2, 0, 0);
    /* 5x4 into 2x1: box height 5*1/2 = 2.5 -> 3 at y = (4-3)/2 = 0 */
    expect_fit(5, 4, 2, 1, C, (struct kiln_box){0, 0, 5, 3}, 2, 1, 0, 0);
    assert_int_equal(kiln_fit_parse("pad"), KILN_FIT_PAD);
    assert_int_equal(kiln_fit_parse("letterbox"), -1);
}

/* ---- vector kernels ---- */

/* The AVX2 horizontal passes against the scalar one, byte for byte: every filter, both layouts
 * they take (8-bit RGB, 16-bit grey) and the layouts they leave to the scalar code, widths from
 * 1 to past a row of 16-byte loads, up- and downscaling, boxes off the origin and reduced grids
 * (whose windows end at the row's last pixel, where the 8-bit kernel must not read past it).
 * Pixels are random with runs of the extremes, so clamping at 0 and at the maximum is reached. */
static void test_vector_kernels_identical(void **state)
{
    (void)state;
    if (!kiln_resize_simd_available())
        skip(); /* this processor has no AVX2: only the scalar pass exists here */
    static const uint32_t in_ws[] = {1, 2, 3, 4, 5, 7, 8, 13, 17, 31, 64, 100, 257, 661};
    static const uint32_t out_ws[] = {1, 2, 3, 5, 16, 33, 128, 300};
    static const unsigned layouts[][2] = {{3, 8}, {1, 16}, {1, 8}, {3, 16}, {4, 8}};
    uint64_t seed = 0x9e3779b97f4a7c15u;
    size_t cases = 0, vector_cases = 0;
    for (size_t f = 0; f < NFILTERS; f++)
        for (size_t li = 0; li < sizeof layouts / sizeof layouts[0]; li++)
            for (size_t a = 0; a < sizeof in_ws / sizeof in_ws[0]; a++)
                for (size_t b = 0; b < sizeof out_ws / sizeof out_ws[0]; b++)
                    for (unsigned variant = 0; variant < 3; variant++) {
                        const uint32_t w = in_ws[a], h = 3, ow = out_ws[b];
                        const unsigned ch = layouts[li][0], depth = layouts[li][1];
                        struct kiln_image in = {0}, o1 = {0}, o2 = {0};
                        struct kiln_err err;
                        assert_int_equal(kiln_image_reshape(&in, w, h, ch, depth, &err), KILN_OK);
                        const uint32_t maxv = depth == 16 ? 65535 : 255;
                        for (uint32_t y = 0; y < h; y++)
                            for (uint32_t x = 0; x < w; x++)
                                for (uint32_t c = 0; c < ch; c++) {
                                    seed = seed * 6364136223846793005u + 1442695040888963407u;
                                    uint32_t v = (uint32_t)(seed >> 33);
                                    const uint32_t ext = (x & 1) ? maxv : 0;
                                    px_set(&in, x, y, c, (x / 3) % 4 == 0 ? ext : v % (maxv + 1));
                                }
                        /* variant 0: whole image; 1: a box off the origin; 2: a 1/4 grid */
                        struct kiln_grid grid = {variant == 2 ? 4 : 1, 0, 0};
                        struct kiln_box box = {0, 0, w * grid.denom, h * grid.denom};
                        if (variant == 1 && w > 2) {
                            box.x = 1;
                            box.w = w - 2;
                        }
                        if (variant == 2 && w > 1) {
                            grid.shift_x = 1; /* as after an orientation that reversed x */
                            box.w -= 1;
                        }
                        struct kiln_resizer rv, rs;
                        kiln_resizer_init(&rv);
                        kiln_resizer_init(&rs);
                        rs.simd = false;
                        assert_true(rv.simd);
                        assert_int_equal(kiln_resize_grid(&rv, &in, &grid, &box, ow, 2,
                                                          all_filters[f], &o1, &err),
                                         KILN_OK);
                        assert_int_equal(kiln_resize_grid(&rs, &in, &grid, &box, ow, 2,
                                                          all_filters[f], &o2, &err),
                                         KILN_OK);
                        if (memcmp(o1.data, o2.data, o2.stride * o2.height) != 0)
                            fail_msg("vector and scalar differ: %s, %u ch %u-bit, %u -> %u, "
                                     "variant %u",
                                     kiln_filter_name(all_filters[f]), ch, depth, w, ow, variant);
                        cases++;
                        vector_cases += rv.x.ksize >= 4 && ((ch == 3 && depth == 8) ||
                                                            (ch == 1 && depth == 16));
                        kiln_resizer_free(&rv);
                        kiln_resizer_free(&rs);
                        kiln_image_free(&in);
                        kiln_image_free(&o1);
                        kiln_image_free(&o2);
                    }
    /* Most cases of the two vector layouts must really have taken the vector path. */
    assert_true(vector_cases > cases / 4);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_kernel_bicubic),
        cmocka_unit_test(test_kernel_lanczos3),
        cmocka_unit_test(test_kernel_bilinear_box),
        cmocka_unit_test(test_axis_coefficients),
        cmocka_unit_test(test_constant_stays_constant),
        cmocka_unit_test(test_box_integer_factor_1d),
        cmocka_unit_test(test_box_integer_factor_2d),
        cmocka_unit_test(test_ramp_upscale),
        cmocka_unit_test(test_same_size_box_is_a_crop),
        cmocka_unit_test(test_nearest),
        cmocka_unit_test(test_nearest_on_grid),
        cmocka_unit_test(test_grid_limits),
        cmocka_unit_test(test_fit_geometry),
        cmocka_unit_test(test_vector_kernels_identical),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
