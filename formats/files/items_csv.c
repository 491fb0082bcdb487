/* The items.csv writer. */
#include "items_csv.h"

#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>

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
    int rc = kiln_outfile_open(&of, path, err);
    if (rc)
        return rc;
    FILE *f = kiln_outfile_stream(&of, err);
    if (!f) {
        kiln_outfile_abort(&of);
        return KILN_EWRITE;
    }
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
