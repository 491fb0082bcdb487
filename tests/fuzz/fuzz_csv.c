/* The RFC 4180 reader (formats/files/csv.c) on any bytes, then the round trip every stage file relies
 * on: rows read from the input, written back with kiln_csv_field, must read back identical. */
#include <string.h>

#include "../../formats/files/csv.h"
#include "fuzz.h"

/* Reads every row of path; writes them to out when it is not NULL. Returns the row count, or
 * -1 when the reader refused the input (with a message naming the file). */
static long read_all(const char *path, FILE *out)
{
    struct kiln_csv_reader r;
    struct kiln_err err = {0};
    FUZZ_CHECK(kiln_csv_open(&r, path, &err) == KILN_OK);
    long rows = 0;
    size_t last_line = 0;
    int got;
    while ((got = kiln_csv_next(&r, &err)) == 1) {
        FUZZ_CHECK(r.nfields >= 1);
        FUZZ_CHECK(r.line > last_line && r.lines_read >= r.line);
        last_line = r.line;
        for (size_t i = 0; i < r.nfields; i++) {
            FUZZ_CHECK(r.fields[i] >= r.buf && r.fields[i] < r.buf + r.len);
            if (out)
                kiln_csv_field(out, r.fields[i], i == 0);
        }
        if (out)
            kiln_csv_end_row(out);
        rows++;
    }
    fuzz_outcome(got, got < 0 ? err.msg : NULL);
    if (got < 0) {
        FUZZ_CHECK(-got == KILN_EINVAL);
        FUZZ_CHECK(strstr(err.msg, path) != NULL);
        rows = -1;
    }
    kiln_csv_close(&r);
    return rows;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file in;
    FUZZ_CHECK(fuzz_file_open(&in, data, size) == 0);
    char *text = NULL;
    size_t len = 0;
    FILE *out = open_memstream(&text, &len);
    FUZZ_CHECK(out != NULL);
    long rows = read_all(in.path, out);
    FUZZ_CHECK(fclose(out) == 0);
    if (rows >= 0) {
        struct fuzz_file back;
        FUZZ_CHECK(fuzz_file_open(&back, (const uint8_t *)text, len) == 0);
        struct kiln_csv_reader a, b;
        struct kiln_err err = {0};
        FUZZ_CHECK(kiln_csv_open(&a, in.path, &err) == KILN_OK);
        FUZZ_CHECK(kiln_csv_open(&b, back.path, &err) == KILN_OK);
        for (;;) {
            int ga = kiln_csv_next(&a, &err), gb = kiln_csv_next(&b, &err);
            FUZZ_CHECK(ga == gb);
            if (ga != 1)
                break;
            FUZZ_CHECK(a.nfields == b.nfields);
            for (size_t i = 0; i < a.nfields; i++)
                FUZZ_CHECK(strcmp(a.fields[i], b.fields[i]) == 0);
        }
        kiln_csv_close(&a);
        kiln_csv_close(&b);
        fuzz_file_close(&back);
        if (rows > 0)
            fuzz_accept();
    }
    free(text);
    fuzz_file_close(&in);
    return 0;
}
