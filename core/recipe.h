/* The pack recipe: every option that changes output bytes, with its default. The same setter
 * serves the command line (pack, build) and the manifest (reproduce), so an option is parsed
 * in one place only. */
#ifndef KILN_RECIPE_H
#define KILN_RECIPE_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "err.h"

enum kiln_out_type { KILN_OUT_U8 = 0, KILN_OUT_U16 = 1, KILN_OUT_F32 = 2 };
enum kiln_layout { KILN_LAYOUT_NHWC = 0, KILN_LAYOUT_NCHW = 1 };

struct kiln_recipe {
    uint32_t width, height;
    int fit;    /* enum kiln_fit */
    int filter; /* enum kiln_filter */
    uint32_t channels; /* 1, 3 or 4 */
    uint32_t depth;    /* 8 or 16: the integer records */
    int dtype;         /* enum kiln_out_type; -1 until resolved from depth */
    int layout;
    bool dct_scale; /* JPEG DCT-domain reduction when the target is small enough */
    bool orient;    /* apply EXIF orientation */
    bool hash_paths; /* names are written as keyed hashes (docs/formats.md) */
    uint8_t pad_value[4];  /* 8-bit scale, times 257 for 16-bit records */
    uint8_t background[3]; /* alpha is composited over this (8-bit scale) */
    uint64_t max_pixels;
    uint32_t max_side;
};

#define KILN_DEFAULT_MAX_PIXELS (1ull << 28)
#define KILN_DEFAULT_MAX_SIDE 65535u
/* The largest output record (one image, in bytes, of the output type): 256 MiB, e.g. 8192x8192
 * RGBA f32. Each worker holds a record and the resampler's buffers of about the same size, so
 * this bounds memory per worker; the tensor files' total is checked against free space. */
#define KILN_MAX_RECORD_BYTES ((size_t)256 << 20)

void kiln_recipe_defaults(struct kiln_recipe *r);

/* Sets one option by its long name without the dashes ("size", "fit", "filter", "channels",
 * "depth", "dtype", "layout", "pad-value", "background", "max-pixels", "max-side",
 * "dct-scale", "orient") from its text form ("on"/"off" for the two switches). Returns
 * KILN_EINVAL with a message naming the option and the accepted values. */
int kiln_recipe_set(struct kiln_recipe *r, const char *key, const char *value,
                    struct kiln_err *err);

/* Checks the combination and fills derived values (dtype from depth). Call after all sets.
 * A record larger than KILN_MAX_RECORD_BYTES is refused (KILN_EINVAL). */
int kiln_recipe_finish(struct kiln_recipe *r, struct kiln_err *err);

const char *kiln_out_type_name(int t);
const char *kiln_layout_name(int l);

/* Bytes per output sample and per record (H*W*C*sample), overflow-checked (0 on overflow). */
size_t kiln_recipe_sample_bytes(const struct kiln_recipe *r);
size_t kiln_recipe_record_bytes(const struct kiln_recipe *r);

/* Parses "WxH" or "S" into width and height (1..65535). */
int kiln_parse_size(const char *text, uint32_t *w, uint32_t *h, struct kiln_err *err);

#endif
