/* An in-memory image: the unit of work between decoders, conversion and resampling. */
#ifndef KILN_IMAGE_H
#define KILN_IMAGE_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"

/* Interleaved samples. channels: 1 grey, 2 grey+alpha, 3 RGB, 4 RGBA.
 * depth 8: uint8_t samples; depth 16: host-order uint16_t samples. */
struct kiln_image {
    uint32_t width, height, channels, depth;
    size_t stride; /* bytes per row, exactly width * channels * depth/8 */
    void *data;
    size_t cap; /* bytes owned at data */
};

/* Sets the shape and makes data hold it, reusing the current buffer when large enough (so a
 * worker can keep one image across items). Returns KILN_ENOMEM on overflow or failure. */
int kiln_image_reshape(struct kiln_image *img, uint32_t width, uint32_t height, uint32_t channels,
                       uint32_t depth, struct kiln_err *err);
/* Makes img's buffer hold at least bytes, keeping its shape and contents, so that a decoder can
 * use the room past the pixels as scratch space that a worker's image keeps from item to item
 * (instead of a large allocation per picture). KILN_ENOMEM on failure. */
int kiln_image_reserve(struct kiln_image *img, size_t bytes, struct kiln_err *err);
void kiln_image_free(struct kiln_image *img);
/* Swaps two images' contents (buffers included); used to ping-pong between stages. */
void kiln_image_swap(struct kiln_image *a, struct kiln_image *b);

/* Byte size of an image of this shape; returns 0 and sets err on overflow. */
size_t kiln_image_bytes(uint32_t width, uint32_t height, uint32_t channels, uint32_t depth,
                        struct kiln_err *err);

#endif
