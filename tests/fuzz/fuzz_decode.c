/* One image decoder through the interface pack and scan use (formats/decoders/decoder.h), built once per
 * format with FUZZ_FORMAT set to its name: probe and sniff, read_info with limits, the limit
 * check, kiln_decoded_shape and decode at every reduction the header allows, a second decode
 * marked trusted (pack's path after the SHA-256 matched) that must give the same pixels, and
 * orientation with kiln_orient. */
#include <string.h>

#include "../../core/convert.h"
#include "../../formats/decoders/decoder.h"
#include "fuzz.h"

#ifndef FUZZ_FORMAT
#error "FUZZ_FORMAT must name a decoder"
#endif

/* The failure codes formats/decoders/decoder.h allows a decoder to return for bad input (KILN_ENOMEM
 * is not one of them at the harness limits: fuzz.h). */
static int input_code(int rc)
{
    return rc == KILN_ECORRUPT || rc == KILN_ETRUNCATED || rc == KILN_EUNSUPPORTED ||
           rc == KILN_ETOOLARGE;
}

static void check_info(const struct kiln_image_info *info)
{
    FUZZ_CHECK(info->channels >= 1 && info->channels <= 4);
    FUZZ_CHECK(info->depth == 8 || info->depth == 16);
    FUZZ_CHECK(info->orientation >= 1 && info->orientation <= 8);
    FUZZ_CHECK(info->max_scale_denom == 1 || info->max_scale_denom == 2 ||
               info->max_scale_denom == 4 || info->max_scale_denom == 8);
    FUZZ_CHECK(memchr(info->note, '\0', sizeof info->note) != NULL);
    FUZZ_CHECK(info->trusted == 0);
}

static void orient(const struct kiln_image *img, unsigned orientation, struct kiln_image *out)
{
    struct kiln_err err;
    FUZZ_CHECK(kiln_orient(img, orientation, out, &err) == KILN_OK);
    const int swap = orientation >= 5 && orientation <= 8;
    FUZZ_CHECK(out->width == (swap ? img->height : img->width));
    FUZZ_CHECK(out->height == (swap ? img->width : img->height));
    FUZZ_CHECK(out->channels == img->channels && out->depth == img->depth);
}

/* Rows handed over by decode_rows, checked against the whole decode in whole. */
struct rows_seen {
    const struct kiln_image *whole;
    uint32_t next;
};

static int compare_row(void *ctx, uint32_t y, const void *pixels)
{
    struct rows_seen *s = ctx;
    FUZZ_CHECK(y == s->next && y < s->whole->height);
    FUZZ_CHECK(memcmp(pixels, (const uint8_t *)s->whole->data + (size_t)y * s->whole->stride,
                      s->whole->stride) == 0);
    s->next++;
    return 0;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const struct kiln_decoder *dec = kiln_decoder_by_name(FUZZ_FORMAT);
    FUZZ_CHECK(dec != NULL);
    /* What scan does first: pick a decoder by content, or name a format it cannot read. */
    const struct kiln_decoder *found = kiln_decoder_find(data, size);
    if (!found)
        (void)kiln_format_sniff_other(data, size);
    (void)dec->probe(data, size);

    /* pack calls the recorded decoder by name, whatever a probe says, so this one is called
     * on every input. */
    const struct kiln_decode_limits lim = {FUZZ_MAX_PIXELS, FUZZ_MAX_SIDE};
    struct kiln_image_info info;
    struct kiln_err err = {0};
    int rc = dec->read_info(data, size, &lim, &info, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(input_code(rc));
        FUZZ_CHECK(err.msg[0] != '\0');
        return 0;
    }
    check_info(&info);
    const uint32_t shape[] = {info.channels, info.depth, info.stored_depth, info.orientation,
                              info.max_scale_denom, info.pages > 1};
    fuzz_outcome_bytes(shape, sizeof shape);
    fuzz_outcome(0, info.note);
    /* The caller's limit check (core/pipeline/stage_scan.c, core/pipeline/stage_pack.c). */
    if (!info.width || !info.height || (uint64_t)info.width * info.height > lim.max_pixels ||
        info.width > lim.max_side || info.height > lim.max_side)
        return 0;

    struct kiln_image img = {0}, again = {0}, oriented = {0};
    int all_ok = 1;
    for (uint32_t denom = 1; denom <= info.max_scale_denom; denom *= 2) {
        FUZZ_CHECK(kiln_decoded_shape(&info, denom, &img, &err) == KILN_OK);
        FUZZ_CHECK(img.width == kiln_scaled_side(info.width, denom));
        FUZZ_CHECK(img.height == kiln_scaled_side(info.height, denom));
        const size_t bytes = (size_t)img.height * img.stride;
        /* Filled with one pattern before the first decode and another before the second: a
         * decoder that leaves any sample unwritten gives two different images. */
        memset(img.data, 0x00, bytes);
        err.msg[0] = '\0';
        rc = dec->decode(data, size, &info, denom, &img, &err);
        FUZZ_CHECK(rc != KILN_EINTERNAL); /* the header cannot change between two reads */
        fuzz_outcome(rc + 100 * (int)denom, rc ? err.msg : NULL);
        if (rc) {
            FUZZ_CHECK(input_code(rc));
            FUZZ_CHECK(err.msg[0] != '\0');
            all_ok = 0;
            break;
        }
        struct kiln_image_info trusted = info;
        trusted.trusted = 1;
        FUZZ_CHECK(kiln_decoded_shape(&trusted, denom, &again, &err) == KILN_OK);
        memset(again.data, 0xA5, bytes);
        rc = dec->decode(data, size, &trusted, denom, &again, &err);
        if (rc)
            fprintf(stderr, "trusted decode failed where the checked one succeeded: %s\n",
                    err.msg);
        FUZZ_CHECK(rc == KILN_OK);
        FUZZ_CHECK(memcmp(img.data, again.data, bytes) == 0);
        orient(&img, info.orientation, &oriented);
        if (info.orientation == 1 && size)
            orient(&img, 1u + data[size - 1] % 8u, &oriented);
    }
    if (all_ok && dec->decode_rows) {
        /* pack's path for large pictures: the same rows as the whole decode, in order. */
        struct kiln_image_info trusted = info;
        trusted.trusted = 1;
        FUZZ_CHECK(kiln_decoded_shape(&trusted, 1, &again, &err) == KILN_OK);
        FUZZ_CHECK(dec->decode(data, size, &trusted, 1, &again, &err) == KILN_OK);
        struct rows_seen seen = {&again, 0};
        rc = dec->decode_rows(data, size, &trusted, compare_row, &seen, &err);
        FUZZ_CHECK(rc == KILN_OK || rc == KILN_DECODE_ROWS_DECLINED);
        FUZZ_CHECK(rc != KILN_OK || seen.next == again.height);
    }
    if (all_ok)
        fuzz_accept();
    kiln_image_free(&img);
    kiln_image_free(&again);
    kiln_image_free(&oriented);
    return 0;
}
