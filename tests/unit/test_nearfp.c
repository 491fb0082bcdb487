/* Unit tests for core/nearfp: the near-duplicate fingerprint and pixel check. Outside
 * references: numpy block sums of a 32-times supersampled picture for the grid; numpy's
 * cosine (a DCT-II written as a matrix product; scipy.fft.dct type 2 as well when scipy is
 * installed) for the DCT; numpy.corrcoef for the correlation; the CIPA DC-008 orientation table
 * (from memory, as tests/cli/orientation.sh checks kiln_orient against PIL) applied by an index
 * loop written here for the orientation identities; scikit-image's "camera" picture (CC0, Lav
 * Varshney; python3-skimage) for the check on a real photograph. Tests needing /usr/bin/python3
 * or the picture are skipped with the reason when those are absent. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../core/convert.h"
#include "../../core/nearfp.h"

static uint64_t splitmix64(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

/* A textured picture: a smooth random field plus detail, any shape. */
static void make_image(struct kiln_image *img, uint32_t w, uint32_t h, uint32_t ch, uint32_t depth,
                       uint64_t seed)
{
    struct kiln_err err;
    assert_int_equal(kiln_image_reshape(img, w, h, ch, depth, &err), KILN_OK);
    uint64_t s = seed;
    int lat[5][5][4];
    for (int y = 0; y < 5; y++)
        for (int x = 0; x < 5; x++)
            for (int c = 0; c < 4; c++)
                lat[y][x][c] = (int)(splitmix64(&s) % 200) + 20;
    for (uint32_t y = 0; y < h; y++)
        for (uint32_t x = 0; x < w; x++)
            for (uint32_t c = 0; c < ch; c++) {
                uint32_t gx = x * 4 / (w > 1 ? w : 1), gy = y * 4 / (h > 1 ? h : 1);
                int v = lat[gy][gx][c] + (int)(splitmix64(&s) % 31) - 15;
                if (c == 3 || (ch == 2 && c == 1))
                    v = 255 - (int)(splitmix64(&s) % 4) * 40; /* alpha: mostly opaque */
                v = v < 0 ? 0 : v > 255 ? 255 : v;
                size_t i = ((size_t)y * w + x) * ch + c;
                if (depth == 8)
                    ((uint8_t *)img->data)[i] = (uint8_t)v;
                else
                    ((uint16_t *)img->data)[i] = (uint16_t)(v * 257 + (int)(splitmix64(&s) % 200));
            }
}

static int have_python(void)
{
    if (access(KILN_PYTHON, X_OK) != 0) {
        print_message("skipped: %s is not available\n", KILN_PYTHON);
        return 0;
    }
    return 1;
}

static char tmpl[] = "/tmp/kiln-nearfp-XXXXXX";

static const char *scratch_dir(void)
{
    static char dir[sizeof tmpl];
    if (!dir[0]) {
        memcpy(dir, tmpl, sizeof tmpl);
        assert_non_null(mkdtemp(dir));
    }
    return dir;
}

static void write_raw(const char *path, const void *data, size_t n)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(data, 1, n, f), n);
    assert_int_equal(fclose(f), 0);
}

/* ---- grid ------------------------------------------------------------------------------------ */

/* The grid is the area average of the luma (docs/near-duplicates.md). The reference does it
 * another way: every pixel repeated 32 times in each direction, so that the supersampled
 * picture cuts into 32 x 32 equal blocks of w x h samples, whose sums numpy takes exactly. (PIL's
 * BOX filter is no reference here: it weighs whole pixels by whether their centres fall in a
 * cell, not by the area they share with it.) The luma and alpha rules are docs/pixels.md's. */
static const char grid_py[] =
    "import sys, numpy as np\n"
    "path, w, h, ch, depth = sys.argv[1], *map(int, sys.argv[2:6])\n"
    "a = np.fromfile(path, np.uint8 if depth == 8 else '<u2').astype(np.int64).reshape(h, w, ch)\n"
    "M = 255 if depth == 8 else 65535\n"
    "if ch in (2, 4):\n"
    "    al = a[..., -1]\n"
    "    a = (a[..., :-1] * al[..., None] + M * (M - al[..., None]) + M // 2) // M\n"
    "y = a[..., 0] if a.shape[2] == 1 else (299 * a[..., 0] + 587 * a[..., 1] + 114 * a[..., 2] + 500) // 1000\n"
    "s = np.repeat(np.repeat(y, 32, 0), 32, 1).reshape(32, h, 32, w).sum(axis=(1, 3))\n"
    "scale = 16 * (257 if depth == 8 else 1)\n"
    "g = (s * scale + (w * h) // 2) // (w * h)\n"
    "print(' '.join(str(int(v)) for v in g.ravel()))\n";

/* The scalar loops give the same grid and colour grid as the vector one (where this processor
 * has it); the scalar grid into gs. */
static void paths_agree(const struct kiln_image *img, int32_t gs[32][32])
{
    struct kiln_err err;
    int32_t gv[32][32];
    static int64_t cv[3][32][32], cs[3][32][32];
    assert_int_equal(kiln_nearfp_grid_path(img, 1, gv, cv, &err), KILN_OK);
    assert_int_equal(kiln_nearfp_grid_path(img, 0, gs, cs, &err), KILN_OK);
    assert_memory_equal(gv, gs, sizeof gv);
    assert_memory_equal(cv, cs, sizeof cv);
}

static void check_grid(uint32_t w, uint32_t h, uint32_t ch, uint32_t depth, uint64_t seed)
{
    struct kiln_image img = {0};
    make_image(&img, w, h, ch, depth, seed);
    int32_t g[32][32], gs[32][32];
    struct kiln_err err;
    assert_int_equal(kiln_nearfp_grid(&img, g, &err), KILN_OK);
    paths_agree(&img, gs);
    assert_memory_equal(g, gs, sizeof g);
    char raw[256], py[256], cmd[1024];
    snprintf(raw, sizeof raw, "%s/img.raw", scratch_dir());
    snprintf(py, sizeof py, "%s/grid.py", scratch_dir());
    write_raw(raw, img.data, (size_t)h * img.stride);
    write_raw(py, grid_py, sizeof grid_py - 1);
    snprintf(cmd, sizeof cmd, "%s %s %s %u %u %u %u", KILN_PYTHON, py, raw, w, h, ch, depth);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    for (int i = 0; i < 32 * 32; i++) {
        long long v;
        assert_int_equal(fscanf(p, "%lld", &v), 1);
        if (v != g[i / 32][i % 32])
            fail_msg("%ux%u, %u channels, %u bits: cell %d is %d, the supersampled picture "
                     "gives %lld", w, h, ch, depth, i, g[i / 32][i % 32], v);
    }
    assert_int_equal(pclose(p), 0);
    kiln_image_free(&img);
}

/* The vector and scalar cell sums agree on 8-bit RGB with the extremes the vector arithmetic
 * must carry (t = 299r + 587g + 114b + 500 up to 255 500: all 255; all 0; full-range noise),
 * at widths whose runs have every remainder of the 8-pixel step; no Python needed. */
static void test_grid_vector_extremes(void **state)
{
    (void)state;
    static const uint32_t widths[] = {32, 300, 333, 1601, 4099};
    for (int fill = 0; fill < 3; fill++)
        for (size_t k = 0; k < sizeof widths / sizeof widths[0]; k++) {
            struct kiln_image img = {0};
            struct kiln_err err;
            const uint32_t w = widths[k], h = 35;
            assert_int_equal(kiln_image_reshape(&img, w, h, 3, 8, &err), KILN_OK);
            uint64_t s = 77 + k;
            for (size_t i = 0; i < (size_t)w * h * 3; i++)
                ((uint8_t *)img.data)[i] = fill == 0   ? 255
                                           : fill == 1 ? 0
                                                       : (uint8_t)splitmix64(&s);
            int32_t gs[32][32];
            paths_agree(&img, gs);
            if (fill == 0) /* white: every cell at the top of the 16-bit scale, x 16 */
                assert_int_equal(gs[31][31], 16 * 65535);
            kiln_image_free(&img);
        }
}

static void test_grid(void **state)
{
    (void)state;
    if (!have_python())
        skip();
    check_grid(97, 61, 1, 8, 1);    /* neither side a multiple of 32 */
    check_grid(32, 32, 3, 8, 2);
    check_grid(331, 40, 3, 16, 3);  /* wide, 16 bits */
    check_grid(45, 77, 4, 8, 4);    /* alpha over white */
    check_grid(64, 37, 2, 16, 5);   /* grey + alpha, 16 bits */
    check_grid(7, 5, 1, 8, 6);      /* smaller than the grid: cells inside one pixel */
    check_grid(1, 1, 3, 8, 7);
    check_grid(200, 3, 1, 16, 8);   /* extreme aspect */
    check_grid(1601, 9, 3, 8, 9);   /* 8-bit RGB runs of 50 pixels: the vector loop's case */
    check_grid(700, 4, 1, 16, 10);  /* 16-bit grey, runs of 21 pixels */
    /* The vector loop divides the weighted sum t = 299r + 587g + 114b + 500 by 1000 as
     * floor(floor(t / 8) * 33555 / 2^22): equal for every t it can meet. */
    for (uint32_t t = 0; t <= 255500; t++)
        if (t / 1000 != ((t >> 3) * 33555) >> 22)
            fail_msg("the vector loop's division by 1000 is wrong at %u", t);
}

/* ---- DCT ---------------------------------------------------------------------------------------- */

static const char dct_py[] =
    "import sys, numpy as np\n"
    "g = np.array(list(map(int, open(sys.argv[1]).read().split())), np.int64).reshape(32, 32)\n"
    "fr, n = int(sys.argv[2]), int(sys.argv[3])\n"
    "b = g[fr:fr + n, fr:fr + n]\n"
    "b = (b - (int(b.sum()) + n * n // 2) // (n * n)).astype(np.float64)\n"
    "k = np.arange(8)[:, None]; x = np.arange(n)[None, :]\n"
    "C = np.cos(np.pi * (2 * x + 1) * k / (2 * n))\n"
    "c = C @ b @ C.T\n"
    "try:\n"
    "    from scipy.fft import dct\n"
    "    ref = dct(dct(b, type=2, axis=0), type=2, axis=1)[:8, :8] / 4\n"
    "    assert np.allclose(ref, c, rtol=0, atol=1e-6 * max(1.0, np.abs(c).max()))\n"
    "    print('scipy', end=' ')\n"
    "except ImportError:\n"
    "    print('numpy', end=' ')\n"
    "print(float(np.abs(b).sum()), ' '.join(repr(float(v)) for v in c.ravel()))\n";

static void check_dct(const int32_t g[32][32], unsigned from, unsigned n)
{
    int64_t c[8][8];
    kiln_nearfp_dct(g, from, n, c);
    char gp[256], py[256], cmd[1024];
    snprintf(gp, sizeof gp, "%s/grid.txt", scratch_dir());
    snprintf(py, sizeof py, "%s/dct.py", scratch_dir());
    FILE *f = fopen(gp, "w");
    assert_non_null(f);
    for (int i = 0; i < 32 * 32; i++)
        fprintf(f, "%d ", g[i / 32][i % 32]);
    assert_int_equal(fclose(f), 0);
    write_raw(py, dct_py, sizeof dct_py - 1);
    snprintf(cmd, sizeof cmd, "%s %s %s %u %u", KILN_PYTHON, py, gp, from, n);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    char which[16];
    double l1;
    assert_int_equal(fscanf(p, "%15s %lf", which, &l1), 2);
    /* Each Q14 cosine is within 1/2 of 2^14 cos, so each product of two is within about
     * 2^14 of 2^28 cos cos: the error of a coefficient is at most 2^14 times the block's L1 norm. */
    const double tol = 16384.0 * l1 * 1.01 + 1;
    for (int i = 0; i < 64; i++) {
        double want;
        assert_int_equal(fscanf(p, "%lf", &want), 1);
        double got = (double)c[i / 8][i % 8], ref = want * 268435456.0;
        if (got - ref > tol || ref - got > tol)
            fail_msg("n = %u: coefficient (%d, %d) is %.0f, numpy's DCT-II gives %.0f", n, i / 8,
                     i % 8, got, ref);
        /* signs agree wherever the reference is clear of the rounding bound */
        if ((ref > tol && got <= 0) || (ref < -tol && got >= 0))
            fail_msg("n = %u: coefficient (%d, %d) has the wrong sign", n, i / 8, i % 8);
    }
    assert_int_equal(pclose(p), 0);
    print_message("DCT checked against %s\n", which);
}

static void test_dct(void **state)
{
    (void)state;
    if (!have_python())
        skip();
    uint64_t s = 99;
    int32_t g[32][32];
    for (int t = 0; t < 3; t++) {
        for (int i = 0; i < 32 * 32; i++)
            g[i / 32][i % 32] = (int32_t)(splitmix64(&s) % (t == 2 ? 16 : (1u << 20)));
        check_dct(g, 0, 32);
        check_dct(g, 6, 20);
    }
}

/* ---- orientation ---------------------------------------------------------------------------- */

/* Displayed pixel (x, y) of stored pixels under Exif orientation o, from the CIPA DC-008 table
 * (from memory): 2 mirror, 3 rotate 180, 4 flip, 5 transpose, 6 rotate 90 clockwise,
 * 7 transverse, 8 rotate 90 counter-clockwise. */
static void rotate_by_table(const struct kiln_image *in, unsigned o, struct kiln_image *out)
{
    const uint32_t W = in->width, H = in->height, swap = o >= 5;
    struct kiln_err err;
    assert_int_equal(kiln_image_reshape(out, swap ? H : W, swap ? W : H, in->channels, in->depth, &err),
                     KILN_OK);
    const size_t px = in->channels * (in->depth / 8);
    for (uint32_t y = 0; y < out->height; y++)
        for (uint32_t x = 0; x < out->width; x++) {
            uint32_t sx, sy;
            switch (o) {
            case 2: sx = W - 1 - x; sy = y; break;
            case 3: sx = W - 1 - x; sy = H - 1 - y; break;
            case 4: sx = x; sy = H - 1 - y; break;
            case 5: sx = y; sy = x; break;
            case 6: sx = y; sy = H - 1 - x; break;
            case 7: sx = W - 1 - y; sy = H - 1 - x; break;
            case 8: sx = W - 1 - y; sy = x; break;
            default: sx = x; sy = y; break;
            }
            memcpy((uint8_t *)out->data + ((size_t)y * out->width + x) * px,
                   (const uint8_t *)in->data + ((size_t)sy * W + sx) * px, px);
        }
}

/* Turning or mirroring the picture permutes the grid exactly, so the fingerprint of the turned
 * picture is the turned fingerprint: hash and centre by sign changes and transposition of the
 * DCT (no coefficient of these textured pictures is exactly 0), thumbnail and colour regions
 * by the same permutation, info unchanged. */
static void test_orientation(void **state)
{
    (void)state;
    static const uint32_t shapes[][4] = {{37, 23, 3, 8}, {64, 48, 1, 16}, {101, 99, 4, 8}};
    for (size_t k = 0; k < sizeof shapes / sizeof *shapes; k++) {
        struct kiln_image img = {0}, rot = {0}, viakiln = {0};
        make_image(&img, shapes[k][0], shapes[k][1], shapes[k][2], shapes[k][3], 10 + k);
        struct kiln_nearfp f, fr;
        struct kiln_err err;
        assert_int_equal(kiln_nearfp_compute(&img, &f, &err), KILN_OK);
        for (unsigned o = 1; o <= 8; o++) {
            rotate_by_table(&img, o, &rot);
            assert_int_equal(kiln_orient(&img, o, &viakiln, &err), KILN_OK);
            assert_memory_equal(rot.data, viakiln.data, (size_t)rot.height * rot.stride);
            assert_int_equal(kiln_nearfp_compute(&rot, &fr, &err), KILN_OK);
            assert_true(fr.hash == kiln_nearfp_orient_hash(f.hash, o));
            assert_true(fr.centre == kiln_nearfp_orient_hash(f.centre, o));
            assert_int_equal(fr.info, f.info);
            uint8_t t[KILN_NEARFP_SIDE * KILN_NEARFP_SIDE];
            kiln_nearfp_orient_thumb(f.thumb, KILN_NEARFP_SIDE, o, t);
            assert_memory_equal(fr.thumb, t, sizeof t);
            if (f.chroma_scale) {
                uint8_t idx[16], map[16];
                for (int i = 0; i < 16; i++)
                    idx[i] = (uint8_t)i;
                kiln_nearfp_orient_thumb(idx, KILN_NEARFP_HUE, o, map);
                for (int i = 0; i < 16; i++)
                    assert_memory_equal(fr.chroma[i], f.chroma[map[i]], 2);
            }
            /* the turned copy passes the check in its orientation */
            struct kiln_nearmatch m;
            kiln_nearfp_verify(&fr, &f, o, 0, &m);
            assert_int_equal(m.linked, 1);
            assert_int_equal(m.global, 1 << 20);
        }
        kiln_image_free(&img);
        kiln_image_free(&rot);
        kiln_image_free(&viakiln);
    }
    /* the hash transformation itself: transposition twice and each flip twice are identities,
     * and 6 and 8 are inverse */
    uint64_t s = 5;
    for (int i = 0; i < 1000; i++) {
        uint64_t h = splitmix64(&s) & ~UINT64_C(1) & ~(UINT64_C(1) << 63);
        assert_true(kiln_nearfp_orient_hash(h, 1) == h);
        for (unsigned o = 2; o <= 5; o++)
            assert_true(kiln_nearfp_orient_hash(kiln_nearfp_orient_hash(h, o), o) == h);
        assert_true(kiln_nearfp_orient_hash(kiln_nearfp_orient_hash(h, 6), 8) == h);
    }
}

/* ---- correlation ---------------------------------------------------------------------------- */

static void test_correlation(void **state)
{
    (void)state;
    if (!have_python())
        skip();
    uint64_t s = 3;
    char path[256], cmd[512];
    snprintf(path, sizeof path, "%s/corr.txt", scratch_dir());
    for (int t = 0; t < 20; t++) {
        int32_t a[256], b[256];
        uint8_t m[256];
        FILE *f = fopen(path, "w");
        assert_non_null(f);
        for (int i = 0; i < 256; i++) {
            a[i] = (int32_t)(splitmix64(&s) % 4081);
            /* from unrelated to almost equal, and once exactly anti-correlated */
            b[i] = t == 19 ? 4080 - a[i] : a[i] * t / 4 + (int32_t)(splitmix64(&s) % 4081) - 2040;
            m[i] = t % 3 ? (uint8_t)(splitmix64(&s) % 4 != 0) : 1;
            fprintf(f, "%d %d %d\n", a[i], b[i], m[i]);
        }
        assert_int_equal(fclose(f), 0);
        snprintf(cmd, sizeof cmd,
                 "%s -c \"import numpy as np,sys\nd=np.loadtxt(sys.argv[1])\nk=d[:,2]>0\n"
                 "print(repr(float(np.corrcoef(d[k,0],d[k,1])[0,1])))\" %s",
                 KILN_PYTHON, path);
        FILE *p = popen(cmd, "r");
        assert_non_null(p);
        double want;
        assert_int_equal(fscanf(p, "%lf", &want), 1);
        assert_int_equal(pclose(p), 0);
        double got = kiln_nearfp_correlation(a, b, m) / 1048576.0;
        /* truncation and two integer square roots: within a few parts in 10^6 */
        if (got - want > 1e-5 || want - got > 1e-5)
            fail_msg("correlation %.7f, numpy.corrcoef %.7f", got, want);
    }
    int32_t c[256], d[256];
    for (int i = 0; i < 256; i++)
        c[i] = d[i] = 7;
    assert_int_equal(kiln_nearfp_correlation(c, d, NULL), 0); /* constant: no correlation */
}

/* ---- the check on a real photograph ---------------------------------------------------------- */

/* camera.png (scikit-image data, CC0) as raw 8-bit grey, w h on the first line of a file. */
static int load_camera(struct kiln_image *img)
{
    char path[256], cmd[512];
    snprintf(path, sizeof path, "%s/camera.raw", scratch_dir());
    snprintf(cmd, sizeof cmd,
             "%s -c \"import numpy as np,sys\nfrom PIL import Image\n"
             "a=np.asarray(Image.open('/usr/lib/python3/dist-packages/skimage/data/camera.png')"
             ".convert('L'))\nopen(sys.argv[1],'wb').write(a.tobytes())\nprint(a.shape[1],a.shape[0])\""
             " %s 2>/dev/null",
             KILN_PYTHON, path);
    FILE *p = popen(cmd, "r");
    if (!p)
        return 0;
    unsigned w = 0, h = 0;
    int ok = fscanf(p, "%u %u", &w, &h) == 2;
    if (pclose(p) != 0 || !ok)
        return 0;
    struct kiln_err err;
    assert_int_equal(kiln_image_reshape(img, w, h, 1, 8, &err), KILN_OK);
    FILE *f = fopen(path, "rb");
    assert_non_null(f);
    assert_int_equal(fread(img->data, 1, (size_t)w * h, f), (size_t)w * h);
    fclose(f);
    return 1;
}

static void crop_to(const struct kiln_image *in, uint32_t x0, uint32_t y0, uint32_t w, uint32_t h,
                    struct kiln_image *out)
{
    struct kiln_err err;
    assert_int_equal(kiln_image_reshape(out, w, h, 1, 8, &err), KILN_OK);
    for (uint32_t y = 0; y < h; y++)
        memcpy((uint8_t *)out->data + (size_t)y * w,
               (const uint8_t *)in->data + (size_t)(y0 + y) * in->width + x0, w);
}

static void fingerprint(const struct kiln_image *img, struct kiln_nearfp *fp)
{
    struct kiln_err err;
    assert_int_equal(kiln_nearfp_compute(img, fp, &err), KILN_OK);
}

static void test_real_picture(void **state)
{
    (void)state;
    struct kiln_image cam = {0}, a = {0}, b = {0};
    if (!have_python() || !load_camera(&cam)) {
        print_message("skipped: scikit-image's camera.png is not installed (python3-skimage)\n");
        skip();
    }
    /* a 200x160 region, a copy of it brighter with noise, an 8 % crop of it, the same with a
     * white box burnt into a corner, and its neighbour region */
    struct kiln_nearfp fa, fb;
    struct kiln_nearmatch m;
    crop_to(&cam, 150, 100, 200, 160, &a);
    fingerprint(&a, &fa);
    assert_false(fa.flags & KILN_NEARFP_LOWINFO);
    uint64_t s = 17;
    crop_to(&cam, 150, 100, 200, 160, &b);
    for (size_t i = 0; i < 200 * 160; i++) {
        int v = ((uint8_t *)b.data)[i] * 9 / 8 + (int)(splitmix64(&s) % 9) - 4;
        ((uint8_t *)b.data)[i] = (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : v);
    }
    fingerprint(&b, &fb);
    assert_true(__builtin_popcountll(fa.hash ^ fb.hash) <= 6);
    kiln_nearfp_verify(&fa, &fb, 1, 0, &m);
    assert_int_equal(m.linked, 1);
    crop_to(&cam, 158, 100, 184, 160, &b); /* 8 % off the width */
    fingerprint(&b, &fb);
    kiln_nearfp_verify(&fa, &fb, 1, 0, &m);
    assert_int_equal(m.linked, 1);
    crop_to(&cam, 150, 100, 200, 160, &b);
    for (uint32_t y = 130; y < 160; y++)
        memset((uint8_t *)b.data + (size_t)y * 200 + 120, 255, 80);
    fingerprint(&b, &fb);
    kiln_nearfp_verify(&fa, &fb, 1, 0, &m);
    assert_int_equal(m.linked, 1);
    assert_true(m.global_trim > m.global);
    crop_to(&cam, 350, 100, 200, 160, &b); /* the region to the right: a different picture */
    fingerprint(&b, &fb);
    for (unsigned o = 1; o <= 8; o++) {
        kiln_nearfp_verify(&fa, &fb, o, 0, &m);
        assert_int_equal(m.linked, 0);
    }
    kiln_image_free(&cam);
    kiln_image_free(&a);
    kiln_image_free(&b);
}

/* ---- low information --------------------------------------------------------------------------- */

static void test_low_information(void **state)
{
    (void)state;
    struct kiln_image img = {0};
    struct kiln_nearfp f, g;
    struct kiln_err err;
    /* blank, a gradient of 3 levels, a vignette of 5 levels: low information */
    for (int kind = 0; kind < 3; kind++) {
        assert_int_equal(kiln_image_reshape(&img, 90, 70, 1, 8, &err), KILN_OK);
        for (uint32_t y = 0; y < 70; y++)
            for (uint32_t x = 0; x < 90; x++) {
                int v = 120;
                if (kind == 1)
                    v += (int)(x * 3 / 90);
                if (kind == 2)
                    v -= (int)(((x - 45) * (x - 45) + (y - 35) * (y - 35)) * 5 / (45 * 45 + 35 * 35));
                ((uint8_t *)img.data)[y * 90 + x] = (uint8_t)v;
            }
        fingerprint(&img, &f);
        assert_true(f.flags & KILN_NEARFP_LOWINFO);
    }
    /* a picture smaller than 16 pixels a side, however textured */
    make_image(&img, 15, 40, 1, 8, 1);
    fingerprint(&img, &f);
    assert_true(f.flags & KILN_NEARFP_SMALL);
    assert_true(f.flags & KILN_NEARFP_LOWINFO);
    struct kiln_nearmatch m;
    kiln_nearfp_verify(&f, &f, 1, 0, &m);
    assert_int_equal(m.linked, 0); /* never by these hashes, even against itself */
    /* textured: informative; the same grey picture in 16 bits (x 257, exact for one channel,
     * whereas the luma of RGB rounds differently at the two depths) has the same grid, hash
     * and thumbnail */
    make_image(&img, 60, 50, 1, 8, 2);
    fingerprint(&img, &f);
    assert_false(f.flags & KILN_NEARFP_LOWINFO);
    struct kiln_image deep = {0};
    assert_int_equal(kiln_convert_depth(&img, 16, &deep, &err), KILN_OK);
    fingerprint(&deep, &g);
    assert_true(f.hash == g.hash && f.centre == g.centre);
    assert_memory_equal(f.thumb, g.thumb, sizeof f.thumb);
    /* info counts the image's own least significant bits (and saturates at 65535) */
    assert_true(g.info == 65535 || g.info / 257 == f.info);
    kiln_image_free(&img);
    kiln_image_free(&deep);
}

static void test_errors(void **state)
{
    (void)state;
    struct kiln_nearfp f;
    struct kiln_err err;
    struct kiln_image empty = {0};
    assert_int_equal(kiln_nearfp_compute(&empty, &f, &err), KILN_EINVAL);
    uint8_t px[4] = {0};
    struct kiln_image bad = {2, 2, 5, 8, 10, px, 4};
    assert_int_equal(kiln_nearfp_compute(&bad, &f, &err), KILN_EINVAL);
    struct kiln_image huge = {1u << 21, 1u << 20, 1, 8, 1u << 21, px, 4}; /* 2^41 pixels */
    assert_int_equal(kiln_nearfp_compute(&huge, &f, &err), KILN_ETOOLARGE);
    assert_non_null(strstr(err.msg, "too large"));
    unsigned sx, ox, sy, oy, mb;
    assert_int_equal(kiln_nearfp_warp(97, &sx, &ox, &sy, &oy, &mb), 0);
    assert_int_equal(kiln_nearfp_warp(0, &sx, &ox, &sy, &oy, &mb), 1);
    assert_true(sx == 40 && ox == 0 && sy == 40 && oy == 0 && mb == 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_grid),          cmocka_unit_test(test_grid_vector_extremes),          cmocka_unit_test(test_dct),
        cmocka_unit_test(test_orientation),   cmocka_unit_test(test_correlation),
        cmocka_unit_test(test_real_picture),  cmocka_unit_test(test_low_information),
        cmocka_unit_test(test_errors),
    };
    int rc = cmocka_run_group_tests(tests, NULL, NULL);
    char cmd[256];
    snprintf(cmd, sizeof cmd, "rm -rf %s", scratch_dir());
    if (system(cmd) != 0 && rc == 0)
        rc = 1;
    return rc;
}
