/* Unit tests for formats/catalog_csv: hostile names round-trip through catalog.csv; bad rows
 * are reported with file:line. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/fpstore.h"

static char tmpdir[64];
static char path[128];

static int setup(void **state)
{
    (void)state;
    strcpy(tmpdir, "/tmp/kiln-test-catcsv-XXXXXX");
    if (!mkdtemp(tmpdir))
        return -1;
    snprintf(path, sizeof path, "%s/catalog.csv", tmpdir);
    return 0;
}

static int teardown(void **state)
{
    (void)state;
    unlink(path);
    return rmdir(tmpdir);
}

/* Names that break naive CSV, JSON or UTF-8 handling. */
static const char *const hostile[] = {
    "plain.png",
    "comma,name.png",
    "quote\"name\".png",
    "new\nline.png",
    "cr\rlf\r\n.png",
    "latin1-caf\xe9.png",          /* not UTF-8 */
    "overlong-\xc0\xaf.png",       /* not UTF-8 (RFC 3629) */
    "100%.png",                    /* the escape character itself */
    "%41.png",                     /* looks like an escape */
    "utf8-\xc3\xa9\xf0\x9f\x98\x80.png", /* valid UTF-8, kept */
    " lead and trail ",
    "tab\there",
    "\"\"",
    ",",
};
#define NHOSTILE (sizeof hostile / sizeof hostile[0])

static void fill_digest(uint8_t *d, unsigned seed)
{
    for (int i = 0; i < KILN_SHA256_LEN; i++)
        d[i] = (uint8_t)(seed * 131u + (unsigned)i * 17u + 1u);
}

/* A fingerprint with every field in use (kiln_nearfp_decode accepts it). */
static void fill_fingerprint(struct kiln_nearfp *fp, unsigned seed)
{
    memset(fp, 0, sizeof *fp);
    fp->hash = (UINT64_C(0x9e3779b97f4a7c15) * (seed + 1)) & ~UINT64_C(1);
    fp->centre = (UINT64_C(0xc2b2ae3d27d4eb4f) * (seed + 3)) & ~UINT64_C(1);
    fp->info = (uint16_t)(seed % 3 == 0 ? 5 : 100 + seed * 977u);
    fp->flags = seed % 3 == 0 ? KILN_NEARFP_LOWINFO : 0;
    if (seed % 2) {
        fp->chroma_scale = 40000u + seed;
        for (int i = 0; i < 16; i++) {
            fp->chroma[i][0] = (int8_t)((int)(seed * 7 + (unsigned)i * 13) % 255 - 127);
            fp->chroma[i][1] = (int8_t)(i % 2 ? -127 : 127);
        }
    }
    for (int i = 0; i < 256; i++)
        fp->thumb[i] = (uint8_t)(seed * 31u + (unsigned)i * 7u);
}

/* A catalogue where every column holds something: ok rows with image fields, pixels,
 * fingerprints and a split; non-ok rows of several kinds with reasons and no split. */
static void build_catalog(struct kiln_catalog *cat)
{
    struct kiln_err err = {0};
    kiln_catalog_init(cat);
    assert_int_equal(kiln_fpstore_open(&cat->fps, tmpdir, &err), KILN_OK);
    cat->fps_close = kiln_fpstore_close;
    for (unsigned i = 0; i < NHOSTILE; i++) {
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        const char *h = hostile[i], *h2 = hostile[(i + 3) % NHOSTILE];
        it.source = i % 2 ? h2 : "src,dir";
        it.path = h;
        it.member = i % 3 == 0 ? h2 : "";
        it.label = i % 4 == 3 ? "" : hostile[(i + 5) % NHOSTILE];
        it.group = i % 5 == 0 ? "" : hostile[(i + 7) % NHOSTILE];
        it.size = 1000u + i * 4096u + (i == 7 ? UINT64_C(1) << 40 : 0);
        fill_digest(it.sha256, i);
        it.has_sha = 1;
        it.class_index = -1;
        it.split = KILN_SPLIT_NONE;
        it.fp_slot = KILN_FP_NONE;
        if (i % 4 != 1) {
            it.status = KILN_ST_OK;
            it.format = i % 2 ? "png" : "jpeg";
            it.width = 1 + i * 97u;
            it.height = 1 + i * 53u;
            it.channels = (uint8_t)(1 + i % 4);
            it.depth = i % 2 ? 16 : 8;
            it.stored_depth = (uint8_t)(i % 2 ? 16 : (i % 3 ? 8 : 1));
            it.orientation = (uint8_t)(1 + i % 8);
            it.pages = (uint16_t)(1 + i % 3);
            it.class_index = it.label[0] ? (int32_t)i : -1;
            it.has_pixels = 1;
            fill_digest(it.pixel_sha256, 1000 + i);
            if (i % 5 != 4) {
                struct kiln_nearfp fp;
                fill_fingerprint(&fp, i);
                assert_int_equal(kiln_fpstore_put(cat->fps, &fp, &it.fp_slot, &err), KILN_OK);
            }
            if (i % 2) {
                it.has_record = 1;
                for (int k = 0; k < KILN_RECORD_DIGEST_LEN; k++)
                    it.record_digest[k] = (uint8_t)(i == 3 ? (unsigned)k : 255u - (unsigned)k * i);
            }
            it.split = (int8_t)(i % 3);
            it.unit_key = UINT64_C(0x0123456789abcdef) * (i + 1);
            if (i == 2) /* small values need their leading zeros kept */
                it.unit_key = 0x2a;
        } else {
            static const int bad[] = {KILN_ST_CORRUPT, KILN_ST_NOT_IMAGE, KILN_ST_EMPTY,
                                      KILN_ST_TRUNCATED};
            it.status = (uint8_t)bad[(i / 4) % 4];
            it.reason = hostile[(i + 2) % NHOSTILE];
            if (it.status == KILN_ST_EMPTY) {
                it.size = 0;
                /* a row whose bytes were never read (as for a symlink) has no digest */
                memset(it.sha256, 0, sizeof it.sha256);
                it.has_sha = 0;
            }
            if (it.status == KILN_ST_TRUNCATED) {
                /* header fields known, pixels not */
                it.format = "png";
                it.width = 640;
                it.height = 480;
                it.channels = 3;
                it.depth = 8;
                it.stored_depth = 8;
                it.orientation = 1;
                it.pages = 1;
            }
        }
        assert_int_equal(kiln_catalog_add(cat, &it, &err), KILN_OK);
    }
}

static void assert_items_equal(const struct kiln_catalog *ca, const struct kiln_item *a,
                               const struct kiln_catalog *cb, const struct kiln_item *b)
{
    assert_string_equal(a->source, b->source);
    assert_string_equal(a->path, b->path);
    assert_string_equal(a->member, b->member);
    assert_string_equal(a->format, b->format);
    assert_string_equal(a->label, b->label);
    assert_string_equal(a->group, b->group);
    assert_string_equal(a->reason, b->reason);
    assert_int_equal(a->size, b->size);
    assert_int_equal(a->fp_slot == KILN_FP_NONE, b->fp_slot == KILN_FP_NONE);
    if (a->fp_slot != KILN_FP_NONE) {
        struct kiln_nearfp fa, fb;
        uint8_t ea[KILN_NEARFP_BYTES], eb[KILN_NEARFP_BYTES];
        struct kiln_err err = {0};
        assert_int_equal(kiln_fpstore_get(ca->fps, a->fp_slot, &fa, &err), KILN_OK);
        assert_int_equal(kiln_fpstore_get(cb->fps, b->fp_slot, &fb, &err), KILN_OK);
        kiln_nearfp_encode(&fa, ea);
        kiln_nearfp_encode(&fb, eb);
        assert_memory_equal(ea, eb, KILN_NEARFP_BYTES);
    }
    assert_int_equal(a->has_record, b->has_record);
    if (a->has_record)
        assert_memory_equal(a->record_digest, b->record_digest, KILN_RECORD_DIGEST_LEN);
    assert_int_equal(a->unit_key, b->unit_key);
    assert_memory_equal(a->sha256, b->sha256, KILN_SHA256_LEN);
    assert_memory_equal(a->pixel_sha256, b->pixel_sha256, KILN_SHA256_LEN);
    assert_int_equal(a->width, b->width);
    assert_int_equal(a->height, b->height);
    assert_int_equal(a->class_index, b->class_index);
    assert_int_equal(a->pages, b->pages);
    assert_int_equal(a->channels, b->channels);
    assert_int_equal(a->depth, b->depth);
    assert_int_equal(a->stored_depth, b->stored_depth);
    assert_int_equal(a->orientation, b->orientation);
    assert_int_equal(a->status, b->status);
    assert_int_equal(a->has_pixels, b->has_pixels);
    assert_int_equal(a->has_sha, b->has_sha);
    assert_int_equal(a->split, b->split);
}

static void test_round_trip(void **state)
{
    (void)state;
    struct kiln_catalog cat, back;
    struct kiln_err err = {0};
    build_catalog(&cat);
    assert_int_equal(kiln_catalog_csv_save(path, &cat, &err), KILN_OK);
    kiln_catalog_init(&back);
    assert_int_equal(kiln_fpstore_open(&back.fps, NULL, &err), KILN_OK);
    back.fps_close = kiln_fpstore_close;
    bool has_split = false;
    int rc = kiln_catalog_csv_load(path, &back, &has_split, &err);
    if (rc)
        print_error("%s\n", err.msg);
    assert_int_equal(rc, KILN_OK);
    assert_true(has_split);
    assert_int_equal(back.n, cat.n);
    for (size_t i = 0; i < cat.n; i++)
        assert_items_equal(&back, &back.items[i], &cat, &cat.items[i]);
    /* Saving what was loaded gives the same bytes (a second round trip changes nothing). */
    char path2[160];
    snprintf(path2, sizeof path2, "%s/again.csv", tmpdir);
    assert_int_equal(kiln_catalog_csv_save(path2, &back, &err), KILN_OK);
    FILE *f1 = fopen(path, "rb"), *f2 = fopen(path2, "rb");
    assert_true(f1 && f2);
    int c1, c2;
    do {
        c1 = getc(f1);
        c2 = getc(f2);
        assert_int_equal(c1, c2);
    } while (c1 != EOF);
    fclose(f1);
    fclose(f2);
    unlink(path2);
    kiln_catalog_free(&back);
    /* Read without a store, the fingerprints are checked but not kept, and the catalogue
     * refuses to be written rather than lose them. */
    kiln_catalog_init(&back);
    assert_int_equal(kiln_catalog_csv_load(path, &back, &has_split, &err), KILN_OK);
    assert_int_equal(back.items[0].fp_slot, KILN_FP_SKIPPED);
    assert_int_equal(kiln_catalog_csv_save(path2, &back, &err), KILN_EINTERNAL);
    assert_non_null(strstr(err.msg, "fingerprints"));
    assert_int_equal(access(path2, F_OK), -1);
    kiln_catalog_free(&back);
    kiln_catalog_free(&cat);
}

/* The test catalogue, built and saved for a check by Python (skips without Python). */
static void save_for_python(struct kiln_catalog *cat)
{
    if (access(KILN_PYTHON, X_OK) != 0) {
        print_message("skipped: %s is not available\n", KILN_PYTHON);
        skip();
    }
    struct kiln_err err = {0};
    build_catalog(cat);
    assert_int_equal(kiln_catalog_csv_save(path, cat, &err), KILN_OK);
}

/* The fingerprint column is RFC 4648 base64 of the documented bytes: Python's base64 module
 * decodes what kiln wrote to kiln_nearfp_encode's bytes, whose fields sit where
 * docs/formats.md says (version byte 1, then flags, big-endian info, hash and centre). */
static void test_fingerprint_text(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    struct kiln_err err = {0};
    save_for_python(&cat);
    char cmd[512];
    snprintf(cmd, sizeof cmd,
             "%s -c \"import csv,sys,base64\n"
             "for r in csv.DictReader(open(sys.argv[1],newline='')):\n"
             " print(base64.b64decode(r['near_fingerprint'],validate=True).hex() or '-')\" %s",
             KILN_PYTHON, path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    for (size_t i = 0; i < cat.n; i++) {
        char hex[2 * KILN_NEARFP_BYTES + 2];
        assert_int_equal(fscanf(p, "%625s", hex), 1);
        const struct kiln_item *it = &cat.items[i];
        if (it->fp_slot == KILN_FP_NONE) {
            assert_string_equal(hex, "-");
            continue;
        }
        struct kiln_nearfp fp;
        uint8_t want[KILN_NEARFP_BYTES];
        char wanthex[sizeof hex];
        assert_int_equal(kiln_fpstore_get(cat.fps, it->fp_slot, &fp, &err), KILN_OK);
        kiln_nearfp_encode(&fp, want);
        for (int k = 0; k < KILN_NEARFP_BYTES; k++)
            snprintf(wanthex + 2 * k, 3, "%02x", want[k]);
        assert_string_equal(hex, wanthex);
        char head[64];
        snprintf(head, sizeof head, "01%02x%04x%016" PRIx64 "%016" PRIx64, fp.flags, fp.info,
                 fp.hash, fp.centre);
        assert_memory_equal(hex, head, strlen(head));
    }
    assert_int_equal(pclose(p), 0);
    kiln_catalog_free(&cat);
}

/* The file is checked with independent readers: Python's csv module (an RFC 4180 reader) must
 * accept it as strict UTF-8, see one record per item with the same field count, and
 * urllib.parse.unquote_to_bytes (RFC 3986 percent-decoding) must turn the path column back
 * into the original bytes. */
static void test_python_reads_it(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    save_for_python(&cat);
    char cmd[512];
    snprintf(cmd, sizeof cmd,
             "%s -c \"import csv,sys,urllib.parse as u\n"
             "rows=list(csv.reader(open(sys.argv[1],encoding='utf-8',errors='strict',"
             "newline='')))\n"
             "h=rows[0]\n"
             "print(len(rows)-1, len(set(len(r) for r in rows)))\n"
             "[print(u.unquote_to_bytes(r[h.index('path')]).hex()) for r in rows[1:]]\" %s",
             KILN_PYTHON, path);
    FILE *p = popen(cmd, "r");
    assert_non_null(p);
    size_t nrows = 0, nwidths = 0;
    assert_int_equal(fscanf(p, "%zu %zu", &nrows, &nwidths), 2);
    assert_int_equal(nrows, cat.n);
    assert_int_equal(nwidths, 1); /* every record has the header's field count */
    for (size_t i = 0; i < cat.n; i++) {
        char hex[256], want[256];
        assert_int_equal(fscanf(p, "%255s", hex), 1);
        size_t k = 0;
        for (const unsigned char *s = (const unsigned char *)cat.items[i].path; *s; s++)
            k += (size_t)snprintf(want + k, sizeof want - k, "%02x", *s);
        want[k] = '\0';
        assert_string_equal(hex, want);
    }
    assert_int_equal(pclose(p), 0);
    kiln_catalog_free(&cat);
}

static const char header[] =
    "source,path,member,size,sha256,format,width,height,channels,depth,stored_depth,"
    "orientation,pages,label,class,group,status,reason,pixel_sha256,near_fingerprint,unit,split,"
    "record_digest\r\n";
/* base64 of a fingerprint's 312 bytes: version 1, flags "low information", the rest 0 (valid);
 * the same with version 2; and with the low-information flag missing though info is 0. */
#define A4 "AAAA"
#define A64 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4 A4
#define FP_TAIL A64 A64 A64 A64 A64 A64 A4 A4 A4 A4 A4 A4 A4 /* 412 characters */
#define FP_OK "AQEA" FP_TAIL
#define FP_V2 "AgEA" FP_TAIL
#define FP_NOFLAG "AQAA" FP_TAIL
#define SHA_A "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
#define GOOD_ROW "s,a.png,,10," SHA_A ",png,2,3,1,8,8,1,1,cat,0,,ok,,,,,\r\n"

/* Writes header + good row (line 2) + a row spanning lines 3-4 + the given row (line 5). */
static void expect_bad_row(const char *row, const char *what)
{
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    fputs(header, f);
    fputs(GOOD_ROW, f);
    fputs("s,b.png,,10," SHA_A ",png,2,3,1,8,8,1,1,cat,0,,ok,\"two\nlines\",,,,\r\n", f);
    fputs(row, f);
    assert_int_equal(fclose(f), 0);
    struct kiln_catalog cat;
    struct kiln_err err = {0};
    bool has_split;
    kiln_catalog_init(&cat);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_EINVAL);
    char where[200];
    snprintf(where, sizeof where, "%s:5:", path);
    if (!strstr(err.msg, where) || !strstr(err.msg, what)) {
        print_error("message '%s' should name '%s' and '%s'\n", err.msg, where, what);
        fail();
    }
    kiln_catalog_free(&cat);
}

static void test_bad_rows(void **state)
{
    (void)state;
    expect_bad_row("s,c.png,,12x," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "size");
    expect_bad_row("s,c.png,,-1," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "size");
    expect_bad_row("s,c.png,,10,abc,png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "sha256");
    expect_bad_row("s,c.png,,10,,png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "sha256");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,fine,,,,,\r\n", "status");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,0,8,8,1,1,,,,ok,,,,,\r\n", "channels");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,5,8,8,1,1,,,,ok,,,,,\r\n", "channels");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,12,8,1,1,,,,ok,,,,,\r\n", "depth");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,9,1,,,,ok,,,,,\r\n", "orientation");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,0,1,,,,ok,,,,,\r\n", "orientation");
    expect_bad_row("s,c%zz.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "path");
    /* a format no decoder has (found by the catalog_csv fuzz harness: "p%25ng" loaded as
     * "p%ng" and was written back unreadable) */
    expect_bad_row("s,c.png,,10," SHA_A ",p%25ng,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "format");
    expect_bad_row("s,c.png,,10," SHA_A ",gif,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "format");
    expect_bad_row("s,c%00.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,\r\n", "path");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A ",123,,\r\n",
                   "near_fingerprint");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A "," FP_V2 ",,\r\n",
                   "near_fingerprint");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A "," FP_NOFLAG ",,\r\n",
                   "near_fingerprint");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A ",A" FP_OK ",,\r\n",
                   "near_fingerprint");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A ",=" FP_OK ",,\r\n",
                   "near_fingerprint");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,,0123\r\n",
                   "record_digest");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,,,"
                   "0123456789ABCDEF0123456789abcdef\r\n",
                   "record_digest");
    expect_bad_row("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,,,,0123456789abcdef,dev\r\n",
                   "split");
    expect_bad_row("s,c.png,,10," SHA_A ",,,,,,,,,,,,corrupt,bad,,,0123456789abcdef,train\r\n",
                   "split");
    /* malformed quoting is reported by the CSV layer with the same file:line form */
    expect_bad_row("s,\"c.png,,10\r\n", "quoted field never closed");
}

static void test_missing_column_and_empty(void **state)
{
    (void)state;
    struct kiln_catalog cat;
    struct kiln_err err = {0};
    bool has_split;
    FILE *f = fopen(path, "wb");
    assert_non_null(f);
    fputs("source,path,member,size,status\r\ns,a,,1,ok\r\n", f); /* no sha256 column */
    assert_int_equal(fclose(f), 0);
    kiln_catalog_init(&cat);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "sha256"));
    f = fopen(path, "wb");
    assert_non_null(f);
    assert_int_equal(fclose(f), 0);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_EINVAL);
    assert_non_null(strstr(err.msg, "empty"));
    /* Columns are found by name: reordered columns, an extra column, LF line ends and a blank
     * line still load, and has_split stays false without split values. */
    f = fopen(path, "wb");
    assert_non_null(f);
    fputs("extra,status,sha256,size,member,path,source\n"
          "x,ok," SHA_A ",3,,p.png,s\n"
          "\n"
          "y,empty,,0,,e.png,s\n",
          f);
    assert_int_equal(fclose(f), 0);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_OK);
    assert_false(has_split);
    assert_int_equal(cat.n, 2);
    assert_string_equal(cat.items[0].path, "p.png");
    assert_int_equal(cat.items[0].size, 3);
    assert_int_equal(cat.items[0].sha256[0], 0xba); /* first byte of SHA_A */
    assert_int_equal(cat.items[1].status, KILN_ST_EMPTY);
    assert_int_equal(cat.items[1].split, KILN_SPLIT_NONE);
    kiln_catalog_free(&cat);
    /* A valid fingerprint loads. */
    f = fopen(path, "wb");
    assert_non_null(f);
    fputs(header, f);
    fputs("s,c.png,,10," SHA_A ",png,2,3,1,8,8,1,1,,,,ok,," SHA_A "," FP_OK ",,\r\n", f);
    assert_int_equal(fclose(f), 0);
    kiln_catalog_init(&cat);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_OK);
    assert_int_equal(cat.items[0].fp_slot, KILN_FP_SKIPPED);
    kiln_catalog_free(&cat);
    /* A catalogue of an earlier kiln (difference hashes, no fingerprints) is refused with what
     * to do. */
    f = fopen(path, "wb");
    assert_non_null(f);
    fputs("source,path,member,size,sha256,status,pixel_sha256,phash\r\n"
          "s,p.png,,3," SHA_A ",ok," SHA_A ",0123456789abcdef\r\n",
          f);
    assert_int_equal(fclose(f), 0);
    kiln_catalog_init(&cat);
    assert_int_equal(kiln_catalog_csv_load(path, &cat, &has_split, &err), KILN_EUNSUPPORTED);
    assert_non_null(strstr(err.msg, "earlier kiln"));
    assert_non_null(strstr(err.msg, "scan the sources again"));
    kiln_catalog_free(&cat);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_python_reads_it),
        cmocka_unit_test(test_fingerprint_text),
        cmocka_unit_test(test_bad_rows),
        cmocka_unit_test(test_missing_column_and_empty),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
