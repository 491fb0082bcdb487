/* Test tool: runs kiln's resampler (core/resize.c) on one raw image, for the comparison with
 * PIL and numpy in tests/ref/resize_reference.py.
 *
 *   kiln-resize-check IN_W IN_H CHANNELS DEPTH FILTER OUT_W OUT_H [BOX_X BOX_Y BOX_W BOX_H]
 *
 * Standard input holds exactly IN_W x IN_H x CHANNELS interleaved samples, rows top to bottom:
 * bytes for DEPTH 8, host-order 16-bit integers for DEPTH 16. FILTER is a kiln filter name
 * (nearest, box, bilinear, bicubic, lanczos3). Without a box the whole image is resampled.
 * Standard output receives the OUT_W x OUT_H x CHANNELS result in the same form. Any error
 * prints a message on standard error and exits 1. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/err.h"
#include "../../core/image.h"
#include "../../core/resize.h"

static _Noreturn void usage(void)
{
    fputs("usage: kiln-resize-check IN_W IN_H CHANNELS DEPTH FILTER OUT_W OUT_H "
          "[BOX_X BOX_Y BOX_W BOX_H] <in.raw >out.raw\n",
          stderr);
    exit(1);
}

static _Noreturn void die(const char *what, const char *detail)
{
    fprintf(stderr, "kiln-resize-check: %s%s%s\n", what, detail ? ": " : "", detail ? detail : "");
    exit(1);
}

/* A decimal number in [lo, hi]; anything else (sign, suffix, overflow) is an error. */
static uint32_t parse_u32(const char *text, const char *name, uint32_t lo, uint32_t hi)
{
    char *end;
    errno = 0;
    unsigned long v = text[0] >= '0' && text[0] <= '9' ? strtoul(text, &end, 10) : 0;
    if (!(text[0] >= '0' && text[0] <= '9') || errno || *end || v < lo || v > hi) {
        fprintf(stderr, "kiln-resize-check: %s must be a number from %u to %u, not '%s'\n", name,
                lo, hi, text);
        exit(1);
    }
    return (uint32_t)v;
}

int main(int argc, char **argv)
{
    if (argc != 8 && argc != 12)
        usage();
    const uint32_t in_w = parse_u32(argv[1], "IN_W", 1, 65535);
    const uint32_t in_h = parse_u32(argv[2], "IN_H", 1, 65535);
    const uint32_t channels = parse_u32(argv[3], "CHANNELS", 1, 4);
    const uint32_t depth = parse_u32(argv[4], "DEPTH", 8, 16);
    if (depth != 8 && depth != 16)
        die("DEPTH must be 8 or 16", argv[4]);
    const int filter = kiln_filter_parse(argv[5]);
    if (filter < 0)
        die("unknown filter (nearest, box, bilinear, bicubic, lanczos3)", argv[5]);
    const uint32_t out_w = parse_u32(argv[6], "OUT_W", 1, 65535);
    const uint32_t out_h = parse_u32(argv[7], "OUT_H", 1, 65535);
    struct kiln_box box = {0, 0, in_w, in_h};
    if (argc == 12) {
        box.x = parse_u32(argv[8], "BOX_X", 0, in_w - 1);
        box.y = parse_u32(argv[9], "BOX_Y", 0, in_h - 1);
        box.w = parse_u32(argv[10], "BOX_W", 1, in_w - box.x);
        box.h = parse_u32(argv[11], "BOX_H", 1, in_h - box.y);
    }

    struct kiln_err err = {0};
    struct kiln_image in = {0}, out = {0};
    if (kiln_image_reshape(&in, in_w, in_h, channels, depth, &err))
        die("cannot hold the input", err.msg);
    const size_t in_bytes = in.stride * in_h;
    if (fread(in.data, 1, in_bytes, stdin) != in_bytes) {
        if (ferror(stdin))
            die("cannot read standard input", strerror(errno));
        die("standard input is shorter than the image", NULL);
    }
    if (getchar() != EOF)
        die("standard input is longer than the image", NULL);

    struct kiln_resizer rs;
    kiln_resizer_init(&rs);
    if (kiln_resize(&rs, &in, &box, out_w, out_h, filter, &out, &err))
        die("resize failed", err.msg);
    const size_t out_bytes = out.stride * out.height;
    if (fwrite(out.data, 1, out_bytes, stdout) != out_bytes || fflush(stdout) != 0)
        die("cannot write standard output", strerror(errno));
    kiln_resizer_free(&rs);
    kiln_image_free(&in);
    kiln_image_free(&out);
    if (fclose(stdout) != 0)
        die("cannot close standard output", strerror(errno));
    return 0;
}
