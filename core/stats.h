/* Per-channel statistics in exact integer arithmetic: count, sum, sum of squares, min, max.
 * Accumulators merge exactly, so the result never depends on order or thread count; mean and
 * variance are derived once from the exact totals (docs/statistics.md). */
#ifndef KILN_STATS_H
#define KILN_STATS_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

struct kiln_stats_channel {
    uint64_t count;
    uint64_t sum;
    unsigned __int128 sumsq;
    uint32_t min, max;
};

struct kiln_stats {
    uint32_t channels;
    struct kiln_stats_channel ch[4];
};

void kiln_stats_init(struct kiln_stats *s, uint32_t channels);

/* Adds npixels interleaved pixels of s->channels samples each. Returns KILN_ENOMEM (with err
 * set) if a total would overflow its exact integer (never for data sets of realistic size). */
int kiln_stats_add_u8(struct kiln_stats *s, const uint8_t *px, size_t npixels, struct kiln_err *err);
int kiln_stats_add_u16(struct kiln_stats *s, const uint16_t *px, size_t npixels,
                       struct kiln_err *err);
/* Adds arbitrary non-negative integer values (one channel stream, used for the reference
 * checks with published data sets). */
int kiln_stats_add_values(struct kiln_stats *s, unsigned channel, const uint64_t *v, size_t n,
                          struct kiln_err *err);

/* dst += src, exactly. */
int kiln_stats_merge(struct kiln_stats *dst, const struct kiln_stats *src, struct kiln_err *err);

struct kiln_stats_summary {
    uint64_t count;
    double mean, var_pop, std_pop, var_sample, std_sample;
    uint32_t min, max;
};

/* Derives mean and variances of one channel. The variance numerator n*sumsq - sum^2 is exact in
 * 128-bit integers; the only rounding is the final conversion and division in double. Values
 * are divided by scale (1 for output units, 255 or 65535 for [0,1]). count 0 gives zeros;
 * count 1 gives a sample variance of 0. */
int kiln_stats_summarize(const struct kiln_stats_channel *c, double scale,
                         struct kiln_stats_summary *out, struct kiln_err *err);

#endif
