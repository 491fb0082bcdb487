/* The labels CSV of `--labels csv:FILE` (path,label[,group]), loaded and checked by the scan
 * stage's own loader (core/pipeline/stage_scan.c, reached through kiln_labels_csv_check). */
#include <string.h>

#include "../../core/pipeline/stage_scan.h"
#include "fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file in;
    FUZZ_CHECK(fuzz_file_open(&in, data, size) == 0);
    size_t rows = 0;
    struct kiln_err err = {0};
    int rc = kiln_labels_csv_check(in.path, &rows, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(rc == KILN_EINVAL);
        FUZZ_CHECK(strstr(err.msg, in.path) != NULL);
        FUZZ_CHECK(rows == 0);
    } else if (rows) {
        fuzz_accept();
    }
    fuzz_file_close(&in);
    return 0;
}
