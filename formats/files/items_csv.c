/* items.csv: written by pack, read back by kiln report. */
#include "items_csv.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/checked.h"
#include "../../core/textesc.h"
#include "csv.h"
#include "outfile.h"

/* A name or reason in its recorded form (escaped, core/textesc.h); first: no comma before. */
static void text_field(FILE *f, const char *raw, int first)
{
    char *e = kiln_text_escape(raw);
    kiln_csv_field(f, e ? e : "", first);
    free(e);
}

static void write_row(FILE *f, const struct kiln_item *it, size_t row, int split, size_t index)
{
    char sha[KILN_SHA256_HEX] = "", num[32];
    if (it->has_sha || it->status == KILN_ST_OK)
        kiln_sha256_hex(it->sha256, sha);
    snprintf(num, sizeof num, "%zu", row);
    kiln_csv_field(f, num, 1);
    text_field(f, it->source, 0);
    text_field(f, it->path, 0);
    text_field(f, it->member, 0);
    fprintf(f, ",%" PRIu64 ",%s", it->size, sha);
    text_field(f, it->label, 0);
    if (it->class_index >= 0)
        fprintf(f, ",%" PRId32, it->class_index);
    else
        fputs(",", f);
    text_field(f, it->group, 0);
    if (split != KILN_SPLIT_NONE) {
        fprintf(f, ",%016" PRIx64 ",%s,%zu,ok,", it->unit_key, kiln_split_name(split), index);
    } else {
        fprintf(f, ",,,,%s,", kiln_status_name(it->status));
        text_field(f, it->status == KILN_ST_OK ? "no split assigned" : it->reason, 1);
    }
    kiln_csv_end_row(f);
}

int kiln_items_csv_save(const char *path, const struct kiln_catalog *cat,
                        const uint32_t *const order[KILN_NSPLITS],
                        const size_t records[KILN_NSPLITS], struct kiln_err *err)
{
    struct kiln_outfile of;
    FILE *f = kiln_outfile_open_stream(&of, path, err);
    if (!f)
        return err->code;
    static const char *const cols[] = {"row",   "source", "path",  "member", "size",
                                       "sha256", "label", "class", "group",  "unit",
                                       "split", "index",  "status", "reason"};
    for (size_t c = 0; c < sizeof cols / sizeof cols[0]; c++)
        kiln_csv_field(f, cols[c], c == 0);
    kiln_csv_end_row(f);
    size_t row = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        for (size_t k = 0; k < records[s]; k++)
            write_row(f, &cat->items[order[s][k]], row++, s, k);
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].split == KILN_SPLIT_NONE)
            write_row(f, &cat->items[i], row++, KILN_SPLIT_NONE, 0);
    if (ferror(f)) {
        kiln_outfile_abort(&of);
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s", path);
    }
    return kiln_outfile_commit(&of, err);
}

/* ---- reading items.csv back (kiln report) ------------------------------------------------ */

enum { I_ROW, I_SOURCE, I_PATH, I_MEMBER, I_LABEL, I_CLASS, I_SPLIT, I_INDEX, I_STATUS,
       I_REASON, I_COUNT };
static const char *const item_cols[I_COUNT] = {"row",   "source", "path",  "member", "label",
                                               "class", "split",  "index", "status", "reason"};

static bool parse_count(const char *s, uint64_t *out)
{
    char *end;
    if (!*s || *s == '-' || *s == '+' || *s == ' ')
        return false;
    errno = 0;
    unsigned long long v = strtoull(s, &end, 10);
    if (errno || *end)
        return false;
    *out = v;
    return true;
}

/* Fills row from the fields v[]; returns the name of a bad column or NULL. */
static const char *read_row(struct kiln_items_table *t, const char *const v[I_COUNT],
                            struct kiln_items_row *row)
{
    uint64_t x;
    if (!parse_count(v[I_ROW], &x) || x != t->n)
        return "row";
    const char **texts[] = {&row->source, &row->path, &row->member, &row->label, &row->status,
                            &row->reason};
    const int cols[] = {I_SOURCE, I_PATH, I_MEMBER, I_LABEL, I_STATUS, I_REASON};
    for (size_t k = 0; k < sizeof cols / sizeof cols[0]; k++)
        if (!(*texts[k] = kiln_arena_strdup(&t->strings, v[cols[k]])))
            return "";
    row->cls = -1;
    if (v[I_CLASS][0]) {
        if (!parse_count(v[I_CLASS], &x) || x > INT32_MAX)
            return "class";
        row->cls = (int32_t)x;
    }
    row->split = KILN_SPLIT_NONE;
    row->index = 0;
    if (v[I_SPLIT][0]) {
        if ((row->split = kiln_split_parse(v[I_SPLIT])) < 0)
            return "split";
        if (!parse_count(v[I_INDEX], &row->index))
            return "index";
    }
    return NULL;
}

int kiln_items_csv_load(const char *path, struct kiln_items_table *t, struct kiln_err *err)
{
    memset(t, 0, sizeof *t);
    kiln_arena_init(&t->strings);
    struct kiln_csv_reader r;
    int rc = kiln_csv_open(&r, path, err);
    if (rc)
        return rc;
    int idx[I_COUNT], got = kiln_csv_next(&r, err);
    for (int c = 0; c < I_COUNT; c++)
        idx[c] = -1;
    for (size_t i = 0; got == 1 && i < r.nfields; i++)
        for (int c = 0; c < I_COUNT; c++)
            if (strcmp(r.fields[i], item_cols[c]) == 0)
                idx[c] = (int)i;
    if (got == 0)
        rc = kiln_err_set(err, KILN_EINVAL, "%s is empty, not kiln's items.csv", path);
    else if (got < 0)
        rc = -got;
    for (int c = 0; c < I_COUNT && !rc; c++)
        if (idx[c] < 0)
            rc = kiln_err_set(err, KILN_EINVAL, "%s: no '%s' column; is this kiln's items.csv?",
                              path, item_cols[c]);
    while (!rc && (got = kiln_csv_next(&r, err)) == 1) {
        if (r.nfields == 1 && r.fields[0][0] == '\0')
            continue;
        const char *v[I_COUNT];
        for (int c = 0; c < I_COUNT; c++)
            v[c] = (size_t)idx[c] < r.nfields ? r.fields[idx[c]] : "";
        void *rows = t->rows;
        if (!kiln_grow(&rows, &t->cap, t->n + 1, sizeof *t->rows)) {
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot hold the rows of %s", path);
            break;
        }
        t->rows = rows;
        const char *bad = read_row(t, v, &t->rows[t->n]);
        if (bad && !*bad)
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot hold the rows of %s", path);
        else if (bad)
            rc = kiln_err_set(err, KILN_EINVAL, "%s line %zu: bad '%s' value", path, r.line, bad);
        else
            t->n++;
    }
    if (!rc && got < 0)
        rc = -got;
    kiln_csv_close(&r);
    if (rc)
        kiln_items_table_free(t);
    return rc;
}

void kiln_items_table_free(struct kiln_items_table *t)
{
    free(t->rows);
    kiln_arena_free(&t->strings);
    memset(t, 0, sizeof *t);
}
