/* Overflow-checked size arithmetic and allocation; every size product in kiln goes through here. */
#ifndef KILN_CHECKED_H
#define KILN_CHECKED_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>

/* Each returns false (leaving *out unspecified) when the exact result does not fit. */
static inline bool kiln_mul_size(size_t a, size_t b, size_t *out)
{
    return !__builtin_mul_overflow(a, b, out);
}

static inline bool kiln_add_size(size_t a, size_t b, size_t *out)
{
    return !__builtin_add_overflow(a, b, out);
}

static inline bool kiln_mul3_size(size_t a, size_t b, size_t c, size_t *out)
{
    size_t t;
    return kiln_mul_size(a, b, &t) && kiln_mul_size(t, c, out);
}

static inline bool kiln_mul_u64(uint64_t a, uint64_t b, uint64_t *out)
{
    return !__builtin_mul_overflow(a, b, out);
}

/* malloc(n * size) that fails cleanly on overflow. */
static inline void *kiln_alloc_array(size_t n, size_t size)
{
    size_t total;
    if (!kiln_mul_size(n, size, &total))
        return NULL;
    return malloc(total ? total : 1);
}

/* realloc(p, n * size) that fails cleanly on overflow; p is untouched on failure. */
static inline void *kiln_realloc_array(void *p, size_t n, size_t size)
{
    size_t total;
    if (!kiln_mul_size(n, size, &total))
        return NULL;
    return realloc(p, total ? total : 1);
}

/* Grows a dynamic array's capacity to at least need elements (doubling); returns false on
 * overflow or allocation failure with *arr unchanged. */
static inline bool kiln_grow(void **arr, size_t *cap, size_t need, size_t elem)
{
    if (need <= *cap)
        return true;
    size_t ncap = *cap ? *cap : 16;
    while (ncap < need) {
        if (ncap > SIZE_MAX / 2)
            return false;
        ncap *= 2;
    }
    void *p = kiln_realloc_array(*arr, ncap, elem);
    if (!p)
        return false;
    *arr = p;
    *cap = ncap;
    return true;
}

#endif
