/* PNG decoder on libpng: every bit depth, colour type and interlace method, expanded to 8 or
 * 16-bit grey, grey+alpha, RGB or RGBA (palette and tRNS become colour and alpha). The image
 * data of the common layouts is inflated and unfiltered by png_idat.c, twice as fast as
 * through zlib; libpng reads every header and takes whatever that path declines. */
#include <png.h>
#include <stdio.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>

#include "decoder.h"
#include "exif.h"
#include "png_idat.h"

/* Ancillary chunks (text, ICC profiles) larger than this are refused by libpng instead of
 * being allocated: a "bomb" chunk must not cost memory. */
#define PNG_CHUNK_LIMIT (8u * 1024u * 1024u)

struct png_ctx {
    jmp_buf jump;
    const uint8_t *data;
    size_t len, pos;
    int truncated;
    struct kiln_err *err;
    png_structp png;
    png_infop info;
    png_bytep *rows;
};

static void png_on_error(png_structp png, png_const_charp msg)
{
    struct png_ctx *c = png_get_error_ptr(png);
    int code = c->truncated ? KILN_ETRUNCATED : KILN_ECORRUPT;
    if (strstr(msg, "exceeds user limit"))
        code = KILN_ETOOLARGE;
    kiln_err_set(c->err, code, "%s%s", strncmp(msg, "PNG", 3) == 0 ? "" : "PNG ", msg);
    longjmp(c->jump, 1);
}

static void png_on_warning(png_structp png, png_const_charp msg)
{
    /* libpng reports an over-long chunk as a "benign" error and then allocates it anyway (a
     * 1 GiB tEXt chunk costs 1 GiB); refuse instead. Other warnings are benign (e.g. a bad
     * ancillary chunk that libpng skipped). */
    if (strstr(msg, "too large"))
        png_error(png, msg);
}

static void png_read_mem(png_structp png, png_bytep out, size_t n)
{
    struct png_ctx *c = png_get_io_ptr(png);
    if (c->len - c->pos < n) {
        c->truncated = 1;
        png_error(png, "data ends early");
    }
    memcpy(out, c->data + c->pos, n);
    c->pos += n;
}

static int png_probe(const uint8_t *head, size_t len)
{
    static const uint8_t sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
    if (len >= 8 && memcmp(head, sig, 8) == 0)
        return 100;
    /* "PNG" in place but the rest of the signature damaged (typically by a text-mode transfer):
     * still a PNG, which libpng will reject with the reason. */
    return len >= 4 && memcmp(head + 1, "PNG", 3) == 0 ? 10 : 0;
}

static int png_open(struct png_ctx *c, const uint8_t *data, size_t len, struct kiln_err *err)
{
    memset(c, 0, sizeof *c);
    c->data = data;
    c->len = len;
    c->err = err;
    c->png = png_create_read_struct(PNG_LIBPNG_VER_STRING, c, png_on_error, png_on_warning);
    if (!c->png)
        return kiln_err_set(err, KILN_ENOMEM, "cannot create a libpng reader");
    c->info = png_create_info_struct(c->png);
    if (!c->info) {
        png_destroy_read_struct(&c->png, NULL, NULL);
        return kiln_err_set(err, KILN_ENOMEM, "cannot create a libpng info struct");
    }
    png_set_read_fn(c->png, c, png_read_mem);
    png_set_chunk_malloc_max(c->png, PNG_CHUNK_LIMIT);
    return KILN_OK;
}

static void png_close(struct png_ctx *c)
{
    free(c->rows);
    png_destroy_read_struct(&c->png, &c->info, NULL);
}

static void png_fill_info(struct png_ctx *c, struct kiln_image_info *info)
{
    png_structp png = c->png;
    png_infop pi = c->info;
    int type = png_get_color_type(png, pi), bits = png_get_bit_depth(png, pi);
    int trns = png_get_valid(png, pi, PNG_INFO_tRNS) != 0;
    memset(info, 0, sizeof *info);
    info->width = png_get_image_width(png, pi);
    info->height = png_get_image_height(png, pi);
    info->stored_depth = (uint32_t)bits;
    info->depth = bits == 16 ? 16 : 8;
    info->pages = 1;
    info->max_scale_denom = 1;
    switch (type) {
    case PNG_COLOR_TYPE_GRAY: info->channels = trns ? 2 : 1; break;
    case PNG_COLOR_TYPE_GRAY_ALPHA: info->channels = 2; break;
    case PNG_COLOR_TYPE_PALETTE: info->channels = trns ? 4 : 3; break;
    case PNG_COLOR_TYPE_RGB: info->channels = trns ? 4 : 3; break;
    default: info->channels = 4; break;
    }
    info->orientation = 1;
#ifdef PNG_eXIf_SUPPORTED
    png_bytep exif = NULL;
    png_uint_32 nexif = 0;
    if (png_get_eXIf_1(png, pi, &nexif, &exif) && exif)
        info->orientation = kiln_exif_orientation(exif, nexif);
#endif
    size_t used = 0;
    const char *notes[5];
    int nn = 0;
    if (png_get_interlace_type(png, pi) == PNG_INTERLACE_ADAM7)
        notes[nn++] = "interlaced";
    if (type == PNG_COLOR_TYPE_PALETTE)
        notes[nn++] = "palette";
    if (png_get_valid(png, pi, PNG_INFO_sRGB))
        notes[nn++] = "sRGB ignored";
    else if (png_get_valid(png, pi, PNG_INFO_gAMA))
        notes[nn++] = "gAMA ignored";
    if (png_get_valid(png, pi, PNG_INFO_iCCP))
        notes[nn++] = "iCCP ignored";
    for (int i = 0; i < nn && used + strlen(notes[i]) + 3 < sizeof info->note; i++)
        used += (size_t)snprintf(info->note + used, sizeof info->note - used, "%s%s",
                                 i ? "; " : "", notes[i]);
}

static int png_read_info_fn(const uint8_t *data, size_t len, const struct kiln_decode_limits *lim,
                            struct kiln_image_info *info, struct kiln_err *err)
{
    struct png_ctx c;
    int rc = png_open(&c, data, len, err);
    if (rc)
        return rc;
    if (setjmp(c.jump)) {
        png_close(&c);
        return err ? err->code : KILN_ECORRUPT;
    }
    /* PNG allows sides up to 2^31 - 1; libpng's own default limit is lower. The caller checks
     * its limits on the numbers read here, so only memory-bounding limits are libpng's job. */
    (void)lim;
    png_set_user_limits(c.png, 0x7fffffffu, 0x7fffffffu);
    png_read_info(c.png, c.info);
    png_fill_info(&c, info);
    png_close(&c);
    return KILN_OK;
}

static int host_is_little_endian(void)
{
    const uint16_t one = 1;
    return *(const uint8_t *)&one == 1;
}

static int png_decode_fn(const uint8_t *data, size_t len, const struct kiln_image_info *want,
                         uint32_t denom, struct kiln_image *out, struct kiln_err *err)
{
    if (denom != 1)
        return kiln_err_set(err, KILN_EINTERNAL, "PNG cannot decode at 1/%u scale", denom);
    struct png_ctx c;
    int rc = png_open(&c, data, len, err);
    if (rc)
        return rc;
    if (setjmp(c.jump)) {
        png_close(&c);
        return err ? err->code : KILN_ECORRUPT;
    }
    png_set_user_limits(c.png, want->width, want->height);
    if (want->trusted) {
        /* The bytes already matched their recorded SHA-256 and decoded cleanly, so the critical
         * chunks' CRC-32s and the stream's Adler-32 can only agree; skipping them saves a pass
         * over the data. Ancillary chunks keep the default: a damaged one is dropped with a
         * warning in the checked read, and using it here instead (a tRNS adds an alpha channel)
         * would change the image between scan and pack. */
        png_set_crc_action(c.png, PNG_CRC_QUIET_USE, PNG_CRC_DEFAULT);
#ifdef PNG_IGNORE_ADLER32
        png_set_option(c.png, PNG_IGNORE_ADLER32, PNG_OPTION_ON);
#endif
    }
    png_read_info(c.png, c.info);
    struct kiln_image_info got;
    png_fill_info(&c, &got);
    if (got.width != out->width || got.height != out->height || got.channels != out->channels ||
        got.depth != out->depth || got.width != want->width || got.height != want->height) {
        png_close(&c);
        return kiln_err_set(err, KILN_EINTERNAL, "PNG header changed between reads");
    }
    const int bits = png_get_bit_depth(c.png, c.info);
    if (!want->library_only && png_get_interlace_type(c.png, c.info) == PNG_INTERLACE_NONE &&
        (bits == 8 || bits == 16) && png_get_color_type(c.png, c.info) != PNG_COLOR_TYPE_PALETTE &&
        !png_get_valid(c.png, c.info, PNG_INFO_tRNS)) {
        const struct kiln_png_layout l = {got.width, got.height, got.channels, got.depth,
                                          (int)want->trusted};
        /* Room for the inflated rows in out's buffer, which a worker keeps from picture to
         * picture: no large allocation (and its page faults) per picture. Without it the path
         * declines and libpng decodes. */
        struct kiln_err ignored;
        const size_t room = kiln_png_idat_room(&l);
        if (room && len <= SIZE_MAX - room)
            (void)kiln_image_reserve(out, room + len, &ignored);
        const int fast = kiln_png_idat_decode(data, len, &l, out->data, out->stride, out->cap);
        if (fast <= 0) {
            png_close(&c);
            return fast ? kiln_err_set(err, KILN_ENOMEM, "cannot allocate the PNG image data")
                        : KILN_OK;
        }
    }
    png_set_expand(c.png); /* palette -> RGB, grey < 8 bits -> 8, tRNS -> alpha */
    if (got.depth == 16 && host_is_little_endian())
        png_set_swap(c.png);
    png_set_interlace_handling(c.png);
    png_read_update_info(c.png, c.info);
    if (png_get_rowbytes(c.png, c.info) != out->stride) {
        png_close(&c);
        return kiln_err_set(err, KILN_EINTERNAL, "PNG row size %zu differs from %zu",
                            (size_t)png_get_rowbytes(c.png, c.info), out->stride);
    }
    c.rows = malloc((size_t)out->height * sizeof *c.rows);
    if (!c.rows) {
        png_close(&c);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate PNG row pointers");
    }
    for (uint32_t y = 0; y < out->height; y++)
        c.rows[y] = (png_bytep)out->data + (size_t)y * out->stride;
    png_read_image(c.png, c.rows);
    png_close(&c);
    return KILN_OK;
}

static int png_decode_rows_fn(const uint8_t *data, size_t len,
                              const struct kiln_image_info *want,
                              int (*row)(void *ctx, uint32_t y, const void *pixels), void *ctx,
                              struct kiln_err *err)
{
    struct png_ctx c;
    int rc = png_open(&c, data, len, err);
    if (rc)
        return rc;
    uint8_t *volatile buf = NULL; /* survives the longjmp of a libpng error */
    if (setjmp(c.jump)) {
        free(buf);
        png_close(&c);
        return err ? err->code : KILN_ECORRUPT;
    }
    png_set_user_limits(c.png, want->width, want->height);
    if (want->trusted) { /* as in png_decode_fn */
        png_set_crc_action(c.png, PNG_CRC_QUIET_USE, PNG_CRC_DEFAULT);
#ifdef PNG_IGNORE_ADLER32
        png_set_option(c.png, PNG_IGNORE_ADLER32, PNG_OPTION_ON);
#endif
    }
    png_read_info(c.png, c.info);
    struct kiln_image_info got;
    png_fill_info(&c, &got);
    if (got.width != want->width || got.height != want->height ||
        got.channels != want->channels || got.depth != want->depth) {
        png_close(&c);
        return kiln_err_set(err, KILN_EINTERNAL, "PNG header changed between reads");
    }
    /* Interlaced rows are only whole after the last pass. */
    if (png_get_interlace_type(c.png, c.info) != PNG_INTERLACE_NONE) {
        png_close(&c);
        return KILN_DECODE_ROWS_DECLINED;
    }
    png_set_expand(c.png);
    if (got.depth == 16 && host_is_little_endian())
        png_set_swap(c.png);
    png_read_update_info(c.png, c.info);
    const size_t stride = (size_t)want->width * want->channels * (want->depth / 8);
    if (png_get_rowbytes(c.png, c.info) != stride) {
        png_close(&c);
        return kiln_err_set(err, KILN_EINTERNAL, "PNG row size %zu differs from %zu",
                            (size_t)png_get_rowbytes(c.png, c.info), stride);
    }
    if (!(buf = malloc(stride))) {
        png_close(&c);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a PNG row");
    }
    for (uint32_t y = 0; y < want->height && !rc; y++) {
        png_read_row(c.png, buf, NULL);
        rc = row(ctx, y, buf);
    }
    free(buf);
    png_close(&c);
    return rc;
}

static void png_library_version(char *buf, size_t len)
{
    snprintf(buf, len, "%s", png_get_libpng_ver(NULL));
}

const struct kiln_decoder kiln_decoder_png = {
    .name = "png",
    .probe = png_probe,
    .read_info = png_read_info_fn,
    .decode = png_decode_fn,
    .decode_rows = png_decode_rows_fn,
    .library = "libpng",
    .library_version = png_library_version,
};
