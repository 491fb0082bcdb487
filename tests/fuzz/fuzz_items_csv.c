/* items.csv read back by kiln report (formats/files/items_csv.c): any bytes give a table or a
 * refusal naming the file, never a crash; an accepted table has rows numbered 0..n-1 and every
 * packed row a split. */
#include <string.h>

#include "../../formats/files/items_csv.h"
#include "fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file in;
    FUZZ_CHECK(fuzz_file_open(&in, data, size) == 0);
    struct kiln_items_table t;
    struct kiln_err err = {0};
    int rc = kiln_items_csv_load(in.path, &t, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(rc == KILN_EINVAL || rc == KILN_EIO);
        FUZZ_CHECK(strstr(err.msg, in.path) != NULL);
        FUZZ_CHECK(t.rows == NULL && t.n == 0);
    } else {
        for (size_t k = 0; k < t.n; k++) {
            const struct kiln_items_row *r = &t.rows[k];
            FUZZ_CHECK(r->source && r->path && r->member && r->label && r->status && r->reason);
            FUZZ_CHECK(r->split == KILN_SPLIT_NONE || (r->split >= 0 && r->split < KILN_NSPLITS));
            FUZZ_CHECK(r->cls >= -1);
        }
        if (t.n)
            fuzz_accept();
        kiln_items_table_free(&t);
    }
    fuzz_file_close(&in);
    return 0;
}
