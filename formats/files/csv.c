/* RFC 4180 reader (a small state machine over getc_unlocked: a reader belongs to one thread, so
 * the stream lock each getc takes would cost a third of reading a large catalogue) and writer. */
#include "csv.h"

#include <errno.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/checked.h"

int kiln_csv_open(struct kiln_csv_reader *r, const char *path, struct kiln_err *err)
{
    memset(r, 0, sizeof *r);
    r->name = path;
    r->f = fopen(path, "rb");
    if (!r->f)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path);
    /* Read ahead rather than seek back, so pipes work too. Kept in reverse order. */
    static const int bom[3] = {0xEF, 0xBB, 0xBF};
    int head[3];
    size_t n = 0;
    while (n < 3 && (head[n] = getc(r->f)) == bom[n])
        n++;
    if (n < 3) {
        size_t got = n + (head[n] != EOF);
        for (size_t i = got; i-- > 0;)
            r->pending[r->npending++] = head[i];
    }
    return KILN_OK;
}

static int next_byte(struct kiln_csv_reader *r)
{
    return r->npending ? r->pending[--r->npending] : getc_unlocked(r->f);
}

void kiln_csv_close(struct kiln_csv_reader *r)
{
    if (r->f)
        fclose(r->f);
    free(r->buf);
    free(r->offs);
    free(r->fields);
    memset(r, 0, sizeof *r);
}

static inline int put(struct kiln_csv_reader *r, char c)
{
    if (r->len >= r->cap && !kiln_grow((void **)&r->buf, &r->cap, r->len + 1, 1))
        return -1;
    r->buf[r->len++] = c;
    return 0;
}

static int start_field(struct kiln_csv_reader *r)
{
    if (!kiln_grow((void **)&r->offs, &r->fcap, r->nfields + 1, sizeof *r->offs))
        return -1;
    r->offs[r->nfields++] = r->len;
    return 0;
}

int kiln_csv_next(struct kiln_csv_reader *r, struct kiln_err *err)
{
    r->len = 0;
    r->nfields = 0;
    int c = next_byte(r);
    if (c == EOF) {
        if (ferror(r->f))
            return -kiln_err_sys(err, KILN_EIO, errno, "cannot read %s", r->name);
        return 0;
    }
    r->line = ++r->lines_read;
    size_t row_line = r->line;
    if (start_field(r))
        return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
    int quoted = 0, after_quote = 0;
    for (;; c = next_byte(r)) {
    dispatch:
        if (c == EOF) {
            if (ferror(r->f))
                return -kiln_err_sys(err, KILN_EIO, errno, "cannot read %s", r->name);
            if (quoted)
                return -kiln_err_set(err, KILN_EINVAL, "%s:%zu: quoted field never closed",
                                     r->name, row_line);
            break;
        }
        if (quoted) {
            if (c == '"') {
                int d = next_byte(r);
                if (d == '"') {
                    if (put(r, '"'))
                        return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
                    continue;
                }
                quoted = 0;
                after_quote = 1;
                if (d == EOF)
                    break;
                c = d; /* fall through to the unquoted handling of the next character */
            } else {
                if (c == '\n')
                    r->lines_read++;
                if (put(r, (char)c))
                    return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
                continue;
            }
        }
        if (c == ',') {
            if (put(r, '\0') || start_field(r))
                return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
            after_quote = 0;
            continue;
        }
        if (c == '\r') {
            int d = next_byte(r);
            if (d != '\n' && d != EOF)
                r->pending[r->npending++] = d;
            break;
        }
        if (c == '\n')
            break;
        if (after_quote)
            return -kiln_err_set(err, KILN_EINVAL, "%s:%zu: text after a closing quote",
                                 r->name, row_line);
        if (c == '"') {
            if (r->len != r->offs[r->nfields - 1])
                return -kiln_err_set(err, KILN_EINVAL, "%s:%zu: quote inside an unquoted field",
                                     r->name, row_line);
            quoted = 1;
            continue;
        }
        if (c == '\0')
            return -kiln_err_set(err, KILN_EINVAL, "%s:%zu: NUL byte in a field", r->name,
                                 row_line);
        if (put(r, (char)c))
            return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
        if (r->npending == 0) {
            /* The rest of a plain unquoted field, the bulk of a catalogue, in a tight loop with
             * the buffer in locals: through r, every byte stored would make the compiler reload
             * r's fields. The byte that ends the run goes back to the state machine above. */
            FILE *const fp = r->f;
            char *const buf = r->buf;
            const size_t cap = r->cap;
            size_t len = r->len;
            int d;
            while ((d = getc_unlocked(fp)) != EOF && d != ',' && d != '\r' && d != '\n' &&
                   d != '"' && d != '\0' && len < cap)
                buf[len++] = (char)d;
            r->len = len;
            c = d;
            goto dispatch;
        }
    }
    if (put(r, '\0'))
        return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
    if (!kiln_grow((void **)&r->fields, &r->fields_cap, r->nfields, sizeof *r->fields))
        return -kiln_err_set(err, KILN_ENOMEM, "row too large in %s", r->name);
    for (size_t i = 0; i < r->nfields; i++)
        r->fields[i] = r->buf + r->offs[i];
    return 1;
}

void kiln_csv_field(FILE *f, const char *s, int first)
{
    if (!first)
        putc(',', f);
    /* A field starting with a UTF-8 byte-order mark is quoted too: written first in a file,
     * unquoted, it would be read back (here and by spreadsheet programs) as the file's mark and
     * dropped. */
    if (strpbrk(s, ",\"\r\n") == NULL && strncmp(s, "\xef\xbb\xbf", 3) != 0) {
        fputs(s, f);
        return;
    }
    putc('"', f);
    for (; *s; s++) {
        if (*s == '"')
            putc('"', f);
        putc(*s, f);
    }
    putc('"', f);
}

void kiln_csv_end_row(FILE *f)
{
    fputs("\r\n", f);
}
