/* Synthetic pictures for the near-duplicate benchmarks (nearmatch_bench.c --scale,
 * nearstage_bench.c): a smooth random field with two gratings and noise, from a seed alone,
 * integer arithmetic only, so every run makes the same pictures. */
#ifndef KILN_BENCH_SYNTH_H
#define KILN_BENCH_SYNTH_H

#include <stdint.h>

static inline uint64_t splitmix64(uint64_t *s)
{
    uint64_t z = (*s += UINT64_C(0x9e3779b97f4a7c15));
    z = (z ^ (z >> 30)) * UINT64_C(0xbf58476d1ce4e5b9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94d049bb133111eb);
    return z ^ (z >> 31);
}

#define SYN 48

/* A smooth random field (bilinear 7x7 lattice), two gratings and noise, from seed alone. */
static inline void synth(uint64_t seed, uint8_t *px)
{
    uint64_t s = seed;
    int lat[7][7];
    for (int y = 0; y < 7; y++)
        for (int x = 0; x < 7; x++)
            lat[y][x] = (int)(splitmix64(&s) % 200);
    int fx1 = (int)(splitmix64(&s) % 9) + 1, fy1 = (int)(splitmix64(&s) % 9), a1 = (int)(splitmix64(&s) % 40);
    int fx2 = (int)(splitmix64(&s) % 5), fy2 = (int)(splitmix64(&s) % 9) + 1, a2 = (int)(splitmix64(&s) % 40);
    for (int y = 0; y < SYN; y++)
        for (int x = 0; x < SYN; x++) {
            int gx = x * 6 * 256 / (SYN - 1), gy = y * 6 * 256 / (SYN - 1);
            int ix = gx >> 8, iy = gy >> 8, fxr = gx & 255, fyr = gy & 255;
            if (ix > 5) { ix = 5; fxr = 256; }
            if (iy > 5) { iy = 5; fyr = 256; }
            int top = lat[iy][ix] * (256 - fxr) + lat[iy][ix + 1] * fxr;
            int bot = lat[iy + 1][ix] * (256 - fxr) + lat[iy + 1][ix + 1] * fxr;
            int v = (top * (256 - fyr) + bot * fyr) >> 16;
            /* triangle-wave gratings: integer, no libm */
            int p1 = ((x * fx1 + y * fy1) * 16) & 511, p2 = ((x * fx2 + y * fy2) * 16) & 511;
            v += a1 * (p1 < 256 ? p1 : 511 - p1) / 256 + a2 * (p2 < 256 ? p2 : 511 - p2) / 256;
            v += (int)(splitmix64(&s) % 7) - 3;
            px[y * SYN + x] = (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : v);
        }
}

/* Picture i of the scale population (state s starts at 4242 for i = 0 and is carried from
 * picture to picture): every hundredth from 100 on is a copy of an earlier picture, brighter
 * and with a little noise (returns 1 then), the others their own. cp is scratch space. */
static inline int synth_scale_picture(uint64_t i, uint64_t *s, uint8_t *px, uint8_t *cp)
{
    (void)splitmix64(s);
    if (i >= 100 && i % 100 == 0) {
        uint64_t src = splitmix64(s) % i;
        synth(src * 7919 + 17, cp);
        for (int k = 0; k < SYN * SYN; k++) {
            int v = cp[k] * 11 / 10 + (int)(splitmix64(s) % 5) - 2;
            px[k] = (uint8_t)(v < 0 ? 0 : v > 255 ? 255 : v);
        }
        return 1;
    }
    synth(i * 7919 + 17, px);
    return 0;
}

#endif
