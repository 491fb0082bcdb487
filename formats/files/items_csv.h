/* items.csv (docs/formats.md): one row per catalogue row, the packed records first (split by
 * split, in record order, with their unit, split and index), then the rows not packed with
 * their status and reason. */
#ifndef KILN_ITEMS_CSV_H
#define KILN_ITEMS_CSV_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/arena.h"
#include "../../core/catalog.h"
#include "../../core/err.h"

/* order[s][k] is the catalogue row of record k of split s (records[s] of them); rows without a
 * split follow in catalogue order. Written atomically. */
int kiln_items_csv_save(const char *path, const struct kiln_catalog *cat,
                        const uint32_t *const order[KILN_NSPLITS],
                        const size_t records[KILN_NSPLITS], struct kiln_err *err);

/* One row read back: names and reason in their recorded form (escaped, perhaps hashed), as
 * manifest.json lists them too; split KILN_SPLIT_NONE for a row not packed. */
struct kiln_items_row {
    const char *source, *path, *member, *label, *status, *reason;
    int32_t cls;    /* -1: none */
    int split;
    uint64_t index; /* record of the split's tensor file */
};

struct kiln_items_table {
    struct kiln_items_row *rows; /* in file order: rows[k] is row k */
    size_t n, cap;
    struct kiln_arena strings;
};

/* Reads items.csv (columns found by header name). The row column must count 0, 1, 2, ... and
 * every packed row name a split and an index; messages name the file and line. */
int kiln_items_csv_load(const char *path, struct kiln_items_table *t, struct kiln_err *err);
void kiln_items_table_free(struct kiln_items_table *t);

#endif
