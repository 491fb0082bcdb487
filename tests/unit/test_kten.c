/* Unit tests for formats/kten: the written bytes follow docs/format.md offset by offset, the
 * reader accepts them, and corruption, truncation and bad magic are caught. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../formats/files/kten.h"

static char tmpdir[64];
static char path[128];

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-kten-XXXXXX");
    if (!mkdtemp(tmpdir))
        return -1;
    snprintf(path, sizeof path, "%s/train.kten", tmpdir);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unlink(path);
    return rmdir(tmpdir);
}

/* Little-endian readers written from docs/format.md ("every integer is little-endian"). */
static uint32_t le32(const uint8_t *p)
{
    return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
}

static uint64_t le64(const uint8_t *p)
{
    uint64_t v = 0;
    for (int i = 7; i >= 0; i--)
        v = v << 8 | p[i];
    return v;
}

static uint8_t *slurp(const char *p, size_t *len)
{
    FILE *f = fopen(p, "rb");
    assert_non_null(f);
    assert_int_equal(fseek(f, 0, SEEK_END), 0);
    long n = ftell(f);
    assert_true(n >= 0);
    rewind(f);
    uint8_t *buf = malloc((size_t)n + 1);
    assert_non_null(buf);
    assert_int_equal(fread(buf, 1, (size_t)n, f), (size_t)n);
    fclose(f);
    *len = (size_t)n;
    return buf;
}

static void spit(const char *p, const uint8_t *buf, size_t len)
{
    FILE *f = fopen(p, "wb");
    assert_non_null(f);
    assert_int_equal(fwrite(buf, 1, len, f), len);
    assert_int_equal(fclose(f), 0);
}

static int all_zero(const uint8_t *p, size_t n)
{
    for (size_t i = 0; i < n; i++)
        if (p[i])
            return 0;
    return 1;
}

/* The test file: N = 4 records of 32x40x3 u8 images, i32 labels and u32 item rows. */
enum { N = 4, H = 32, W = 40, C = 3 };
static const char metadata[] = "{\"format\":\"kiln tensor file\",\"split\":\"train\",\"records\":4}";

static uint8_t images[N * H * W * C];
static uint8_t labels[N * 4], items[N * 4];

static void make_data(void)
{
    uint32_t x = 12345; /* fixed-seed LCG (Numerical Recipes constants, from memory) */
    for (size_t i = 0; i < sizeof images; i++) {
        x = x * 1664525u + 1013904223u;
        images[i] = (uint8_t)(x >> 24);
    }
    static const int32_t lab[N] = {2, -1, 0, 1};
    for (int i = 0; i < N; i++)
        for (int b = 0; b < 4; b++) {
            labels[4 * i + b] = (uint8_t)((uint32_t)lab[i] >> (8 * b)); /* little-endian */
            items[4 * i + b] = (uint8_t)((uint32_t)(7 * i + 100000) >> (8 * b));
        }
}

static void write_file(const char *p)
{
    make_data();
    struct kiln_kten_array arrays[3];
    memset(arrays, 0, sizeof arrays);
    strcpy(arrays[0].name, "images");
    arrays[0].dtype = KILN_DT_U8;
    arrays[0].rank = 4;
    arrays[0].dims[0] = N;
    arrays[0].dims[1] = H;
    arrays[0].dims[2] = W;
    arrays[0].dims[3] = C;
    strcpy(arrays[1].name, "labels");
    arrays[1].dtype = KILN_DT_I32;
    arrays[1].rank = 1;
    arrays[1].dims[0] = N;
    strcpy(arrays[2].name, "item");
    arrays[2].dtype = KILN_DT_U32;
    arrays[2].rank = 1;
    arrays[2].dims[0] = N;
    struct kiln_kten_writer w;
    struct kiln_err err = {0};
    assert_int_equal(kiln_kten_create(&w, p, arrays, 3, &err), KILN_OK);
    /* records written out of order and in pieces, as workers do */
    const size_t rec = H * W * C;
    for (int i = N - 1; i >= 0; i--)
        assert_int_equal(kiln_kten_write(&w, 0, (uint64_t)i * rec, images + i * rec, rec, &err),
                         KILN_OK);
    assert_int_equal(kiln_kten_write(&w, 1, 8, labels + 8, 8, &err), KILN_OK);
    assert_int_equal(kiln_kten_write(&w, 1, 0, labels, 8, &err), KILN_OK);
    assert_int_equal(kiln_kten_write(&w, 2, 0, items, sizeof items, &err), KILN_OK);
    /* reading back through the writer gives what was written */
    uint8_t back[8];
    assert_int_equal(kiln_kten_read(&w, 1, 4, back, 8, &err), KILN_OK);
    assert_memory_equal(back, labels + 4, 8);
    /* writes outside an array are refused */
    assert_int_not_equal(kiln_kten_write(&w, 1, 12, labels, 8, &err), KILN_OK);
    assert_int_not_equal(kiln_kten_write(&w, 2, 17, items, 1, &err), KILN_OK);
    assert_int_equal(kiln_kten_finish(&w, metadata, strlen(metadata), &err), KILN_OK);
}

static uint64_t align4096(uint64_t v)
{
    return (v + 4095) / 4096 * 4096;
}

/* Every field of docs/format.md's tables, read from the raw bytes. */
static void test_layout_matches_format_md(void **state)
{
    (void)state;
    write_file(path);
    size_t len;
    uint8_t *b = slurp(path, &len);
    /* header (docs/format.md, "Header") */
    static const uint8_t magic[8] = {0x4B, 0x54, 0x45, 0x4E, 0x0D, 0x0A, 0x1A, 0x0A};
    assert_memory_equal(b, magic, 8);
    assert_int_equal(le32(b + 8), 1);    /* format version */
    assert_int_equal(le32(b + 12), 4096); /* header size */
    assert_int_equal(le32(b + 16), 3);    /* array count */
    assert_int_equal(le32(b + 20), 128);  /* table entry size */
    const uint64_t meta_off = le64(b + 24), meta_len = le64(b + 32);
    assert_int_equal(meta_off % 4096, 0);
    assert_int_equal(meta_len, strlen(metadata));
    assert_int_equal(le64(b + 72), len); /* file size */
    assert_int_equal(meta_off + meta_len, len);
    assert_int_equal(le32(b + 80), 4096); /* alignment */
    assert_true(all_zero(b + 84, 44));    /* reserved */
    assert_memory_equal(b + meta_off, metadata, meta_len);
    /* the metadata SHA-256, computed here over the bytes read with fread */
    uint8_t d[KILN_SHA256_LEN];
    struct kiln_err err = {0};
    assert_int_equal(kiln_sha256_buf(b + meta_off, meta_len, d, &err), KILN_OK);
    assert_memory_equal(b + 40, d, KILN_SHA256_LEN);

    /* array table (docs/format.md, "Array table entry") */
    static const char *const names[3] = {"images", "labels", "item"};
    static const uint8_t dtypes[3] = {1, 3, 4}; /* u8, i32, u32 */
    static const uint8_t ranks[3] = {4, 1, 1};
    static const uint64_t dims[3][4] = {{N, H, W, C}, {N, 0, 0, 0}, {N, 0, 0, 0}};
    static const uint64_t elem[3] = {1, 4, 4};
    const uint8_t *data[3] = {images, labels, items};
    uint64_t expect_off = 4096; /* "4096: the first array's data" */
    for (int i = 0; i < 3; i++) {
        const uint8_t *e = b + 128 + 128 * i;
        char name[17] = {0};
        memcpy(name, e, 16);
        assert_string_equal(name, names[i]);
        assert_true(all_zero(e + strlen(names[i]), 16 - strlen(names[i]))); /* zero padded */
        assert_int_equal(e[16], dtypes[i]);
        assert_int_equal(e[17], ranks[i]);
        assert_true(all_zero(e + 18, 6));
        uint64_t product = elem[i];
        for (int k = 0; k < 4; k++) {
            assert_int_equal(le64(e + 24 + 8 * k), dims[i][k]);
            if (k < ranks[i])
                product *= dims[i][k];
        }
        const uint64_t off = le64(e + 56), alen = le64(e + 64);
        assert_int_equal(off % 4096, 0);
        assert_int_equal(off, expect_off);
        assert_int_equal(alen, product); /* product of dims x dtype size */
        assert_true(off + alen <= meta_off);
        assert_memory_equal(b + off, data[i], alen);
        /* per-array SHA-256 against an independent digest of the raw bytes */
        assert_int_equal(kiln_sha256_buf(b + off, alen, d, &err), KILN_OK);
        assert_memory_equal(e + 72, d, KILN_SHA256_LEN);
        assert_true(all_zero(e + 104, 24));
        /* "zero padding up to the next multiple of 4096" */
        const uint64_t next = align4096(off + alen);
        assert_true(all_zero(b + off + alen, next - off - alen));
        expect_off = next;
    }
    assert_int_equal(meta_off, expect_off);
    /* unused table entries and the rest of the header area are zero */
    assert_true(all_zero(b + 128 + 3 * 128, 4096 - 128 - 3 * 128));
    /* the i32 label -1 is stored as FF FF FF FF (two's complement, little-endian) */
    const uint64_t loff = le64(b + 128 + 128 + 56);
    assert_int_equal(le32(b + loff + 4), 0xFFFFFFFFu);
    assert_int_equal(le32(b + loff), 2);
    free(b);
}

static void test_open_and_check(void **state)
{
    (void)state;
    write_file(path);
    struct kiln_kten_info info;
    struct kiln_err err = {0};
    assert_int_equal(kiln_kten_open(path, &info, &err), KILN_OK);
    struct stat st;
    assert_int_equal(stat(path, &st), 0);
    assert_int_equal(info.version, 1);
    assert_int_equal(info.file_size, (uint64_t)st.st_size);
    assert_int_equal(info.narrays, 3);
    assert_string_equal(info.metadata, metadata);
    assert_int_equal(info.meta_length, strlen(metadata));
    assert_int_equal(kiln_kten_find(&info, "labels"), 1);
    assert_int_equal(kiln_kten_find(&info, "item"), 2);
    assert_int_equal(kiln_kten_find(&info, "nope"), -1);
    const struct kiln_kten_array *im = &info.arrays[0];
    assert_string_equal(im->name, "images");
    assert_int_equal(im->dtype, KILN_DT_U8);
    assert_int_equal(im->rank, 4);
    assert_int_equal(im->dims[2], W);
    assert_int_equal(im->length, (uint64_t)N * H * W * C);
    uint8_t d[KILN_SHA256_LEN];
    assert_int_equal(kiln_sha256_buf(images, sizeof images, d, &err), KILN_OK);
    assert_memory_equal(im->sha256, d, KILN_SHA256_LEN);
    uint32_t bad = 123;
    assert_int_equal(kiln_kten_check(path, &info, &bad, &err), KILN_OK);
    assert_int_equal(bad, 0);

    /* flip one byte inside "labels" (array 1): only its bit is set */
    size_t len;
    uint8_t *b = slurp(path, &len);
    const uint64_t loff = info.arrays[1].offset;
    b[loff + 5] ^= 0x01;
    spit(path, b, len);
    assert_int_equal(kiln_kten_check(path, &info, &bad, &err), KILN_EMISMATCH);
    assert_int_equal(bad, 1u << 1);
    assert_non_null(strstr(err.msg, "labels"));
    /* and one inside the last image record as well: bits 0 and 1 */
    b[info.arrays[0].offset + info.arrays[0].length - 1] ^= 0x80;
    spit(path, b, len);
    assert_int_equal(kiln_kten_check(path, &info, &bad, &err), KILN_EMISMATCH);
    assert_int_equal(bad, (1u << 0) | (1u << 1));
    /* a flipped padding byte is not inside any array or the metadata */
    b[loff + 5] ^= 0x01;
    b[info.arrays[0].offset + info.arrays[0].length - 1] ^= 0x80;
    b[loff + info.arrays[1].length + 100] ^= 0x01;
    spit(path, b, len);
    assert_int_equal(kiln_kten_check(path, &info, &bad, &err), KILN_OK);
    assert_int_equal(bad, 0);
    /* a changed metadata byte sets bit 31 */
    b[loff + info.arrays[1].length + 100] ^= 0x01;
    b[info.meta_offset + 2] ^= 0x20;
    spit(path, b, len);
    assert_int_equal(kiln_kten_check(path, &info, &bad, &err), KILN_EMISMATCH);
    assert_int_equal(bad, 1u << 31);
    free(b);
    kiln_kten_info_free(&info);
}

/* Rewrites the file with one change and expects kiln_kten_open to refuse it with code. */
static void expect_rejected(const uint8_t *good, size_t len, size_t at, uint8_t value,
                            size_t newlen, int code)
{
    uint8_t *b = malloc(len);
    assert_non_null(b);
    memcpy(b, good, len);
    if (at < len)
        b[at] = value;
    spit(path, b, newlen);
    struct kiln_kten_info info;
    struct kiln_err err = {0};
    assert_int_equal(kiln_kten_open(path, &info, &err), code);
    assert_null(info.metadata);
    free(b);
}

static void test_rejects(void **state)
{
    (void)state;
    write_file(path);
    size_t len;
    uint8_t *good = slurp(path, &len);
    const size_t none = SIZE_MAX;
    /* truncated: one byte short of the recorded size, inside the header, empty */
    expect_rejected(good, len, none, 0, len - 1, KILN_ECORRUPT);
    expect_rejected(good, len, none, 0, 100, KILN_ECORRUPT);
    expect_rejected(good, len, none, 0, 0, KILN_ECORRUPT);
    /* bad magic: 'K' -> 'k', and the line-ending conversion CR LF -> LF the magic guards
     * against (docs/format.md) shows up as a changed byte 4 */
    expect_rejected(good, len, 0, 'k', len, KILN_ECORRUPT);
    expect_rejected(good, len, 4, 0x0A, len, KILN_ECORRUPT);
    /* unknown version */
    expect_rejected(good, len, 8, 2, len, KILN_EUNSUPPORTED);
    /* header size, entry size and alignment must be the documented constants */
    expect_rejected(good, len, 13, 0x20, len, KILN_ECORRUPT);
    expect_rejected(good, len, 20, 64, len, KILN_ECORRUPT);
    expect_rejected(good, len, 81, 0x20, len, KILN_ECORRUPT);
    /* more arrays than the table holds */
    expect_rejected(good, len, 16, 32, len, KILN_ECORRUPT);
    /* a dim that disagrees with the length, an unknown dtype, rank 0 and 5 */
    expect_rejected(good, len, 128 + 24, N + 1, len, KILN_ECORRUPT);
    expect_rejected(good, len, 128 + 16, 9, len, KILN_ECORRUPT);
    expect_rejected(good, len, 128 + 17, 0, len, KILN_ECORRUPT);
    expect_rejected(good, len, 128 + 17, 5, len, KILN_ECORRUPT);
    /* an array offset that is not a multiple of 4096 */
    expect_rejected(good, len, 128 + 56, 0x01, len, KILN_ECORRUPT);
    /* a file size field that disagrees with the file */
    expect_rejected(good, len, 72, (uint8_t)(good[72] + 1), len, KILN_ECORRUPT);
    /* the unchanged bytes are accepted again */
    spit(path, good, len);
    struct kiln_kten_info info;
    struct kiln_err err = {0};
    assert_int_equal(kiln_kten_open(path, &info, &err), KILN_OK);
    kiln_kten_info_free(&info);
    free(good);
}

/* A 16-character name fills its field with no terminator (docs/format.md); more arrays than
 * the 31 table entries and overflowing sizes are refused. */
static void test_names_and_limits(void **state)
{
    (void)state;
    struct kiln_kten_array a[32];
    memset(a, 0, sizeof a);
    for (int i = 0; i < 32; i++) {
        snprintf(a[i].name, sizeof a[i].name, "a%02d", i);
        a[i].dtype = KILN_DT_U16;
        a[i].rank = 2;
        a[i].dims[0] = 3;
        a[i].dims[1] = 5;
    }
    strcpy(a[0].name, "abcdefghijklmnop");
    struct kiln_kten_writer w;
    struct kiln_err err = {0};
    assert_int_equal(kiln_kten_create(&w, path, a, 32, &err), KILN_EINVAL);
    assert_int_equal(kiln_kten_create(&w, path, a, 1, &err), KILN_OK);
    const uint8_t px[30] = {1, 2, 3};
    assert_int_equal(kiln_kten_write(&w, 0, 0, px, sizeof px, &err), KILN_OK);
    assert_int_equal(kiln_kten_finish(&w, "{}", 2, &err), KILN_OK);
    size_t len;
    uint8_t *b = slurp(path, &len);
    assert_memory_equal(b + 128, "abcdefghijklmnop", 16);
    assert_int_equal(b[128 + 16], 2); /* dtype u16 right after the name */
    assert_int_equal(le64(b + 128 + 64), 3 * 5 * 2);
    assert_int_equal(len, 4096 + 4096 + 2); /* one page of header, one of data, "{}" */
    free(b);
    struct kiln_kten_info info;
    assert_int_equal(kiln_kten_open(path, &info, &err), KILN_OK);
    assert_string_equal(info.arrays[0].name, "abcdefghijklmnop");
    kiln_kten_info_free(&info);
    /* sizes whose byte length overflows 64 bits are refused before any file is made */
    struct kiln_kten_array huge = a[1];
    huge.dims[0] = (uint64_t)1 << 40;
    huge.dims[1] = (uint64_t)1 << 40;
    assert_int_equal(kiln_kten_create(&w, path, &huge, 1, &err), KILN_ENOMEM);
    /* dtype names */
    assert_string_equal(kiln_dtype_name(KILN_DT_F32), "f32");
    assert_int_equal(kiln_dtype_parse("i32"), KILN_DT_I32);
    assert_int_equal(kiln_dtype_size(KILN_DT_U16), 2);
    assert_int_equal(kiln_dtype_size(0), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_layout_matches_format_md),
        cmocka_unit_test(test_open_and_check),
        cmocka_unit_test(test_rejects),
        cmocka_unit_test(test_names_and_limits),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
