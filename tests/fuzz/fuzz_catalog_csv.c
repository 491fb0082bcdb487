/* catalog.csv reading (formats/files/catalog_csv.c), as split, pack, audit and reproduce load it
 * (with a fingerprint store, formats/files/fpstore.c), then the steps they take next (sort,
 * class index, status counts). A loaded catalogue written back must load again and write the
 * same bytes: the stage file is a fixed point of load and write. */
#include <string.h>

#include "../../core/catalog.h"
#include "../../formats/files/catalog_csv.h"
#include "../../formats/files/fpstore.h"
#include "fuzz.h"

/* Loads path into cat; returns the code. */
static int load(const char *path, struct kiln_catalog *cat)
{
    bool has_split = false;
    struct kiln_err err = {0};
    kiln_catalog_init(cat);
    FUZZ_CHECK(kiln_fpstore_open(&cat->fps, NULL, &err) == KILN_OK);
    cat->fps_close = kiln_fpstore_close;
    int rc = kiln_catalog_csv_load(path, cat, &has_split, &err);
    fuzz_outcome(rc + 100 * has_split, rc ? err.msg : NULL);
    if (rc) {
        /* a malformed value, or a catalogue of an earlier kiln (difference hashes) */
        FUZZ_CHECK(rc == KILN_EINVAL || rc == KILN_EUNSUPPORTED);
        FUZZ_CHECK(strstr(err.msg, path) != NULL);
    }
    return rc;
}

static char *write_text(const struct kiln_catalog *cat, size_t *len)
{
    char *text = NULL;
    FILE *f = open_memstream(&text, len);
    FUZZ_CHECK(f != NULL);
    struct kiln_err err = {0};
    FUZZ_CHECK(kiln_catalog_csv_write(f, cat, &err) == KILN_OK);
    FUZZ_CHECK(fclose(f) == 0);
    return text;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file in;
    FUZZ_CHECK(fuzz_file_open(&in, data, size) == 0);
    struct kiln_catalog cat;
    if (load(in.path, &cat) == KILN_OK) {
        size_t len1, len2;
        char *w1 = write_text(&cat, &len1);
        struct fuzz_file back;
        FUZZ_CHECK(fuzz_file_open(&back, (const uint8_t *)w1, len1) == 0);
        struct kiln_catalog again;
        int rc = load(back.path, &again);
        FUZZ_CHECK(rc == KILN_OK);
        FUZZ_CHECK(again.n == cat.n);
        char *w2 = write_text(&again, &len2);
        FUZZ_CHECK(len1 == len2 && memcmp(w1, w2, len1) == 0);
        free(w1);
        free(w2);
        kiln_catalog_free(&again);
        fuzz_file_close(&back);

        struct kiln_err err = {0};
        kiln_catalog_sort(&cat);
        FUZZ_CHECK(kiln_catalog_index_classes(&cat, &err) == KILN_OK);
        size_t counts[KILN_ST_COUNT];
        kiln_catalog_count_status(&cat, counts);
        size_t total = 0;
        for (int s = 0; s < KILN_ST_COUNT; s++)
            total += counts[s];
        FUZZ_CHECK(total == cat.n);
        if (cat.n)
            fuzz_accept();
    }
    kiln_catalog_free(&cat);
    fuzz_file_close(&in);
    return 0;
}
