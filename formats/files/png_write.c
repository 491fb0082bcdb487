/* PNG encoder on libpng for pictures kiln shows people: the contact sheet and the report's
 * thumbnails. Encodes into memory; saving goes through formats/outfile.c like every output. */
#include "png_write.h"

#include <png.h>
#include <setjmp.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../core/checked.h"
#include "outfile.h"

struct membuf {
    uint8_t *data;
    size_t len, cap;
    int failed;
};

static void write_fn(png_structp png, png_bytep data, size_t len)
{
    struct membuf *m = png_get_io_ptr(png);
    size_t need;
    if (m->failed || !kiln_add_size(m->len, len, &need)) {
        m->failed = 1;
        return;
    }
    if (need > m->cap) {
        void *p = m->data;
        size_t cap = m->cap;
        if (!kiln_grow(&p, &cap, need, 1)) {
            m->failed = 1;
            return;
        }
        m->data = p;
        m->cap = cap;
    }
    memcpy(m->data + m->len, data, len);
    m->len = need;
}

static void flush_fn(png_structp png)
{
    (void)png;
}

struct encode_ctx {
    png_structp png;
    png_infop info;
    struct membuf m;
    png_bytep *rows;
};

/* libpng reports errors by longjmp; everything the jump could skip lives in ctx. */
static int encode(struct encode_ctx *c, const uint8_t *px, uint32_t w, uint32_t h,
                  uint32_t channels)
{
    if (setjmp(png_jmpbuf(c->png)))
        return KILN_EIO;
    png_set_write_fn(c->png, &c->m, write_fn, flush_fn);
    png_set_IHDR(c->png, c->info, w, h, 8, channels == 1 ? PNG_COLOR_TYPE_GRAY : PNG_COLOR_TYPE_RGB,
                 PNG_INTERLACE_NONE, PNG_COMPRESSION_TYPE_DEFAULT, PNG_FILTER_TYPE_DEFAULT);
    png_write_info(c->png, c->info);
    for (uint32_t y = 0; y < h; y++)
        c->rows[y] = (png_bytep)(px + (size_t)y * w * channels);
    png_write_image(c->png, c->rows);
    png_write_end(c->png, NULL);
    return c->m.failed ? KILN_ENOMEM : KILN_OK;
}

int kiln_png_encode(const uint8_t *px, uint32_t w, uint32_t h, uint32_t channels, uint8_t **out,
                    size_t *len, struct kiln_err *err)
{
    *out = NULL;
    *len = 0;
    size_t row_bytes;
    if (w == 0 || h == 0 || w > PNG_USER_WIDTH_MAX || h > PNG_USER_HEIGHT_MAX ||
        (channels != 1 && channels != 3) || !kiln_mul_size(w, channels, &row_bytes))
        return kiln_err_set(err, KILN_EINVAL, "cannot encode a %ux%u picture of %u channels as PNG",
                            w, h, channels);
    struct encode_ctx c;
    memset(&c, 0, sizeof c);
    c.rows = kiln_alloc_array(h, sizeof *c.rows);
    c.png = png_create_write_struct(PNG_LIBPNG_VER_STRING, NULL, NULL, NULL);
    c.info = c.png ? png_create_info_struct(c.png) : NULL;
    int rc = c.rows && c.info ? encode(&c, px, w, h, channels) : KILN_ENOMEM;
    png_destroy_write_struct(c.png ? &c.png : NULL, c.info ? &c.info : NULL);
    free(c.rows);
    if (rc) {
        free(c.m.data);
        return kiln_err_set(err, rc, "cannot encode a %ux%u PNG: %s", w, h,
                            rc == KILN_ENOMEM ? "out of memory" : "libpng refused it");
    }
    *out = c.m.data;
    *len = c.m.len;
    return KILN_OK;
}

int kiln_png_save(const char *path, const uint8_t *px, uint32_t w, uint32_t h, uint32_t channels,
                  struct kiln_err *err)
{
    uint8_t *data;
    size_t len;
    int rc = kiln_png_encode(px, w, h, channels, &data, &len, err);
    if (rc)
        return rc;
    struct kiln_outfile of;
    rc = kiln_outfile_open(&of, path, err);
    if (!rc) {
        rc = kiln_outfile_write_at(&of, data, len, 0, err);
        if (rc)
            kiln_outfile_abort(&of);
        else
            rc = kiln_outfile_commit(&of, err);
    }
    free(data);
    return rc;
}
