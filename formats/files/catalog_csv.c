/* catalog.csv reader and writer. */
#include "catalog_csv.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/checked.h"
#include "../../core/textesc.h"
#include "csv.h"
#include "../decoders/decoder.h"
#include "fpstore.h"
#include "outfile.h"

enum col {
    C_SOURCE, C_PATH, C_MEMBER, C_SIZE, C_SHA256, C_FORMAT, C_WIDTH, C_HEIGHT, C_CHANNELS,
    C_DEPTH, C_STORED_DEPTH, C_ORIENTATION, C_PAGES, C_NOTES, C_LABEL, C_CLASS, C_GROUP, C_STATUS,
    C_REASON, C_PIXEL_SHA256, C_PIXEL_SCALE, C_RECORD_DIGEST, C_UNIT, C_SPLIT, C_NEAR, C_COUNT
};

static const char *const col_names[C_COUNT] = {
    "source", "path", "member", "size", "sha256", "format", "width", "height", "channels",
    "depth", "stored_depth", "orientation", "pages", "notes", "label", "class", "group", "status",
    "reason", "pixel_sha256", "pixel_scale", "record_digest", "unit", "split",
    "near_fingerprint",
};

/* The difference-hash column of catalogues written before the near-duplicate fingerprint. */
#define LEGACY_HASH_COLUMN "phash"

/* RFC 4648 section 4 base64 of the fingerprint bytes: 312 bytes are 104 groups of 3, so 416
 * characters and never padding. */
#define FP_TEXT (KILN_NEARFP_BYTES / 3 * 4)
static const char b64[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";

static void fp_to_text(const uint8_t *in, char out[FP_TEXT + 1])
{
    for (size_t i = 0, o = 0; i < KILN_NEARFP_BYTES; i += 3) {
        uint32_t v = (uint32_t)in[i] << 16 | (uint32_t)in[i + 1] << 8 | in[i + 2];
        for (int k = 3; k >= 0; k--)
            out[o++] = b64[v >> (6 * k) & 63];
    }
    out[FP_TEXT] = '\0';
}

/* One more than the value of each base64 character, 0 for any other byte: a look-up, since a
 * catalogue of 10^6 rows holds 4 * 10^8 of them. */
static const uint8_t b64_rev[256] = {
    ['A'] = 1, ['B'] = 2, ['C'] = 3, ['D'] = 4, ['E'] = 5, ['F'] = 6, ['G'] = 7, ['H'] = 8,
    ['I'] = 9, ['J'] = 10, ['K'] = 11, ['L'] = 12, ['M'] = 13, ['N'] = 14, ['O'] = 15, ['P'] = 16,
    ['Q'] = 17, ['R'] = 18, ['S'] = 19, ['T'] = 20, ['U'] = 21, ['V'] = 22, ['W'] = 23, ['X'] = 24,
    ['Y'] = 25, ['Z'] = 26, ['a'] = 27, ['b'] = 28, ['c'] = 29, ['d'] = 30, ['e'] = 31, ['f'] = 32,
    ['g'] = 33, ['h'] = 34, ['i'] = 35, ['j'] = 36, ['k'] = 37, ['l'] = 38, ['m'] = 39, ['n'] = 40,
    ['o'] = 41, ['p'] = 42, ['q'] = 43, ['r'] = 44, ['s'] = 45, ['t'] = 46, ['u'] = 47, ['v'] = 48,
    ['w'] = 49, ['x'] = 50, ['y'] = 51, ['z'] = 52, ['0'] = 53, ['1'] = 54, ['2'] = 55, ['3'] = 56,
    ['4'] = 57, ['5'] = 58, ['6'] = 59, ['7'] = 60, ['8'] = 61, ['9'] = 62, ['+'] = 63, ['/'] = 64,
};

/* -1 unless text is exactly FP_TEXT base64 characters. */
static int fp_from_text(const char *text, uint8_t out[KILN_NEARFP_BYTES])
{
    if (strlen(text) != FP_TEXT)
        return -1;
    for (size_t i = 0, o = 0; i < FP_TEXT; i += 4) {
        uint32_t v = 0;
        for (int k = 0; k < 4; k++) {
            const uint8_t d = b64_rev[(unsigned char)text[i + k]];
            if (!d)
                return -1;
            v = v << 6 | (uint32_t)(d - 1);
        }
        out[o++] = (uint8_t)(v >> 16);
        out[o++] = (uint8_t)(v >> 8);
        out[o++] = (uint8_t)v;
    }
    return 0;
}

static void hex_bytes(const uint8_t *b, size_t n, char *out)
{
    static const char digits[] = "0123456789abcdef";
    for (size_t i = 0; i < n; i++) {
        out[2 * i] = digits[b[i] >> 4];
        out[2 * i + 1] = digits[b[i] & 15];
    }
    out[2 * n] = '\0';
}

/* -1 unless text is exactly 2n lower-case hex digits. */
static int hex_parse(const char *text, uint8_t *out, size_t n)
{
    if (strlen(text) != 2 * n)
        return -1;
    for (size_t i = 0; i < 2 * n; i++) {
        const char c = text[i];
        int d = c >= '0' && c <= '9' ? c - '0' : c >= 'a' && c <= 'f' ? c - 'a' + 10 : -1;
        if (d < 0)
            return -1;
        out[i / 2] = (uint8_t)(i % 2 ? out[i / 2] | d : d << 4);
    }
    return 0;
}

static void text_field(FILE *f, const char *s, int first)
{
    if (kiln_text_is_plain(s)) {
        kiln_csv_field(f, s, first);
        return;
    }
    char *e = kiln_text_escape(s);
    kiln_csv_field(f, e ? e : "", first);
    free(e);
}

/* Fingerprints stored in slots [first, first + n) of the scratch store, read together: rows
 * written in slot order (the usual case) cost one read per window instead of one per row.
 * The window doubles while the slots asked for follow on, and shrinks to one slot when they
 * jump, so a catalogue in another order reads no more than it uses. */
#define FP_WINDOW 512
struct fp_window {
    uint8_t *raw;
    uint32_t first, n, want;
};

static const uint8_t *fp_window_get(struct kiln_fpstore *s, struct fp_window *w, uint32_t slot,
                                    struct kiln_err *err)
{
    if (slot < w->first || slot - w->first >= w->n) {
        const uint32_t count = kiln_fpstore_count(s);
        w->want = w->n && slot == w->first + w->n ? (w->want < FP_WINDOW / 2 ? 2 * w->want
                                                                            : FP_WINDOW)
                                                   : 1;
        w->first = slot;
        w->n = slot < count && count - slot < w->want ? count - slot : w->want;
        if (kiln_fpstore_read(s, slot, w->n, w->raw, err) != KILN_OK) {
            w->n = 0;
            return NULL;
        }
    }
    return w->raw + (size_t)(slot - w->first) * KILN_NEARFP_BYTES;
}

static int write_rows(FILE *f, const struct kiln_catalog *cat, struct fp_window *w,
                      struct kiln_err *err);

/* A comma and a field that needs no quoting (digests, names kiln chooses). The rows are written
 * field by field without printf, whose format parsing was a sixth of the time spent writing a
 * catalogue of 10^6 rows. */
static void put_sep(FILE *f, const char *s)
{
    putc(',', f);
    fputs(s, f);
}

/* A comma and a number in decimal. */
static void put_sep_u64(FILE *f, uint64_t v)
{
    char buf[22];
    char *p = buf + sizeof buf - 1;
    *p = '\0';
    do
        *--p = (char)('0' + v % 10);
    while (v /= 10);
    *--p = ',';
    fputs(p, f);
}

int kiln_catalog_csv_write(FILE *f, const struct kiln_catalog *cat, struct kiln_err *err)
{
    struct fp_window w = {0};
    if (cat->fps && !(w.raw = kiln_alloc_array(FP_WINDOW, KILN_NEARFP_BYTES)))
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate to write the catalogue");
    int rc = write_rows(f, cat, &w, err);
    free(w.raw);
    return rc;
}

static int write_rows(FILE *f, const struct kiln_catalog *cat, struct fp_window *w,
                      struct kiln_err *err)
{
    /* A catalogue read without its fingerprints would lose them here. */
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].fp_slot != KILN_FP_NONE &&
            (cat->items[i].fp_slot == KILN_FP_SKIPPED || !cat->fps))
            return kiln_err_set(err, KILN_EINTERNAL,
                                "the catalogue was read without its near-duplicate fingerprints "
                                "and cannot be written back");
    for (int c = 0; c < C_COUNT; c++)
        kiln_csv_field(f, col_names[c], c == 0);
    kiln_csv_end_row(f);
    for (size_t i = 0; i < cat->n; i++) {
        const struct kiln_item *it = &cat->items[i];
        const bool ok = it->status == KILN_ST_OK;
        const bool img = it->format[0] != 0 && it->width; /* header fields known */
        char sha[KILN_SHA256_HEX], psha[KILN_SHA256_HEX];
        kiln_sha256_hex(it->sha256, sha);
        kiln_sha256_hex(it->pixel_sha256, psha);
        text_field(f, it->source, 1);
        text_field(f, it->path, 0);
        text_field(f, it->member, 0);
        put_sep_u64(f, it->size);
        put_sep(f, it->has_sha || ok ? sha : "");
        kiln_csv_field(f, it->format, 0);
        if (img) {
            const unsigned dims[7] = {it->width,        it->height,      it->channels, it->depth,
                                      it->stored_depth, it->orientation, it->pages};
            for (int k = 0; k < 7; k++)
                put_sep_u64(f, dims[k]);
        } else {
            fputs(",,,,,,,", f);
        }
        text_field(f, it->notes, 0);
        text_field(f, it->label, 0);
        if (it->class_index >= 0)
            put_sep_u64(f, (uint64_t)it->class_index);
        else
            putc(',', f);
        text_field(f, it->group, 0);
        put_sep(f, kiln_status_name(it->status));
        text_field(f, it->reason, 0);
        if (it->has_pixels) {
            put_sep(f, psha);
            put_sep_u64(f, it->pixel_scale ? it->pixel_scale : 1u);
        } else {
            fputs(",,", f);
        }
        char rec[2 * KILN_RECORD_DIGEST_LEN + 1] = "";
        if (it->has_record)
            hex_bytes(it->record_digest, KILN_RECORD_DIGEST_LEN, rec);
        put_sep(f, rec);
        if (it->split >= 0) {
            uint8_t key[8];
            char keyhex[17];
            for (int k = 0; k < 8; k++)
                key[k] = (uint8_t)(it->unit_key >> (56 - 8 * k));
            hex_bytes(key, sizeof key, keyhex);
            put_sep(f, keyhex);
            put_sep(f, kiln_split_name(it->split));
        } else {
            fputs(",,", f);
        }
        if (it->fp_slot != KILN_FP_NONE) {
            struct kiln_nearfp fp;
            char text[FP_TEXT + 1];
            const uint8_t *raw = fp_window_get(cat->fps, w, it->fp_slot, err);
            if (!raw)
                return err->code;
            if (kiln_nearfp_decode(raw, &fp) != 0)
                return kiln_err_set(err, KILN_EIO,
                                    "fingerprint slot %u of the scratch file is damaged",
                                    it->fp_slot);
            fp_to_text(raw, text);
            put_sep(f, text);
        } else {
            putc(',', f);
        }
        kiln_csv_end_row(f);
    }
    if (ferror(f))
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write the catalogue");
    return KILN_OK;
}

int kiln_catalog_csv_save(const char *path, const struct kiln_catalog *cat, struct kiln_err *err)
{
    struct kiln_outfile of;
    FILE *f = kiln_outfile_open_stream(&of, path, err);
    if (!f)
        return err->code;
    int rc = kiln_catalog_csv_write(f, cat, err);
    if (rc) {
        const int e = errno; /* the stream's failure, kept by kiln_catalog_csv_write */
        kiln_outfile_abort(&of);
        if (rc != KILN_EWRITE) { /* not a failed write (fingerprints not loaded, ...) */
            kiln_err_prefix(err, "%s", path);
            return rc;
        }
        return kiln_err_sys(err, KILN_EWRITE, e, "cannot write %s", path);
    }
    return kiln_outfile_commit(&of, err);
}

static int parse_u64(const char *s, uint64_t *v, int base)
{
    if (!*s)
        return -1;
    char *end;
    errno = 0;
    unsigned long long x = strtoull(s, &end, base);
    if (*end || errno || s[0] == '-' || s[0] == '+' || s[0] == ' ')
        return -1;
    *v = x;
    return 0;
}

static int parse_u32(const char *s, uint32_t *v, uint32_t max)
{
    uint64_t x;
    if (parse_u64(s, &x, 10) || x > max)
        return -1;
    *v = (uint32_t)x;
    return 0;
}

/* Fingerprints read but not yet stored: they go to the scratch store FP_BATCH at a time, with
 * one write each time instead of one per row (a third of the time of loading 10^6 rows went
 * to those system calls); the items hold KILN_FP_SKIPPED until then. */
#define FP_BATCH 512
struct fp_batch {
    uint8_t *raw;  /* FP_BATCH fingerprints of KILN_NEARFP_BYTES */
    size_t *item;  /* the catalogue index of each */
    uint32_t n;
};

static int fp_flush(struct kiln_catalog *cat, struct fp_batch *b, struct kiln_err *err)
{
    uint32_t first;
    if (b->n == 0)
        return KILN_OK;
    int rc = kiln_fpstore_put_raw(cat->fps, b->raw, b->n, &first, err);
    for (uint32_t k = 0; k < b->n && !rc; k++)
        cat->items[b->item[k]].fp_slot = first + k;
    b->n = 0;
    return rc;
}

static int load_rows(const char *path, struct kiln_catalog *cat, bool *has_split,
                     struct fp_batch *batch, struct kiln_err *err);

int kiln_catalog_csv_load(const char *path, struct kiln_catalog *cat, bool *has_split,
                          struct kiln_err *err)
{
    struct fp_batch b = {0};
    if (cat->fps) {
        b.raw = kiln_alloc_array(FP_BATCH, KILN_NEARFP_BYTES);
        b.item = kiln_alloc_array(FP_BATCH, sizeof *b.item);
        if (!b.raw || !b.item) {
            free(b.raw);
            free(b.item);
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate to read %s", path);
        }
    }
    int rc = load_rows(path, cat, has_split, cat->fps ? &b : NULL, err);
    if (!rc && cat->fps)
        rc = fp_flush(cat, &b, err);
    free(b.raw);
    free(b.item);
    return rc;
}

static int load_rows(const char *path, struct kiln_catalog *cat, bool *has_split,
                     struct fp_batch *batch, struct kiln_err *err)
{
    struct kiln_csv_reader r;
    int rc = kiln_csv_open(&r, path, err);
    if (rc)
        return rc;
    *has_split = false;
    int idx[C_COUNT];
    for (int c = 0; c < C_COUNT; c++)
        idx[c] = -1;
    int got = kiln_csv_next(&r, err);
    if (got <= 0) {
        kiln_csv_close(&r);
        if (got == 0)
            return kiln_err_set(err, KILN_EINVAL, "%s is empty, not a catalogue", path);
        return -got;
    }
    bool legacy = false;
    for (size_t i = 0; i < r.nfields; i++) {
        for (int c = 0; c < C_COUNT; c++)
            if (strcmp(r.fields[i], col_names[c]) == 0)
                idx[c] = (int)i;
        legacy |= strcmp(r.fields[i], LEGACY_HASH_COLUMN) == 0;
    }
    if (legacy && idx[C_NEAR] < 0) {
        kiln_csv_close(&r);
        return kiln_err_set(err, KILN_EUNSUPPORTED,
                            "%s was written by an earlier kiln: it has difference hashes "
                            "('" LEGACY_HASH_COLUMN "') instead of near-duplicate fingerprints "
                            "('near_fingerprint'); scan the sources again",
                            path);
    }
    static const int required[] = {C_SOURCE, C_PATH, C_MEMBER, C_SIZE, C_SHA256, C_STATUS};
    for (size_t k = 0; k < sizeof required / sizeof required[0]; k++)
        if (idx[required[k]] < 0) {
            kiln_csv_close(&r);
            return kiln_err_set(err, KILN_EINVAL, "%s: no '%s' column; is this a kiln catalogue?",
                                path, col_names[required[k]]);
        }
    char *text[C_COUNT];
    while ((got = kiln_csv_next(&r, err)) == 1) {
        const size_t line = r.line;
        if (r.nfields == 1 && r.fields[0][0] == '\0')
            continue; /* blank line */
        const char *v[C_COUNT];
        for (int c = 0; c < C_COUNT; c++)
            v[c] = idx[c] >= 0 && (size_t)idx[c] < r.nfields ? r.fields[idx[c]] : "";
        struct kiln_item it;
        memset(&it, 0, sizeof it);
        it.class_index = -1;
        it.split = KILN_SPLIT_NONE;
        it.pool_slot = UINT32_MAX;
        it.fp_slot = KILN_FP_NONE;
        const char *bad = NULL;
        static const int texts[] = {C_SOURCE, C_PATH, C_MEMBER, C_FORMAT, C_LABEL, C_GROUP,
                                    C_REASON, C_NOTES};
        memset(text, 0, sizeof text);
        for (size_t k = 0; k < sizeof texts / sizeof texts[0] && !bad; k++)
            if (kiln_text_unescape(v[texts[k]], &text[texts[k]], NULL) != 0)
                bad = col_names[texts[k]];
        uint32_t u;
        uint64_t x;
        int st = kiln_status_parse(v[C_STATUS]);
        /* A decoder's name or nothing: pack looks the decoder up by this name, and a name
         * that is not one would not survive being written back (it is not escaped). */
        if (!bad && text[C_FORMAT][0] && !kiln_decoder_by_name(text[C_FORMAT]))
            bad = "format";
        if (!bad && parse_u64(v[C_SIZE], &it.size, 10))
            bad = "size";
        if (!bad && st < 0)
            bad = "status";
        if (!bad && v[C_SHA256][0] && kiln_sha256_parse(v[C_SHA256], it.sha256))
            bad = "sha256";
        it.has_sha = v[C_SHA256][0] != 0;
        if (!bad && st == KILN_ST_OK && !v[C_SHA256][0])
            bad = "sha256";
        if (!bad && v[C_WIDTH][0]) {
            if (parse_u32(v[C_WIDTH], &it.width, UINT32_MAX))
                bad = "width";
            else if (parse_u32(v[C_HEIGHT], &it.height, UINT32_MAX))
                bad = "height";
            else if (parse_u32(v[C_CHANNELS], &u, 4) || u < 1)
                bad = "channels";
            else if ((it.channels = (uint8_t)u, parse_u32(v[C_DEPTH], &u, 16)) ||
                     (u != 8 && u != 16))
                bad = "depth";
            else if ((it.depth = (uint8_t)u, parse_u32(v[C_STORED_DEPTH], &u, 64)))
                bad = "stored_depth";
            else if ((it.stored_depth = (uint8_t)u, parse_u32(v[C_ORIENTATION], &u, 8)) || u < 1)
                bad = "orientation";
            else if ((it.orientation = (uint8_t)u, parse_u32(v[C_PAGES], &u, UINT16_MAX)))
                bad = "pages";
            else
                it.pages = (uint16_t)u;
        }
        if (!bad && v[C_CLASS][0]) {
            if (parse_u32(v[C_CLASS], &u, INT32_MAX))
                bad = "class";
            else
                it.class_index = (int32_t)u;
        }
        if (!bad && v[C_PIXEL_SHA256][0]) {
            if (kiln_sha256_parse(v[C_PIXEL_SHA256], it.pixel_sha256))
                bad = "pixel_sha256";
            else
                it.has_pixels = 1;
            it.pixel_scale = 1;
            if (v[C_PIXEL_SCALE][0]) {
                if (parse_u32(v[C_PIXEL_SCALE], &u, 8) || (u != 1 && u != 2 && u != 4 && u != 8))
                    bad = "pixel_scale";
                else
                    it.pixel_scale = (uint8_t)u;
            }
        }
        if (!bad && v[C_RECORD_DIGEST][0]) {
            if (hex_parse(v[C_RECORD_DIGEST], it.record_digest, KILN_RECORD_DIGEST_LEN))
                bad = "record_digest";
            else
                it.has_record = 1;
        }
        struct kiln_nearfp fp;
        uint8_t raw[KILN_NEARFP_BYTES];
        if (!bad && v[C_NEAR][0]) {
            if (fp_from_text(v[C_NEAR], raw) || kiln_nearfp_decode(raw, &fp))
                bad = "near_fingerprint";
            else
                it.fp_slot = KILN_FP_SKIPPED;
        }
        if (!bad && v[C_SPLIT][0]) {
            int sp = kiln_split_parse(v[C_SPLIT]);
            if (sp < 0 || parse_u64(v[C_UNIT], &x, 16) || strlen(v[C_UNIT]) != 16)
                bad = "split/unit";
            else {
                it.split = (int8_t)sp;
                it.unit_key = x;
                *has_split = true;
            }
        }
        if (!bad && st != KILN_ST_OK && it.split != KILN_SPLIT_NONE)
            bad = "split (a row that is not ok cannot be in a split)";
        if (bad) {
            for (int c = 0; c < C_COUNT; c++)
                free(text[c]);
            kiln_csv_close(&r);
            return kiln_err_set(err, KILN_EINVAL, "%s:%zu: bad %s value", path, line, bad);
        }
        it.status = (uint8_t)st;
        it.source = text[C_SOURCE];
        it.path = text[C_PATH];
        it.member = text[C_MEMBER];
        it.format = text[C_FORMAT];
        it.label = text[C_LABEL];
        it.group = text[C_GROUP];
        it.reason = text[C_REASON];
        it.notes = text[C_NOTES];
        rc = kiln_catalog_add(cat, &it, err);
        for (int c = 0; c < C_COUNT; c++)
            free(text[c]);
        if (!rc && batch && it.fp_slot != KILN_FP_NONE) {
            memcpy(batch->raw + (size_t)batch->n * KILN_NEARFP_BYTES, raw, KILN_NEARFP_BYTES);
            batch->item[batch->n++] = cat->n - 1;
            if (batch->n == FP_BATCH)
                rc = fp_flush(cat, batch, err);
        }
        if (rc) {
            kiln_csv_close(&r);
            return rc;
        }
    }
    kiln_csv_close(&r);
    if (got < 0)
        return -got;
    return KILN_OK;
}
