/* Allocation helpers for struct kiln_image. */
#include "image.h"

#include <stdlib.h>

#include "checked.h"

size_t kiln_image_bytes(uint32_t width, uint32_t height, uint32_t channels, uint32_t depth,
                        struct kiln_err *err)
{
    size_t row, total;
    if (!kiln_mul3_size(width, channels, depth / 8, &row) || !kiln_mul_size(row, height, &total)) {
        kiln_err_set(err, KILN_ENOMEM, "image of %ux%u with %u channels overflows memory sizes",
                     width, height, channels);
        return 0;
    }
    return total;
}

int kiln_image_reshape(struct kiln_image *img, uint32_t width, uint32_t height, uint32_t channels,
                       uint32_t depth, struct kiln_err *err)
{
    if (channels < 1 || channels > 4 || (depth != 8 && depth != 16))
        return kiln_err_set(err, KILN_EINTERNAL, "bad image shape: %u channels, %u bits", channels,
                            depth);
    struct kiln_err tmp;
    size_t total = kiln_image_bytes(width, height, channels, depth, &tmp);
    if (total == 0 && width && height)
        return kiln_err_set(err, tmp.code, "%s", tmp.msg);
    if (total > img->cap) {
        void *p = realloc(img->data, total);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu bytes for a %ux%u image",
                                total, width, height);
        img->data = p;
        img->cap = total;
    }
    img->width = width;
    img->height = height;
    img->channels = channels;
    img->depth = depth;
    img->stride = (size_t)width * channels * (depth / 8);
    return KILN_OK;
}

int kiln_image_reserve(struct kiln_image *img, size_t bytes, struct kiln_err *err)
{
    if (bytes > img->cap) {
        void *p = realloc(img->data, bytes);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu bytes for an image",
                                bytes);
        img->data = p;
        img->cap = bytes;
    }
    return KILN_OK;
}

void kiln_image_free(struct kiln_image *img)
{
    free(img->data);
    img->data = NULL;
    img->cap = 0;
    img->width = img->height = 0;
}

void kiln_image_swap(struct kiln_image *a, struct kiln_image *b)
{
    struct kiln_image t = *a;
    *a = *b;
    *b = t;
}
