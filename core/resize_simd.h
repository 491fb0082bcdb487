/* AVX2 kernels for the resampler's two hottest horizontal passes (8-bit RGB, 16-bit grey), with
 * runtime dispatch. Each gives the scalar pass's bytes exactly; tests/unit/test_resize.c checks. */
#ifndef KILN_RESIZE_SIMD_H
#define KILN_RESIZE_SIMD_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "resize.h"

/* Rounds a fixed-point sum to a sample: + 1/2, clamp below at 0, shift, clamp above at maxv.
 * Shared so the scalar and vector paths cannot round differently. */
static inline int64_t kiln_resize_round(int64_t acc, int64_t maxv)
{
    acc += (int64_t)1 << (KILN_RESIZE_BITS - 1);
    if (acc < 0)
        return 0;
    acc >>= KILN_RESIZE_BITS;
    return acc > maxv ? maxv : acc;
}

/* True when this processor runs the AVX2 kernels. */
bool kiln_resize_simd_available(void);

/* Builds the table for ax; false when it cannot be allocated (the scalar pass is used then). */
bool kiln_resize_wide_init(struct kiln_resize_wide *wd, const struct kiln_resize_axis *ax);
void kiln_resize_wide_free(struct kiln_resize_wide *wd);

/* One row of the horizontal pass, 8-bit 3 channels, for an axis whose partial sums fit 32 bits
 * (fits_i32 in resize.c). src has ax->in_size pixels. */
void kiln_hrow_u8c3_avx2(const struct kiln_resize_axis *ax, const struct kiln_resize_wide *wd,
                         const uint8_t *src, uint8_t *dst);

/* One row of the horizontal pass, 16-bit 1 channel (64-bit products). */
void kiln_hrow_u16c1_avx2(const struct kiln_resize_axis *ax, const uint16_t *src, uint16_t *dst);

#endif
