/* Exact integer statistics accumulators. */
#include "stats.h"

#include <math.h>
#include <string.h>

void kiln_stats_init(struct kiln_stats *s, uint32_t channels)
{
    memset(s, 0, sizeof *s);
    s->channels = channels;
    for (unsigned c = 0; c < 4; c++)
        s->ch[c].min = UINT32_MAX;
}

static int add_block(struct kiln_stats_channel *c, uint64_t n, uint64_t sum, uint64_t sumsq,
                     uint32_t mn, uint32_t mx, struct kiln_err *err)
{
    if (__builtin_add_overflow(c->count, n, &c->count) ||
        __builtin_add_overflow(c->sum, sum, &c->sum))
        return kiln_err_set(err, KILN_ENOMEM, "statistics total overflows 64 bits");
    c->sumsq += sumsq; /* 2^64 additions of < 2^64 cannot overflow 128 bits in practice */
    if (n) {
        if (mn < c->min)
            c->min = mn;
        if (mx > c->max)
            c->max = mx;
    }
    return KILN_OK;
}

/* Per call, sums of squares stay in 64 bits: a block of at most 2^28 pixels of 16-bit values
 * sums to below 2^60. Larger calls are cut into such blocks. */
#define BLOCK_PIXELS ((size_t)1 << 28)

#define ADD_LOOP(T)                                                                                \
    do {                                                                                           \
        const unsigned C = s->channels;                                                            \
        while (npixels) {                                                                          \
            size_t n = npixels < BLOCK_PIXELS ? npixels : BLOCK_PIXELS;                            \
            for (unsigned c = 0; c < C; c++) {                                                     \
                uint64_t sum = 0, sq = 0;                                                          \
                uint32_t mn = UINT32_MAX, mx = 0;                                                  \
                const T *p = px + c;                                                               \
                for (size_t i = 0; i < n; i++, p += C) {                                           \
                    uint32_t v = *p;                                                               \
                    sum += v;                                                                      \
                    sq += (uint64_t)v * v;                                                         \
                    if (v < mn)                                                                    \
                        mn = v;                                                                    \
                    if (v > mx)                                                                    \
                        mx = v;                                                                    \
                }                                                                                  \
                int rc = add_block(&s->ch[c], n, sum, sq, mn, mx, err);                            \
                if (rc)                                                                            \
                    return rc;                                                                     \
            }                                                                                      \
            px += n * C;                                                                           \
            npixels -= n;                                                                          \
        }                                                                                          \
    } while (0)

int kiln_stats_add_u8(struct kiln_stats *s, const uint8_t *px, size_t npixels, struct kiln_err *err)
{
    ADD_LOOP(uint8_t);
    return KILN_OK;
}

int kiln_stats_add_u16(struct kiln_stats *s, const uint16_t *px, size_t npixels,
                       struct kiln_err *err)
{
    ADD_LOOP(uint16_t);
    return KILN_OK;
}

int kiln_stats_add_values(struct kiln_stats *s, unsigned channel, const uint64_t *v, size_t n,
                          struct kiln_err *err)
{
    if (channel >= 4)
        return kiln_err_set(err, KILN_EINVAL, "channel %u out of range", channel);
    struct kiln_stats_channel *c = &s->ch[channel];
    for (size_t i = 0; i < n; i++) {
        unsigned __int128 sq = (unsigned __int128)v[i] * v[i];
        if (__builtin_add_overflow(c->count, 1, &c->count) ||
            __builtin_add_overflow(c->sum, v[i], &c->sum))
            return kiln_err_set(err, KILN_ENOMEM, "statistics total overflows 64 bits");
        c->sumsq += sq;
        uint32_t v32 = v[i] > UINT32_MAX ? UINT32_MAX : (uint32_t)v[i];
        if (v32 < c->min)
            c->min = v32;
        if (v32 > c->max)
            c->max = v32;
    }
    return KILN_OK;
}

int kiln_stats_merge(struct kiln_stats *dst, const struct kiln_stats *src, struct kiln_err *err)
{
    if (dst->channels != src->channels)
        return kiln_err_set(err, KILN_EINTERNAL, "merging statistics of %u and %u channels",
                            dst->channels, src->channels);
    for (unsigned c = 0; c < 4; c++) {
        const struct kiln_stats_channel *s = &src->ch[c];
        struct kiln_stats_channel *d = &dst->ch[c];
        if (__builtin_add_overflow(d->count, s->count, &d->count) ||
            __builtin_add_overflow(d->sum, s->sum, &d->sum))
            return kiln_err_set(err, KILN_ENOMEM, "statistics total overflows 64 bits");
        d->sumsq += s->sumsq;
        if (s->min < d->min)
            d->min = s->min;
        if (s->max > d->max)
            d->max = s->max;
    }
    return KILN_OK;
}

int kiln_stats_summarize(const struct kiln_stats_channel *c, double scale,
                         struct kiln_stats_summary *out, struct kiln_err *err)
{
    memset(out, 0, sizeof *out);
    out->count = c->count;
    if (c->count == 0)
        return KILN_OK;
    out->min = c->min;
    out->max = c->max;
    typedef unsigned __int128 u128;
    u128 nsq, sum2, num;
    if (__builtin_mul_overflow((u128)c->count, c->sumsq, &nsq) ||
        __builtin_mul_overflow((u128)c->sum, (u128)c->sum, &sum2))
        return kiln_err_set(err, KILN_ENOMEM, "variance numerator overflows 128 bits");
    num = nsq - sum2; /* exact and >= 0 by the Cauchy-Schwarz inequality */
    const double n = (double)c->count;
    out->mean = (double)c->sum / n / scale;
    out->var_pop = (double)num / (n * n) / (scale * scale);
    out->std_pop = sqrt(out->var_pop);
    if (c->count > 1) {
        out->var_sample = (double)num / (n * (n - 1.0)) / (scale * scale);
        out->std_sample = sqrt(out->var_sample);
    }
    return KILN_OK;
}
