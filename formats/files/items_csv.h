/* items.csv (docs/formats.md): one row per catalogue row, the packed records first (split by
 * split, in record order, with their unit, split and index), then the rows not packed with
 * their status and reason. */
#ifndef KILN_ITEMS_CSV_H
#define KILN_ITEMS_CSV_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/catalog.h"
#include "../../core/err.h"

/* order[s][k] is the catalogue row of record k of split s (records[s] of them); rows without a
 * split follow in catalogue order. Written atomically. */
int kiln_items_csv_save(const char *path, const struct kiln_catalog *cat,
                        const uint32_t *const order[KILN_NSPLITS],
                        const size_t records[KILN_NSPLITS], struct kiln_err *err);

#endif
