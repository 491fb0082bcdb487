/* JPEG decoder on libjpeg-turbo: baseline, progressive, arithmetic, grey, YCbCr, RGB, CMYK and
 * YCCK, with DCT-domain reduction. Every libjpeg warning except extraneous bytes between
 * segments is an error, so a truncated stream never becomes a grey-padded picture. */
#include <stdio.h> /* jpeglib.h needs FILE */

#include <ctype.h>
#include <jerror.h>
#include <jpeglib.h>
#include <link.h>
#include <setjmp.h>
#include <stdbool.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "decoder.h"
#include "exif.h"

struct jpeg_ctx {
    struct jpeg_error_mgr pub;
    jmp_buf jump;
    struct kiln_err *err;
    int extraneous; /* bytes skipped between segments: recorded, not fatal */
};

static int code_for(int msg_code)
{
    switch (msg_code) {
    case JWRN_JPEG_EOF: return KILN_ETRUNCATED;
    case JERR_BAD_PRECISION:
    case JERR_NOT_COMPILED:
    case JERR_ARITH_NOTIMPL:
    case JERR_CONVERSION_NOTIMPL:
    case JERR_BAD_J_COLORSPACE: return KILN_EUNSUPPORTED;
    default: return KILN_ECORRUPT;
    }
}

static void jpeg_fail(j_common_ptr cinfo)
{
    struct jpeg_ctx *c = (struct jpeg_ctx *)cinfo->err;
    char text[JMSG_LENGTH_MAX];
    cinfo->err->format_message(cinfo, text);
    int code = code_for(cinfo->err->msg_code);
    if (cinfo->err->msg_code == JERR_BAD_PRECISION)
        kiln_err_set(c->err, code, "JPEG with %d-bit samples is not supported (%s)",
                     cinfo->is_decompressor ? ((j_decompress_ptr)cinfo)->data_precision : 0, text);
    else if (code == KILN_ETRUNCATED)
        kiln_err_set(c->err, code, "JPEG stream ends before the image is complete (%s)", text);
    else
        kiln_err_set(c->err, code, "JPEG %s", text);
    longjmp(c->jump, 1);
}

static void jpeg_message(j_common_ptr cinfo, int level)
{
    struct jpeg_ctx *c = (struct jpeg_ctx *)cinfo->err;
    if (level >= 0)
        return; /* trace messages */
    if (cinfo->err->msg_code == JWRN_EXTRANEOUS_DATA) {
        c->extraneous = 1;
        return;
    }
    jpeg_fail(cinfo);
}

static int jpeg_probe(const uint8_t *head, size_t len)
{
    return len >= 3 && head[0] == 0xFF && head[1] == 0xD8 && head[2] == 0xFF ? 100 : 0;
}

/* Opens a decompressor on the bytes and reads the header. The caller must have done setjmp. */
static void jpeg_begin(struct jpeg_decompress_struct *d, const uint8_t *data, size_t len)
{
    jpeg_create_decompress(d);
    jpeg_mem_src(d, data, (unsigned long)len);
    jpeg_save_markers(d, JPEG_APP0 + 1, 0xFFFF);
    jpeg_read_header(d, TRUE);
}

static void jpeg_fill_info(struct jpeg_decompress_struct *d, struct kiln_image_info *info)
{
    memset(info, 0, sizeof *info);
    info->width = d->image_width;
    info->height = d->image_height;
    info->channels = d->jpeg_color_space == JCS_GRAYSCALE ? 1 : 3;
    info->depth = 8;
    info->stored_depth = (uint32_t)d->data_precision;
    info->pages = 1;
    info->max_scale_denom = 8;
    info->orientation = 1;
    for (jpeg_saved_marker_ptr m = d->marker_list; m; m = m->next)
        if (m->marker == JPEG_APP0 + 1 && m->data_length > 6 &&
            memcmp(m->data, "Exif\0\0", 6) == 0) {
            info->orientation = kiln_exif_orientation(m->data + 6, m->data_length - 6);
            break;
        }
    const char *cs = d->jpeg_color_space == JCS_CMYK   ? "CMYK"
                     : d->jpeg_color_space == JCS_YCCK ? "YCCK"
                     : d->jpeg_color_space == JCS_RGB  ? "RGB"
                                                       : NULL;
    snprintf(info->note, sizeof info->note, "%s%s%s%s%s", d->progressive_mode ? "progressive" : "baseline",
             d->arith_code ? "; arithmetic" : "", cs ? "; " : "", cs ? cs : "",
             (cs && d->saw_Adobe_marker && (d->jpeg_color_space == JCS_CMYK ||
                                            d->jpeg_color_space == JCS_YCCK))
                 ? " (Adobe inverted)"
                 : "");
}

static int jpeg_read_info_fn(const uint8_t *data, size_t len, const struct kiln_decode_limits *lim,
                             struct kiln_image_info *info, struct kiln_err *err)
{
    (void)lim; /* reading the header allocates nothing proportional to the image */
    struct jpeg_decompress_struct d;
    struct jpeg_ctx c;
    memset(&c, 0, sizeof c);
    c.err = err;
    d.err = jpeg_std_error(&c.pub);
    c.pub.error_exit = jpeg_fail;
    c.pub.emit_message = jpeg_message;
    if (setjmp(c.jump)) {
        jpeg_destroy_decompress(&d);
        return err ? err->code : KILN_ECORRUPT;
    }
    jpeg_begin(&d, data, len);
    jpeg_fill_info(&d, info);
    jpeg_destroy_decompress(&d);
    return KILN_OK;
}

/* Adobe writers store CMYK inverted (0 = full ink); others store it plainly. Each colour is
 * (ink-free share of C) * (ink-free share of K), rounded: R = c * k / 255 for inverted data,
 * R = (255 - c) * (255 - k) / 255 otherwise (docs/formats.md). */
static void cmyk_row_to_rgb(const uint8_t *in, uint8_t *out, uint32_t w, int inverted)
{
    for (uint32_t x = 0; x < w; x++, in += 4, out += 3) {
        uint32_t k = inverted ? in[3] : 255u - in[3];
        for (int i = 0; i < 3; i++) {
            uint32_t v = inverted ? in[i] : 255u - in[i];
            out[i] = (uint8_t)((v * k + 127u) / 255u);
        }
    }
}

struct jpeg_decode_state {
    struct jpeg_decompress_struct d;
    struct jpeg_ctx c;
    uint8_t *cmyk; /* row buffer for CMYK and YCCK */
};

static int jpeg_decode_fn(const uint8_t *data, size_t len, const struct kiln_image_info *want,
                          uint32_t denom, struct kiln_image *out, struct kiln_err *err)
{
    (void)want;
    if (denom != 1 && denom != 2 && denom != 4 && denom != 8)
        return kiln_err_set(err, KILN_EINTERNAL, "JPEG reduction 1/%u is not 1, 2, 4 or 8", denom);
    struct jpeg_decode_state *s = calloc(1, sizeof *s);
    if (!s)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a JPEG decoder");
    s->c.err = err;
    s->d.err = jpeg_std_error(&s->c.pub);
    s->c.pub.error_exit = jpeg_fail;
    s->c.pub.emit_message = jpeg_message;
    if (setjmp(s->c.jump)) {
        jpeg_destroy_decompress(&s->d);
        free(s->cmyk);
        free(s);
        return err ? err->code : KILN_ECORRUPT;
    }
    jpeg_begin(&s->d, data, len);
    struct jpeg_decompress_struct *d = &s->d;
    const int cmyk = d->jpeg_color_space == JCS_CMYK || d->jpeg_color_space == JCS_YCCK;
    d->out_color_space = d->jpeg_color_space == JCS_GRAYSCALE ? JCS_GRAYSCALE
                         : cmyk                               ? JCS_CMYK
                                                              : JCS_RGB;
    d->scale_num = 1;
    d->scale_denom = denom;
    d->dct_method = JDCT_ISLOW;
    jpeg_start_decompress(d);
    const uint32_t oc = cmyk ? 3u : (uint32_t)d->output_components;
    if (d->output_width != out->width || d->output_height != out->height || oc != out->channels ||
        out->depth != 8) {
        kiln_err_set(err, KILN_EINTERNAL, "JPEG output %ux%ux%u differs from the planned %ux%ux%u",
                     d->output_width, d->output_height, oc, out->width, out->height, out->channels);
        longjmp(s->c.jump, 1);
    }
    if (cmyk) {
        s->cmyk = malloc((size_t)d->output_width * 4);
        if (!s->cmyk) {
            kiln_err_set(err, KILN_ENOMEM, "cannot allocate a CMYK row");
            longjmp(s->c.jump, 1);
        }
    }
    while (d->output_scanline < d->output_height) {
        uint8_t *row = (uint8_t *)out->data + (size_t)d->output_scanline * out->stride;
        JSAMPROW rp = cmyk ? s->cmyk : row;
        if (jpeg_read_scanlines(d, &rp, 1) != 1) {
            kiln_err_set(err, KILN_ETRUNCATED, "JPEG stream ends at row %u of %u",
                         d->output_scanline, d->output_height);
            longjmp(s->c.jump, 1);
        }
        if (cmyk)
            cmyk_row_to_rgb(s->cmyk, row, d->output_width, d->saw_Adobe_marker);
    }
    jpeg_finish_decompress(d);
    jpeg_destroy_decompress(d);
    free(s->cmyk);
    free(s);
    return KILN_OK;
}

#define KILN_STR2(x) #x
#define KILN_STR(x) KILN_STR2(x)

/* dl_iterate_phdr visitor: in the loaded object that holds jpeg_std_error, finds the
 * identification text "libjpeg-turbo version X (build Y)" in a readable segment. */
struct jpeg_ident {
    uintptr_t code;
    char *buf;
    size_t len;
    bool found;
};

static int find_jpeg_ident(struct dl_phdr_info *info, size_t size, void *ctx)
{
    (void)size;
    struct jpeg_ident *id = ctx;
    bool mine = false;
    for (int i = 0; i < info->dlpi_phnum && !mine; i++) {
        const ElfW(Phdr) *ph = &info->dlpi_phdr[i];
        uintptr_t lo = info->dlpi_addr + ph->p_vaddr;
        mine = ph->p_type == PT_LOAD && id->code >= lo && id->code - lo < ph->p_memsz;
    }
    if (!mine)
        return 0;
    static const char needle[] = "libjpeg-turbo version ";
    for (int i = 0; i < info->dlpi_phnum && !id->found; i++) {
        const ElfW(Phdr) *ph = &info->dlpi_phdr[i];
        if (ph->p_type != PT_LOAD || !(ph->p_flags & PF_R))
            continue;
        const char *seg = (const char *)(info->dlpi_addr + ph->p_vaddr);
        const char *hit = memmem(seg, ph->p_memsz, needle, sizeof needle - 1);
        if (!hit)
            continue;
        const char *v = hit + sizeof needle - 1, *end = seg + ph->p_memsz;
        size_t n = 0;
        while (v + n < end && n < 32 && (isdigit((unsigned char)v[n]) || v[n] == '.'))
            n++;
        if (n && n < id->len) {
            snprintf(id->buf, id->len, "%.*s", (int)n, v);
            id->found = true;
        }
    }
    return 1; /* the object was found; stop */
}

static void jpeg_library_version(char *buf, size_t len)
{
    /* libjpeg-turbo has no version call, and the version in its message table is that of the
     * libjpeg API it emulates ("6b"). The shared library does carry its own identification
     * text: read the version there, so an updated library is seen without rebuilding kiln;
     * fall back to the version of the headers kiln was built with, and say so. */
    struct jpeg_ident id = {(uintptr_t)&jpeg_std_error, buf, len, false};
    dl_iterate_phdr(find_jpeg_ident, &id);
    if (!id.found)
        snprintf(buf, len, "%s (headers)", KILN_STR(LIBJPEG_TURBO_VERSION));
}

const struct kiln_decoder kiln_decoder_jpeg = {
    .name = "jpeg",
    .probe = jpeg_probe,
    .read_info = jpeg_read_info_fn,
    .decode = jpeg_decode_fn,
    .library = "libjpeg-turbo",
    .library_version = jpeg_library_version,
};
