/* AVX2 horizontal passes. Integer sums are exact, so any order of additions gives the scalar
 * pass's result; the 8-bit kernel works modulo 2^32, exact because the true sum fits 32 bits. */
#include "resize_simd.h"

#include <stdlib.h>
#include <string.h>

#include "checked.h"

#if defined(__x86_64__) || defined(__i386__)
#include <immintrin.h>
#define KILN_HAVE_X86 1
#else
#define KILN_HAVE_X86 0
#endif

bool kiln_resize_simd_available(void)
{
#if KILN_HAVE_X86
    return __builtin_cpu_supports("avx2");
#else
    return false;
#endif
}

void kiln_resize_wide_free(struct kiln_resize_wide *wd)
{
    free(wd->w);
    wd->w = NULL;
    wd->groups = 0;
}

bool kiln_resize_wide_init(struct kiln_resize_wide *wd, const struct kiln_resize_axis *ax)
{
    wd->w = NULL;
    wd->groups = ax->ksize / 4;
    if (wd->groups == 0)
        return false;
    /* int16 per output: groups x (lo, hi) vectors of 16 */
    size_t per_out, bytes;
    if (!kiln_mul_size(wd->groups, 32, &per_out) ||
        !kiln_mul_size(per_out, sizeof *wd->w, &bytes))
        return false;
    wd->w = kiln_alloc_array(ax->out_size, bytes);
    if (!wd->w)
        return false;
    for (uint32_t i = 0; i < ax->out_size; i++) {
        const int32_t *k = ax->coef + (size_t)i * ax->ksize;
        for (uint32_t g = 0; g < wd->groups; g++) {
            int16_t *lo = wd->w + (size_t)i * per_out + (size_t)g * 32, *hi = lo + 16;
            memset(lo, 0, 32 * sizeof *lo);
            /* Lane h (taps 4g + 2h, 4g + 2h + 1) holds the pair once per channel, matching
             * the byte shuffle in kiln_hrow_u8c3_avx2; the seventh and eighth words stay 0. */
            for (unsigned h = 0; h < 2; h++)
                for (unsigned p = 0; p < 2; p++) {
                    uint32_t t = 4 * g + 2 * h + p;
                    int32_t w = t < ax->count[i] ? k[t] : 0;
                    int32_t l = w & 0x7fff, u = (w - l) / 32768;
                    for (unsigned c = 0; c < 3; c++) {
                        lo[8 * h + 2 * c + p] = (int16_t)l;
                        hi[8 * h + 2 * c + p] = (int16_t)u;
                    }
                }
        }
    }
    return true;
}

#if KILN_HAVE_X86

__attribute__((target("avx2"))) void kiln_hrow_u8c3_avx2(const struct kiln_resize_axis *ax,
                                                         const struct kiln_resize_wide *wd,
                                                         const uint8_t *src, uint8_t *dst)
{
    const size_t row_bytes = (size_t)ax->in_size * 3;
    const size_t per_out = (size_t)wd->groups * 32;
    /* Each 128-bit lane widens two taps to words, channel by channel: [t c0, t' c0, t c1,
     * t' c1, t c2, t' c2, 0, 0]; the low lane takes taps 0-1 of the group, the high 2-3. */
    const __m256i shuf = _mm256_setr_epi8(0, -1, 3, -1, 1, -1, 4, -1, 2, -1, 5, -1, -1, -1, -1,
                                          -1, 6, -1, 9, -1, 7, -1, 10, -1, 8, -1, 11, -1, -1, -1,
                                          -1, -1);
    for (uint32_t i = 0; i < ax->out_size; i++) {
        const uint32_t first = ax->first[i], n = ax->count[i];
        const uint32_t g = n / 4 < wd->groups ? n / 4 : wd->groups;
        const int16_t *w = wd->w + (size_t)i * per_out;
        __m256i alo = _mm256_setzero_si256(), ahi = _mm256_setzero_si256();
        for (uint32_t j = 0; j < g; j++) {
            const size_t off = ((size_t)first + 4u * j) * 3;
            __m128i b;
            if (off + 16 <= row_bytes) {
                b = _mm_loadu_si128((const __m128i *)(src + off));
            } else {
                /* The group's 12 bytes end the row: read no further than the row. */
                uint8_t tmp[16] = {0};
                memcpy(tmp, src + off, 12);
                b = _mm_loadu_si128((const __m128i *)tmp);
            }
            __m256i v = _mm256_shuffle_epi8(_mm256_broadcastsi128_si256(b), shuf);
            alo = _mm256_add_epi32(alo, _mm256_madd_epi16(
                                            v, _mm256_loadu_si256((const __m256i *)(w + 32 * j))));
            ahi = _mm256_add_epi32(
                ahi, _mm256_madd_epi16(v, _mm256_loadu_si256((const __m256i *)(w + 32 * j + 16))));
        }
        __m128i lo = _mm_add_epi32(_mm256_castsi256_si128(alo), _mm256_extracti128_si256(alo, 1));
        __m128i hi = _mm_add_epi32(_mm256_castsi256_si128(ahi), _mm256_extracti128_si256(ahi, 1));
        uint32_t a[4];
        _mm_storeu_si128((__m128i *)a, _mm_add_epi32(_mm_slli_epi32(hi, 15), lo));
        const int32_t *k = ax->coef + (size_t)i * ax->ksize;
        const uint8_t *s = src + (size_t)first * 3;
        for (uint32_t t = 4 * g; t < n; t++)
            for (unsigned c = 0; c < 3; c++)
                a[c] += (uint32_t)(k[t] * s[(size_t)t * 3 + c]);
        for (unsigned c = 0; c < 3; c++)
            dst[(size_t)i * 3 + c] = (uint8_t)kiln_resize_round((int32_t)a[c], 255);
    }
}

__attribute__((target("avx2"))) void kiln_hrow_u16c1_avx2(const struct kiln_resize_axis *ax,
                                                          const uint16_t *src, uint16_t *dst)
{
    for (uint32_t i = 0; i < ax->out_size; i++) {
        const int32_t *k = ax->coef + (size_t)i * ax->ksize;
        const uint16_t *s = src + ax->first[i];
        const uint32_t n = ax->count[i];
        __m256i acc = _mm256_setzero_si256();
        uint32_t t = 0;
        for (; t + 4 <= n; t += 4) {
            /* Samples widened to 64 bits, weights sign-extended: pmuldq's signed 32 x 32 bit
             * product is then the exact 64-bit one. */
            __m256i v = _mm256_cvtepu16_epi64(_mm_loadl_epi64((const __m128i *)(s + t)));
            __m256i w = _mm256_cvtepi32_epi64(_mm_loadu_si128((const __m128i *)(k + t)));
            acc = _mm256_add_epi64(acc, _mm256_mul_epi32(v, w));
        }
        int64_t a[4];
        _mm256_storeu_si256((__m256i *)a, acc);
        int64_t sum = a[0] + a[1] + a[2] + a[3];
        for (; t < n; t++)
            sum += (int64_t)k[t] * s[t];
        dst[i] = (uint16_t)kiln_resize_round(sum, 65535);
    }
}

#else

void kiln_hrow_u8c3_avx2(const struct kiln_resize_axis *ax, const struct kiln_resize_wide *wd,
                         const uint8_t *src, uint8_t *dst)
{
    (void)ax, (void)wd, (void)src, (void)dst;
    abort(); /* never called: kiln_resize_simd_available() is false */
}

void kiln_hrow_u16c1_avx2(const struct kiln_resize_axis *ax, const uint16_t *src, uint16_t *dst)
{
    (void)ax, (void)src, (void)dst;
    abort();
}

#endif
