/* Near-duplicate fingerprint of one picture and the pixel check of one candidate pair
 * (docs/near-duplicates.md is the specification; every step below is integer arithmetic, so a
 * fingerprint and a verdict are the same bytes on every machine, compiler and thread count).
 *
 * Fingerprint, from the decoded and oriented image (any size, 1-4 channels, 8 or 16 bits):
 *  - luma at 16-bit scale (BT.601, alpha over white, 8-bit samples times 257), averaged over a
 *    32x32 grid of equal cells with exact area weights (pixels cut by a cell border count in
 *    proportion), in 1/16 units;
 *  - hash: signs of the 63 lowest-frequency DCT-II coefficients (8x8 minus DC) of that grid, the
 *    DCT hash of Zauner (2010) taken at full sample depth; centre: the same of the central
 *    20x20 cells, which a label or scale bar in a border cannot reach;
 *  - thumb: 16x16 cell means normalised by median and interquartile range, 8 bits, for the
 *    pixel check;
 *  - chroma: for colour pictures, the colour of 4x4 regions as (R - Y, B - Y) of their mean
 *    R, G, B, for a hue check when both pictures of a pair are in colour;
 *  - info: how much structure the hash sees, the RMS of the grid's DCT band u, v < 8, u + v >= 3
 *    in sixteenths of the image's least significant bit. Pictures with info below 8 (half an
 *    LSB: blank, near-flat, a gradient or vignette), or smaller than 16 pixels on a side, are
 *    low-information: they are merged only by exact digests, never by these hashes.
 * Rotating or mirroring a picture by one of the 8 Exif orientations permutes the grid exactly,
 * so its DCT coefficients change only by sign and transposition; kiln_nearfp_orient_hash gives
 * the hash of the oriented picture without recomputing it. */
#ifndef KILN_NEARFP_H
#define KILN_NEARFP_H

#include <stdint.h>

#include "err.h"
#include "image.h"

#define KILN_NEARFP_GRID 32   /* cells per side of the averaging grid */
#define KILN_NEARFP_SIDE 16   /* thumbnail side */
#define KILN_NEARFP_HASH_BITS 63
#define KILN_NEARFP_CENTRE_BITS 63
#define KILN_NEARFP_MIN_SIDE 16 /* smaller pictures are low-information */
#define KILN_NEARFP_MIN_INFO 8  /* sixteenths of an LSB */

enum kiln_nearfp_flag {
    KILN_NEARFP_LOWINFO = 1, /* merge by exact digests only */
    KILN_NEARFP_SMALL = 2    /* (also LOWINFO) fewer than KILN_NEARFP_MIN_SIDE pixels a side */
};

#define KILN_NEARFP_HUE 4 /* colour cells per side */

struct kiln_nearfp {
    uint64_t hash;   /* 63 bits, most significant first: coefficient (v, u) at bit 64 - (8v + u) */
    uint64_t centre; /* the same layout for the central 20x20 cells */
    uint32_t chroma_scale; /* colour: largest |R - Y| or |B - Y| of a cell, grid units; 0 = grey */
    uint16_t info;   /* saturates at 65535 */
    uint8_t flags;
    int8_t chroma[KILN_NEARFP_HUE * KILN_NEARFP_HUE][2]; /* (R - Y, B - Y) * 127 / scale */
    uint8_t thumb[KILN_NEARFP_SIDE * KILN_NEARFP_SIDE]; /* row-major, top row first */
};

/* The fingerprint as bytes, the form catalog.csv (base64) and the scratch store keep
 * (docs/formats.md, "near_fingerprint"): version 1, flags, info (2 bytes), hash and centre
 * (8 bytes each), chroma scale (4 bytes), chroma (32 signed bytes), thumbnail (256 bytes);
 * integers big-endian. */
#define KILN_NEARFP_BYTES 312
#define KILN_NEARFP_VERSION 1
void kiln_nearfp_encode(const struct kiln_nearfp *fp, uint8_t out[KILN_NEARFP_BYTES]);
/* Reads the bytes back; -1 (fp undefined) when they cannot come from kiln_nearfp_encode of a
 * computed fingerprint: another version, unknown flags, a low-information picture without its
 * flag, bit 0 of a hash set, chroma outside -127..127 or without a scale. */
int kiln_nearfp_decode(const uint8_t in[KILN_NEARFP_BYTES], struct kiln_nearfp *fp);

/* Computes the fingerprint of img (as displayed: orientation already applied). img must be a
 * valid kiln_image (1-4 channels, depth 8 or 16). Errors: KILN_EINVAL for a bad shape or an
 * empty image; KILN_ETOOLARGE when width * height exceeds 2^40 (the exact sums would not fit). */
int kiln_nearfp_compute(const struct kiln_image *img, struct kiln_nearfp *fp,
                        struct kiln_err *err);

/* The hash (or centre hash: both use the 8x8 layout) the picture would have after Exif
 * orientation o (1-8; CIPA DC-008): transposition for 5-8, then sign changes of the odd
 * horizontal (2, 3, 6, 7) and odd vertical (3, 4, 7, 8) frequencies. A coefficient that is
 * exactly 0 has bit 0 and its changed sign reads 1, so the result can differ from the
 * recomputed hash in such bits only. */
uint64_t kiln_nearfp_orient_hash(uint64_t hash, unsigned o);

/* thumb (side x side, row-major) as displayed under Exif orientation o, into out (the same
 * side, a square is unchanged in shape). Exposed for the tests. */
void kiln_nearfp_orient_thumb(const uint8_t *thumb, unsigned side, unsigned o, uint8_t *out);

/* Outcome of the pixel check of a pair (a, b) in relative orientation o: does a match b as
 * displayed under o? Similarities are Pearson correlations in Q20 fixed point (1 << 20 = 1). */
struct kiln_nearmatch {
    int32_t global;       /* cell means, at the chosen alignment */
    int32_t global_trim;  /* the same without the 31 cells that disagree most */
    int32_t local;        /* locally normalised detail (3x3 neighbourhoods) */
    int32_t local_trim;   /* the same without those cells and their neighbours */
    int32_t hue;          /* lower quartile of the cosines between the two pictures' colours
                           * in regions where both are coloured, Q20; 2^20 when not checked */
    uint8_t trim_ok;      /* the trimmed cells left a quarter of either picture's variation */
    uint8_t trimmed;      /* the trimmed correlations decided (else the plain ones) */
    uint8_t warp;         /* the alignment chosen: 0 = none; 1..96 see kiln_nearfp_warp */
    uint8_t orientation;  /* o */
    uint8_t linked;       /* the pair passes */
};

/* The correlations that decided (the evidence the unit rule ranks links by). */
static inline int32_t kiln_nearmatch_global(const struct kiln_nearmatch *m)
{
    return m->trimmed ? m->global_trim : m->global;
}
static inline int32_t kiln_nearmatch_local(const struct kiln_nearmatch *m)
{
    return m->trimmed ? m->local_trim : m->local;
}

/* Thresholds of the pixel check, in thousandths. */
#define KILN_NEARFP_MIN_GLOBAL 930       /* global(_trim) */
#define KILN_NEARFP_MIN_LOCAL 700        /* local(_trim), orientation 1 */
#define KILN_NEARFP_MIN_LOCAL_ALIGNED 750 /* the same after a crop alignment */
#define KILN_NEARFP_MIN_LOCAL_TURNED 950 /* local, orientations 2-8 */
#define KILN_NEARFP_MIN_HUE 950          /* hue (cosine, about 18 degrees) */
#define KILN_NEARFP_MIN_SEARCH 500       /* global, as they are, before crops are tried */

/* The pixel check (docs/near-duplicates.md, "Pixel check"): hue first (pairs of colour
 * pictures); then, when gate is not 0, the global correlation of the pictures as they are must
 * reach gate thousandths or the pair fails at once (nearlink.c asks this of candidates that only
 * the coarse searches found: a crop or slight turn leaves the pictures broadly aligned); then
 * the pictures as they are; if that fails but their global correlation is at least
 * KILN_NEARFP_MIN_SEARCH, one crop alignment per way round (each axis scaled by 1, 0.95 or 0.9
 * at one of three offsets, chosen on column and row sums) and the better of the two is checked
 * instead. A pair of which either picture is low-information never passes. Pure function of
 * its arguments. */
void kiln_nearfp_verify(const struct kiln_nearfp *a, const struct kiln_nearfp *b, unsigned o,
                        unsigned gate, struct kiln_nearmatch *out);

/* Alignment w (0..96): the per-axis (scale, offset) choices and the picture it applies to.
 * Scales and offsets are in fortieths of the picture: scale 40, 38 or 36; offset 0..4. For
 * reports and the tests. Returns 0 for w > 96. */
int kiln_nearfp_warp(unsigned w, unsigned *sx, unsigned *ox, unsigned *sy, unsigned *oy,
                     unsigned *moves_b);

/* Steps exposed for the tests. The grid of the fingerprint (cell means of the luma, 16-bit
 * scale, 1/16 units), with kiln_nearfp_compute's errors. */
int kiln_nearfp_grid(const struct kiln_image *img, int32_t grid[KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                     struct kiln_err *err);
/* The same with the vector loop allowed (where the processor has it) or not, both of which
 * must give the same grids, and the colour grids (cell means of r, g, b over white; zeros for
 * grey) into colour unless NULL. */
int kiln_nearfp_grid_path(const struct kiln_image *img, int vector,
                          int32_t grid[KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                          int64_t colour[3][KILN_NEARFP_GRID][KILN_NEARFP_GRID],
                          struct kiln_err *err);
/* c[v][u] (u, v < 8): 2^28 times the unnormalised DCT-II, sum over the n x n block at
 * (from, from) of (g - block mean) cos(pi (2x+1) u / 2n) cos(pi (2y+1) v / 2n), with the cosines
 * rounded to 14 fractional bits; n is 32 (from 0) or 20 (from 6). */
void kiln_nearfp_dct(const int32_t grid[KILN_NEARFP_GRID][KILN_NEARFP_GRID], unsigned from,
                     unsigned n, int64_t c[8][8]);
/* The Pearson correlation of the check over 256 cells (mask NULL: all), Q20; values below 2^16
 * in magnitude. */
int32_t kiln_nearfp_correlation(const int32_t *a, const int32_t *b, const uint8_t *mask);

#endif
