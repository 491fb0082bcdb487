/* RFC 4180 CSV: a streaming reader and field writer. Fields may hold commas, quotes, CR and LF;
 * rows end with CRLF on output and with CRLF or LF on input. */
#ifndef KILN_CSV_H
#define KILN_CSV_H

#include <stdio.h>

#include "../../core/err.h"

struct kiln_csv_reader {
    FILE *f;
    const char *name; /* for messages */
    char *buf;
    size_t cap, len;
    size_t *offs; /* field start offsets in buf */
    size_t nfields, fcap;
    char **fields; /* valid after kiln_csv_next until the next call */
    size_t fields_cap;
    size_t line;   /* 1-based line where the current row starts */
    size_t lines_read; /* physical lines consumed so far (rows may span lines) */
    int pending[3];    /* bytes read ahead (a byte-order mark check, a CR's successor) */
    size_t npending;
};

/* Opens path for reading. A UTF-8 byte-order mark at the start is skipped (spreadsheet
 * programs write one). */
int kiln_csv_open(struct kiln_csv_reader *r, const char *path, struct kiln_err *err);
/* Reads the next row: returns 1 with r->fields/r->nfields set, 0 at end of file, or a negative
 * value with err set (KILN_EINVAL for malformed quoting, KILN_EIO for read errors). */
int kiln_csv_next(struct kiln_csv_reader *r, struct kiln_err *err);
void kiln_csv_close(struct kiln_csv_reader *r);

/* Writes one field, quoted only when it must be; sep is written before it unless first. */
void kiln_csv_field(FILE *f, const char *s, int first);
void kiln_csv_end_row(FILE *f);

#endif
