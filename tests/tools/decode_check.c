/* Test tool: decodes each file named on the command line through kiln's decoder registry and
 * prints one tab-separated line per file, for comparison with published reference values:
 *
 *   name  status  format  width  height  channels  depth  orientation  pages  sha256  crc_expand  crc_identity
 *
 * sha256 covers the decoded samples with 16-bit samples big-endian (the byte order of PNG, PPM
 * and the reference digests in ../shared/testdata/CHECKS.md). crc_expand is the zlib CRC-32 of
 * the samples with 16-bit values cut to their high byte (PngSuite "EXPAND | STRIP_16" results).
 * crc_identity is the CRC-32 of the PNG samples as stored (low bit depths packed, 16-bit
 * big-endian), rebuilt from the decode for non-palette PNGs, "-" otherwise.
 *
 * With --raw FILE it writes the decoded samples themselves (16-bit big-endian) to stdout.
 * --library first (before --raw) decodes with the image library's own code only, not kiln's
 * faster path for PNG image data (formats/decoders/png_idat.h), to compare the two; --trusted
 * decodes as pack does after the SHA-256 matched (format checksums may be skipped). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <zlib.h>

#include "../../core/sha256.h"
#include "../../formats/decoders/decoder.h"
#include "../../formats/sources/source.h"

static void print_result(const char *name, const char *status, const char *format,
                         const struct kiln_image_info *info)
{
    printf("%s\t%s\t%s\t%u\t%u\t%u\t%u\t%u\t%u", name, status, format, info ? info->width : 0,
           info ? info->height : 0, info ? info->channels : 0, info ? info->depth : 0,
           info ? info->orientation : 0, info ? info->pages : 0);
}

/* PNG colour type and bit depth from IHDR (bytes 24 and 25 of a well-formed file). */
static int png_ihdr(const uint8_t *d, size_t n, int *bits, int *type)
{
    if (n < 26 || memcmp(d + 12, "IHDR", 4) != 0)
        return -1;
    *bits = d[24];
    *type = d[25];
    return 0;
}

static unsigned long identity_crc(const struct kiln_image *img, int bits, int type)
{
    /* Stored channels: grey 1, RGB 3, grey+alpha 2, RGBA 4; kiln adds alpha for tRNS. */
    const unsigned stored = type == 0 ? 1 : type == 2 ? 3 : type == 4 ? 2 : 4;
    const size_t w = img->width, C = img->channels;
    unsigned long crc = crc32(0L, Z_NULL, 0);
    size_t rowbytes = (w * stored * (size_t)bits + 7) / 8;
    uint8_t *row = calloc(rowbytes ? rowbytes : 1, 1);
    if (!row)
        return 0;
    for (uint32_t y = 0; y < img->height; y++) {
        memset(row, 0, rowbytes);
        size_t bit = 0;
        for (size_t x = 0; x < w; x++)
            for (unsigned c = 0; c < stored; c++) {
                size_t i = ((size_t)y * w + x) * C + c;
                if (bits == 16) {
                    uint16_t v = ((const uint16_t *)img->data)[i];
                    row[bit / 8] = (uint8_t)(v >> 8);
                    row[bit / 8 + 1] = (uint8_t)v;
                } else {
                    uint32_t v = ((const uint8_t *)img->data)[i];
                    if (bits < 8)
                        v = v * ((1u << bits) - 1u) / 255u; /* undo the expansion to 8 bits */
                    row[bit / 8] |= (uint8_t)(v << (8 - bits - bit % 8));
                }
                bit += (size_t)bits;
            }
        crc = crc32(crc, row, (uInt)rowbytes);
    }
    free(row);
    return crc;
}

int main(int argc, char **argv)
{
    int first = 1, library = 0, trusted = 0;
    for (; first < argc; first++) {
        if (strcmp(argv[first], "--library") == 0)
            library = 1;
        else if (strcmp(argv[first], "--trusted") == 0)
            trusted = 1;
        else
            break;
    }
    const int raw = argc == first + 2 && strcmp(argv[first], "--raw") == 0;
    for (int a = raw ? first + 1 : first; a < argc; a++) {
        const char *name = strrchr(argv[a], '/') ? strrchr(argv[a], '/') + 1 : argv[a];
        uint8_t *data;
        size_t size;
        struct kiln_err err;
        if (kiln_source_read_file(argv[a], 0, &data, &size, &err)) {
            print_result(name, "unreadable", "-", NULL);
            printf("\t-\t-\t-\n");
            continue;
        }
        const struct kiln_decoder *dec = kiln_decoder_find(data, size);
        struct kiln_image_info info;
        struct kiln_image img = {0};
        int rc = dec ? dec->read_info(data, size, NULL, &info, &err) : -1;
        if (rc == 0 && (uint64_t)info.width * info.height > (1ull << 28))
            rc = KILN_ETOOLARGE;
        if (rc == 0) {
            info.library_only = (uint32_t)library;
            info.trusted = (uint32_t)trusted;
            rc = kiln_decoded_shape(&info, 1, &img, &err);
        }
        if (rc == 0)
            rc = dec->decode(data, size, &info, 1, &img, &err);
        if (rc) {
            print_result(name, rc < 0 ? "not-image" : kiln_code_name(rc), dec ? dec->name : "-",
                         NULL);
            printf("\t-\t-\t-\n");
            fprintf(stderr, "%s: %s\n", name, rc < 0 ? "no decoder" : err.msg);
        } else {
            const size_t n = (size_t)img.width * img.height * img.channels;
            uint8_t *be = malloc(n * (img.depth / 8) + 1), *cut = malloc(n + 1);
            if (!be || !cut)
                return 1;
            for (size_t i = 0; i < n; i++) {
                if (img.depth == 16) {
                    uint16_t v = ((const uint16_t *)img.data)[i];
                    be[2 * i] = (uint8_t)(v >> 8);
                    be[2 * i + 1] = (uint8_t)v;
                    cut[i] = (uint8_t)(v >> 8);
                } else {
                    be[i] = cut[i] = ((const uint8_t *)img.data)[i];
                }
            }
            if (raw) {
                fwrite(be, 1, n * (img.depth / 8), stdout);
                free(be);
                free(cut);
                kiln_image_free(&img);
                free(data);
                continue;
            }
            uint8_t d[KILN_SHA256_LEN];
            char hex[KILN_SHA256_HEX];
            if (kiln_sha256_buf(be, n * (img.depth / 8), d, &err) != KILN_OK)
                snprintf(hex, sizeof hex, "(sha256 failed: %s)", err.msg);
            else
                kiln_sha256_hex(d, hex);
            print_result(name, "ok", dec->name, &info);
            printf("\t%s\t%lu", hex, crc32(crc32(0L, Z_NULL, 0), cut, (uInt)n));
            int bits, type;
            if (strcmp(dec->name, "png") == 0 && png_ihdr(data, size, &bits, &type) == 0 &&
                type != 3)
                printf("\t%lu\n", identity_crc(&img, bits, type));
            else
                printf("\t-\n");
            free(be);
            free(cut);
        }
        kiln_image_free(&img);
        free(data);
    }
    return fflush(stdout) == 0 ? 0 : 1;
}
