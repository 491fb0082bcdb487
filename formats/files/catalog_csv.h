/* catalog.csv: the catalogue as RFC 4180 CSV, one row per candidate file, columns documented in
 * docs/formats.md. Names are escaped with core/textesc.h so any file name round-trips. */
#ifndef KILN_CATALOG_CSV_H
#define KILN_CATALOG_CSV_H

#include <stdbool.h>
#include <stdio.h>

#include "../../core/catalog.h"
#include "../../core/err.h"

/* Writes the header and every row to f. with_split adds the unit and split values (empty
 * otherwise). Returns KILN_EIO if the stream reports an error. */
int kiln_catalog_csv_write(FILE *f, const struct kiln_catalog *cat, struct kiln_err *err);

/* Writes the catalogue to path atomically (temporary name, fsync, rename). */
int kiln_catalog_csv_save(const char *path, const struct kiln_catalog *cat, struct kiln_err *err);

/* Reads a catalogue written by kiln_catalog_csv_write (columns found by header name, so extra
 * columns are ignored). Messages name the file and line. *has_split tells whether the split
 * column held values. */
int kiln_catalog_csv_load(const char *path, struct kiln_catalog *cat, bool *has_split,
                          struct kiln_err *err);

#endif
