/* TIFF decoder on libtiff: 8- and 16-bit grey and RGB (with or without alpha), strips and tiles,
 * contiguous or separate planes, every compression libtiff was built with, read straight into
 * the caller's buffer. Other photometrics (palette, bilevel, YCbCr, CMYK, LogLuv) go through
 * libtiff's RGBA interface as 8-bit. Errors are collected per handle (libtiff >= 4.5), never
 * through libtiff's process-wide handlers. */
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <tiffio.h>

#include "../../core/checked.h"
#include "decoder.h"

/* libtiff refuses single allocations above this instead of trusting a hostile header. */
#define TIFF_MAX_ALLOC ((tmsize_t)1 << 30)
/* kiln's own tile buffer: at most the image's size, or this for small images (a 1024x1024
 * RGBA 16-bit tile is 8 MiB). */
#define TIFF_TILE_FLOOR ((size_t)16 << 20)

struct tiff_mem {
    const uint8_t *data;
    uint64_t len, pos;
    char error[256];
    int errors;
    char lost[256]; /* the first warning that says pixels are missing */
    int losses;
};

static tmsize_t mem_read(thandle_t h, void *buf, tmsize_t n)
{
    struct tiff_mem *m = (struct tiff_mem *)h;
    if (n <= 0 || m->pos >= m->len)
        return 0;
    uint64_t k = m->len - m->pos < (uint64_t)n ? m->len - m->pos : (uint64_t)n;
    memcpy(buf, m->data + m->pos, (size_t)k);
    m->pos += k;
    return (tmsize_t)k;
}

static tmsize_t mem_write(thandle_t h, void *buf, tmsize_t n)
{
    (void)h;
    (void)buf;
    (void)n;
    return -1;
}

static toff_t mem_seek(thandle_t h, toff_t off, int whence)
{
    struct tiff_mem *m = (struct tiff_mem *)h;
    uint64_t base = whence == SEEK_CUR ? m->pos : whence == SEEK_END ? m->len : 0;
    if (off > UINT64_MAX - base)
        return (toff_t)-1;
    m->pos = base + off;
    return m->pos;
}

static int mem_close(thandle_t h)
{
    (void)h;
    return 0;
}

static toff_t mem_size(thandle_t h)
{
    return ((struct tiff_mem *)h)->len;
}

static int mem_map(thandle_t h, void **base, toff_t *size)
{
    struct tiff_mem *m = (struct tiff_mem *)h;
    *base = (void *)m->data; /* libtiff only reads a mapping opened with mode "r" */
    *size = m->len;
    return 1;
}

static void mem_unmap(thandle_t h, void *base, toff_t size)
{
    (void)h;
    (void)base;
    (void)size;
}

static int on_error(TIFF *tif, void *user, const char *module, const char *fmt, va_list ap)
    __attribute__((format(printf, 4, 0)));

static int on_error(TIFF *tif, void *user, const char *module, const char *fmt, va_list ap)
{
    (void)tif;
    struct tiff_mem *m = user;
    if (m->errors++ == 0) {
        char text[200];
        vsnprintf(text, sizeof text, fmt, ap);
        snprintf(m->error, sizeof m->error, "%s%s%s", module ? module : "", module ? ": " : "",
                 text);
    }
    return 1;
}

static int on_warning(TIFF *tif, void *user, const char *module, const char *fmt, va_list ap)
    __attribute__((format(printf, 4, 0)));

/* Most warnings (unknown tags, ...) do not change pixels. A few say that a strip or tile held
 * fewer samples than the directory declares, and libtiff then returns success with part of the
 * buffer never written: a JPEG strip of 16x16 in a 24592x16 image gave rows whose tail was
 * whatever the heap held (found by fuzzing; two decodes of one file differed). Those make the
 * decode fail. The phrases are libtiff 4.5's and libjpeg's (through libtiff's JPEG codec). */
static int on_warning(TIFF *tif, void *user, const char *module, const char *fmt, va_list ap)
{
    (void)tif;
    static const char *const loss[] = {"Improper JPEG strip/tile size", "Premature EOF",
                                       "Premature EOL", "Premature end of JPEG",
                                       "Corrupt JPEG data", "Not enough data", "data truncated"};
    struct tiff_mem *m = user;
    char text[200];
    vsnprintf(text, sizeof text, fmt, ap);
    for (size_t i = 0; i < sizeof loss / sizeof loss[0]; i++)
        if (strstr(text, loss[i])) {
            if (m->losses++ == 0)
                snprintf(m->lost, sizeof m->lost, "%s%s%s", module ? module : "",
                         module ? ": " : "", text);
            break;
        }
    return 1;
}

static int error_code(const struct tiff_mem *m);

/* The offset of the first image directory from the header (TIFF 6.0 section 2; BigTIFF keeps
 * it as 8 bytes at offset 8), or UINT64_MAX when the header itself is cut short. Decoders are
 * also called without a probe (pack calls the recorded one), so len may be anything. */
static uint64_t first_ifd_offset(const uint8_t *d, size_t len)
{
    if (len < 4)
        return UINT64_MAX;
    const bool le = d[0] == 'I', big = d[le ? 2 : 3] == 43;
    const size_t at = big ? 8 : 4, n = big ? 8 : 4;
    if (len < at + n)
        return UINT64_MAX;
    uint64_t v = 0;
    for (size_t j = 0; j < n; j++)
        v |= (uint64_t)d[at + j] << (8 * (le ? j : n - 1 - j));
    return v;
}

/* Opens the TIFF in memory; on failure returns NULL with err set. A file that ends before its
 * first image directory (cut after the header) is truncated; libtiff reports nothing for a
 * directory offset of 0, which used to pass for a failure of the run. */
static TIFF *tiff_open(struct tiff_mem *m, const uint8_t *data, size_t len, struct kiln_err *err)
{
    memset(m, 0, sizeof *m);
    m->data = data;
    m->len = len;
    TIFFOpenOptions *opts = TIFFOpenOptionsAlloc();
    if (!opts) {
        kiln_err_set(err, KILN_ENOMEM, "TIFF reader could not be created");
        return NULL;
    }
    TIFFOpenOptionsSetMaxSingleMemAlloc(opts, TIFF_MAX_ALLOC);
    TIFFOpenOptionsSetErrorHandlerExtR(opts, on_error, m);
    TIFFOpenOptionsSetWarningHandlerExtR(opts, on_warning, m);
    TIFF *tif = TIFFClientOpenExt("tiff", "r", (thandle_t)m, mem_read, mem_write, mem_seek,
                                  mem_close, mem_size, mem_map, mem_unmap, opts);
    TIFFOpenOptionsFree(opts);
    if (!tif) {
        const uint64_t ifd = first_ifd_offset(data, len);
        if (ifd == UINT64_MAX || (ifd == 0 && len <= 16)) /* a writer that died early */
            kiln_err_set(err, KILN_ETRUNCATED, "TIFF ends with its header (%zu bytes)", len);
        else if (ifd >= len)
            kiln_err_set(err, KILN_ETRUNCATED,
                         "TIFF ends before its first image directory (at byte %llu of %zu)",
                         (unsigned long long)ifd, len);
        else if (ifd == 0)
            kiln_err_set(err, KILN_ECORRUPT, "TIFF header points to no image directory");
        else if (m->errors)
            kiln_err_set(err, error_code(m), "TIFF %s", m->error);
        else
            kiln_err_set(err, KILN_ECORRUPT, "TIFF has no image directory that can be read");
    }
    return tif;
}

static int error_code(const struct tiff_mem *m)
{
    return strstr(m->error, "Read error") || strstr(m->error, "Seek error") ||
                   strstr(m->error, "past end") || strstr(m->error, "end of file")
               ? KILN_ETRUNCATED
               : KILN_ECORRUPT;
}

static int tiff_probe(const uint8_t *h, size_t n)
{
    if (n < 4)
        return 0;
    if ((h[0] == 'I' && h[1] == 'I' && (h[2] == 42 || h[2] == 43) && h[3] == 0) ||
        (h[0] == 'M' && h[1] == 'M' && h[2] == 0 && (h[3] == 42 || h[3] == 43)))
        return 100;
    return 0;
}

/* What the first directory holds and how it will be read. */
struct tiff_shape {
    uint32_t w, h;
    uint16_t spp, bps, photo, format, planar, orientation, extra, compression;
    int direct;  /* read samples as stored (uint 8/16-bit grey or RGB) */
    int invert;  /* MINISWHITE */
    int premultiplied; /* the alpha sample is associated (colour already multiplied by it) */
    uint32_t channels, depth;
};

static const char *photometric_name(uint16_t p)
{
    switch (p) {
    case PHOTOMETRIC_MINISWHITE: return "min-is-white";
    case PHOTOMETRIC_MINISBLACK: return "min-is-black";
    case PHOTOMETRIC_RGB: return "RGB";
    case PHOTOMETRIC_PALETTE: return "palette";
    case PHOTOMETRIC_SEPARATED: return "CMYK";
    case PHOTOMETRIC_YCBCR: return "YCbCr";
    case PHOTOMETRIC_LOGLUV: return "LogLuv";
    case PHOTOMETRIC_LOGL: return "LogL";
    default: return "other photometric";
    }
}

static int tiff_shape_of(TIFF *tif, struct tiff_mem *m, struct tiff_shape *s, struct kiln_err *err)
{
    memset(s, 0, sizeof *s);
    uint16_t *extra_types = NULL;
    if (!TIFFGetField(tif, TIFFTAG_IMAGEWIDTH, &s->w) || !TIFFGetField(tif, TIFFTAG_IMAGELENGTH, &s->h))
        return kiln_err_set(err, KILN_ECORRUPT, "TIFF has no image size%s%s",
                            m->error[0] ? ": " : "", m->error);
    TIFFGetFieldDefaulted(tif, TIFFTAG_SAMPLESPERPIXEL, &s->spp);
    TIFFGetFieldDefaulted(tif, TIFFTAG_BITSPERSAMPLE, &s->bps);
    TIFFGetFieldDefaulted(tif, TIFFTAG_SAMPLEFORMAT, &s->format);
    TIFFGetFieldDefaulted(tif, TIFFTAG_PLANARCONFIG, &s->planar);
    TIFFGetFieldDefaulted(tif, TIFFTAG_ORIENTATION, &s->orientation);
    TIFFGetFieldDefaulted(tif, TIFFTAG_COMPRESSION, &s->compression);
    TIFFGetFieldDefaulted(tif, TIFFTAG_EXTRASAMPLES, &s->extra, &extra_types);
    s->premultiplied = s->extra > 0 && extra_types && extra_types[0] == EXTRASAMPLE_ASSOCALPHA;
    if (!TIFFGetField(tif, TIFFTAG_PHOTOMETRIC, &s->photo))
        s->photo = s->spp >= 3 ? PHOTOMETRIC_RGB : PHOTOMETRIC_MINISBLACK;
    if (s->orientation < 1 || s->orientation > 8)
        s->orientation = 1;
    if (s->format == SAMPLEFORMAT_IEEEFP || s->format == SAMPLEFORMAT_COMPLEXIEEEFP)
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "TIFF with floating-point samples is not supported (unsupported "
                            "sample format)");
    if (s->format != SAMPLEFORMAT_UINT && s->format != SAMPLEFORMAT_VOID)
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "TIFF with signed or complex samples is not supported (unsupported "
                            "sample format %u)",
                            s->format);
    if (!TIFFIsCODECConfigured(s->compression))
        return kiln_err_set(err, KILN_EUNSUPPORTED, "TIFF compression %u is not available",
                            s->compression);
    const int grey = s->photo == PHOTOMETRIC_MINISBLACK || s->photo == PHOTOMETRIC_MINISWHITE;
    const int colour_ok = s->photo == PHOTOMETRIC_RGB && s->spp >= 3 && s->spp <= 4;
    const int grey_ok = grey && s->spp >= 1 && s->spp <= 2;
    if ((s->bps == 8 || s->bps == 16) && (colour_ok || grey_ok) &&
        (s->planar == PLANARCONFIG_CONTIG || s->planar == PLANARCONFIG_SEPARATE)) {
        s->direct = 1;
        s->invert = s->photo == PHOTOMETRIC_MINISWHITE;
        s->channels = s->spp;
        s->depth = s->bps;
        return KILN_OK;
    }
    char why[1024] = "";
    if (!TIFFRGBAImageOK(tif, why))
        return kiln_err_set(err, KILN_EUNSUPPORTED, "TIFF %s with %u-bit samples: %s",
                            photometric_name(s->photo), s->bps, why);
    s->channels = grey ? (s->extra ? 2u : 1u) : (s->extra ? 4u : 3u);
    s->depth = 8;
    return KILN_OK;
}

static int tiff_read_info_fn(const uint8_t *data, size_t len, const struct kiln_decode_limits *lim,
                             struct kiln_image_info *info, struct kiln_err *err)
{
    (void)lim; /* libtiff reads only the directory here; the caller checks the size */
    struct tiff_mem m;
    TIFF *tif = tiff_open(&m, data, len, err);
    if (!tif)
        return err->code;
    struct tiff_shape s;
    int rc = tiff_shape_of(tif, &m, &s, err);
    if (!rc) {
        memset(info, 0, sizeof *info);
        info->width = s.w;
        info->height = s.h;
        info->channels = s.channels;
        info->depth = s.depth;
        info->stored_depth = s.bps;
        info->orientation = s.orientation;
        info->max_scale_denom = 1;
        /* libtiff stops counting at a directory loop, so a looping file cannot hang here. */
        tdir_t pages = TIFFNumberOfDirectories(tif);
        info->pages = pages ? pages : 1;
        snprintf(info->note, sizeof info->note, "%s; %s; compression %u%s",
                 photometric_name(s.photo), TIFFIsTiled(tif) ? "tiled" : "strips", s.compression,
                 s.planar == PLANARCONFIG_SEPARATE ? "; separate planes" : "");
    }
    TIFFClose(tif);
    return rc;
}

/* Copies one plane-or-interleaved block of samples into the image at (x0, y0). */
static void put_block(struct kiln_image *out, const uint8_t *src, uint32_t bw, uint32_t bh,
                      uint32_t x0, uint32_t y0, int sample, uint32_t spp_in_block)
{
    const size_t bps = out->depth / 8, C = out->channels;
    for (uint32_t y = 0; y < bh && y0 + y < out->height; y++) {
        uint32_t n = bw;
        if (x0 + n > out->width)
            n = out->width - x0;
        uint8_t *d = (uint8_t *)out->data + (size_t)(y0 + y) * out->stride + (size_t)x0 * C * bps;
        const uint8_t *s = src + (size_t)y * bw * spp_in_block * bps;
        if (sample < 0) {
            memcpy(d, s, (size_t)n * C * bps);
        } else {
            for (uint32_t x = 0; x < n; x++)
                memcpy(d + ((size_t)x * C + (size_t)sample) * bps, s + (size_t)x * bps, bps);
        }
    }
}

/* Associated alpha: colour samples were multiplied by alpha; kiln's images carry straight
 * alpha, so divide it out, rounded half up: c = (c * M + a / 2) / a, at most M; 0 where a = 0. */
static void unpremultiply(struct kiln_image *out)
{
    const size_t npx = (size_t)out->width * out->height, C = out->channels;
    const uint32_t M = out->depth == 16 ? 65535u : 255u;
    for (size_t i = 0; i < npx; i++)
        for (size_t c = 0; c + 1 < C; c++) {
            size_t k = i * C + c, ka = i * C + C - 1;
            uint32_t a = out->depth == 16 ? ((uint16_t *)out->data)[ka] : ((uint8_t *)out->data)[ka];
            uint32_t v = out->depth == 16 ? ((uint16_t *)out->data)[k] : ((uint8_t *)out->data)[k];
            uint64_t u = a ? ((uint64_t)v * M + a / 2) / a : 0;
            if (u > M)
                u = M;
            if (out->depth == 16)
                ((uint16_t *)out->data)[k] = (uint16_t)u;
            else
                ((uint8_t *)out->data)[k] = (uint8_t)u;
        }
}

/* The pixel limits saw the image size, not the tile size: a 17x9 image declaring
 * 4294639632x16 tiles made kiln ask for 64 GiB, and libtiff's RGBA reader allocates a tile too.
 * Tiles may overhang the image, not dwarf it: one may hold at most image_bytes (what the image
 * costs in that reader) or TIFF_TILE_FLOOR. */
static int check_tile_size(TIFF *tif, const struct tiff_shape *s, size_t image_bytes,
                           struct kiln_err *err)
{
    if (!TIFFIsTiled(tif))
        return KILN_OK;
    uint32_t tw = 0, th = 0;
    TIFFGetField(tif, TIFFTAG_TILEWIDTH, &tw);
    TIFFGetField(tif, TIFFTAG_TILELENGTH, &th);
    tmsize_t ts = TIFFTileSize(tif);
    if (ts > 0 && (size_t)ts > (image_bytes > TIFF_TILE_FLOOR ? image_bytes : TIFF_TILE_FLOOR))
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "TIFF tiles of %ux%u for a %ux%u image are not supported (a tile may "
                            "hold at most the image or 16 MiB)",
                            tw, th, s->w, s->h);
    return KILN_OK;
}

/* A decode that libtiff called a success but warned had samples missing (on_warning). */
static int check_losses(const struct tiff_mem *m, struct kiln_err *err)
{
    if (!m->losses)
        return KILN_OK;
    return kiln_err_set(err, strstr(m->lost, "Premature E") ? KILN_ETRUNCATED : KILN_ECORRUPT,
                        "TIFF image data is incomplete: %s", m->lost);
}

static int read_direct(TIFF *tif, struct tiff_mem *m, const struct tiff_shape *s,
                       struct kiln_image *out, struct kiln_err *err)
{
    const int separate = s->planar == PLANARCONFIG_SEPARATE;
    const int planes = separate ? s->spp : 1;
    const uint32_t per_block = separate ? 1 : s->spp;
    uint8_t *buf = NULL;
    int rc = KILN_OK;
    if (TIFFIsTiled(tif)) {
        uint32_t tw = 0, th = 0;
        TIFFGetField(tif, TIFFTAG_TILEWIDTH, &tw);
        TIFFGetField(tif, TIFFTAG_TILELENGTH, &th);
        tmsize_t ts = TIFFTileSize(tif);
        size_t need;
        if (!tw || !th || ts <= 0 ||
            !kiln_mul3_size(tw, th, (size_t)per_block * (s->bps / 8), &need) ||
            (size_t)ts < need)
            return kiln_err_set(err, KILN_ECORRUPT, "TIFF tile geometry is inconsistent");
        rc = check_tile_size(tif, s, out->stride * out->height, err);
        if (rc)
            return rc;
        buf = calloc(1, (size_t)ts); /* zeroed: see on_warning */
        if (!buf)
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a TIFF tile");
        for (int p = 0; p < planes && !rc; p++)
            for (uint32_t y = 0; y < s->h && !rc; y += th)
                for (uint32_t x = 0; x < s->w && !rc; x += tw) {
                    if (TIFFReadTile(tif, buf, x, y, 0, (uint16_t)p) < 0)
                        rc = kiln_err_set(err, m->errors ? error_code(m) : KILN_ECORRUPT,
                                          "TIFF tile at %u,%u unreadable: %s", x, y, m->error);
                    else
                        put_block(out, buf, tw, th, x, y, separate ? p : -1, per_block);
                }
    } else {
        tmsize_t ls = TIFFScanlineSize(tif);
        if (ls <= 0 || (size_t)ls < (size_t)s->w * per_block * (s->bps / 8))
            return kiln_err_set(err, KILN_ECORRUPT, "TIFF scanline size is inconsistent");
        buf = calloc(1, (size_t)ls);
        if (!buf)
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a TIFF row");
        for (int p = 0; p < planes && !rc; p++)
            for (uint32_t y = 0; y < s->h && !rc; y++) {
                if (TIFFReadScanline(tif, buf, y, (uint16_t)p) < 0)
                    rc = kiln_err_set(err, m->errors ? error_code(m) : KILN_ECORRUPT,
                                      "TIFF row %u of %u unreadable: %s", y, s->h, m->error);
                else
                    put_block(out, buf, s->w, 1, 0, y, separate ? p : -1, per_block);
            }
    }
    free(buf);
    if (!rc && m->errors)
        rc = kiln_err_set(err, error_code(m), "TIFF %s", m->error);
    if (!rc)
        rc = check_losses(m, err);
    if (!rc && s->invert) {
        /* Min-is-white stores ink: 0 is white. Only the grey channel is inverted. */
        const size_t npx = (size_t)out->width * out->height, C = out->channels;
        if (out->depth == 8)
            for (size_t i = 0; i < npx; i++)
                ((uint8_t *)out->data)[i * C] = (uint8_t)(255u - ((uint8_t *)out->data)[i * C]);
        else
            for (size_t i = 0; i < npx; i++)
                ((uint16_t *)out->data)[i * C] =
                    (uint16_t)(65535u - ((uint16_t *)out->data)[i * C]);
    }
    if (!rc && s->premultiplied && (out->channels == 2 || out->channels == 4))
        unpremultiply(out);
    return rc;
}

static int read_rgba(TIFF *tif, struct tiff_mem *m, const struct tiff_shape *s,
                     struct kiln_image *out, struct kiln_err *err)
{
    int rc = check_tile_size(tif, s, (size_t)s->w * s->h * sizeof(uint32_t), err);
    if (rc)
        return rc;
    uint32_t *raster = calloc((size_t)s->w * s->h, sizeof *raster); /* calloc checks n*size */
    if (!raster)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a %ux%u TIFF raster", s->w, s->h);
    /* Asking for the file's own orientation makes libtiff keep the stored row order; kiln
     * applies the orientation itself, the same way for every format. */
    int ok = TIFFReadRGBAImageOriented(tif, s->w, s->h, raster, s->orientation, 1);
    if (!ok || m->errors)
        rc = kiln_err_set(err, m->errors ? error_code(m) : KILN_ECORRUPT, "TIFF %s",
                          m->errors ? m->error : "image data unreadable");
    if (!rc)
        rc = check_losses(m, err);
    const size_t npx = (size_t)s->w * s->h;
    uint8_t *d = out->data;
    for (size_t i = 0; !rc && i < npx; i++) {
        uint32_t v = raster[i];
        if (out->channels <= 2) {
            *d++ = (uint8_t)TIFFGetR(v);
        } else {
            *d++ = (uint8_t)TIFFGetR(v);
            *d++ = (uint8_t)TIFFGetG(v);
            *d++ = (uint8_t)TIFFGetB(v);
        }
        if (out->channels == 2 || out->channels == 4)
            *d++ = (uint8_t)TIFFGetA(v);
    }
    free(raster);
    return rc;
}

static int tiff_decode_fn(const uint8_t *data, size_t len, const struct kiln_image_info *want,
                          uint32_t denom, struct kiln_image *out, struct kiln_err *err)
{
    if (denom != 1)
        return kiln_err_set(err, KILN_EINTERNAL, "TIFF cannot decode at 1/%u scale", denom);
    struct tiff_mem m;
    TIFF *tif = tiff_open(&m, data, len, err);
    if (!tif)
        return err->code;
    struct tiff_shape s;
    int rc = tiff_shape_of(tif, &m, &s, err);
    if (!rc && (s.w != want->width || s.h != want->height || s.channels != out->channels ||
                s.depth != out->depth || out->width != s.w || out->height != s.h))
        rc = kiln_err_set(err, KILN_EINTERNAL, "TIFF header changed between reads");
    if (!rc)
        rc = s.direct ? read_direct(tif, &m, &s, out, err) : read_rgba(tif, &m, &s, out, err);
    TIFFClose(tif);
    return rc;
}

static void tiff_library_version(char *buf, size_t len)
{
    /* TIFFGetVersion() is "LIBTIFF, Version 4.5.0\n..." */
    const char *v = TIFFGetVersion(), *p = v ? strstr(v, "Version ") : NULL;
    snprintf(buf, len, "%.*s", p ? (int)strcspn(p + 8, "\n") : 7, p ? p + 8 : "unknown");
}

const struct kiln_decoder kiln_decoder_tiff = {
    .name = "tiff",
    .probe = tiff_probe,
    .read_info = tiff_read_info_fn,
    .decode = tiff_decode_fn,
    .library = "libtiff",
    .library_version = tiff_library_version,
};
