/* The source walker on an archive (formats/sources/source.c dispatch, formats/sources/source_archive.c on
 * libarchive): the input is an archive file of any kind libarchive reads, handed over as an
 * in-memory file (memfd), walked as `kiln scan` walks a source archive. Each entry must carry
 * a known status, a reason when it is not ok, and its bytes when it is. */
#include <string.h>

#include "../../core/catalog.h"
#include "../../formats/decoders/decoder.h"
#include "../../formats/sources/source.h"
#include "fuzz.h"

struct walk {
    size_t entries, ok;
};

static int on_entry(void *ctx, struct kiln_source_entry *e, struct kiln_err *err)
{
    (void)err;
    struct walk *w = ctx;
    w->entries++;
    FUZZ_CHECK(e->root && e->path && e->member);
    FUZZ_CHECK(e->status >= 0 && e->status < KILN_ST_COUNT);
    FUZZ_CHECK(memchr(e->reason, '\0', sizeof e->reason) != NULL);
    fuzz_outcome(e->status, e->reason);
    if (e->status == KILN_ST_OK) {
        FUZZ_CHECK(e->data != NULL && e->size <= FUZZ_MAX_MEMBER);
        /* scan's next steps on the bytes: is it a nested archive, which decoder bids */
        FUZZ_CHECK(!kiln_archive_sniff(e->data, e->size));
        (void)kiln_decoder_find(e->data, e->size);
        w->ok++;
    } else {
        FUZZ_CHECK(e->reason[0] != '\0');
        FUZZ_CHECK(e->status != KILN_ST_NESTED_ARCHIVE || e->data != NULL);
    }
    free(e->data);
    return KILN_OK;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file f;
    FUZZ_CHECK(fuzz_file_open(&f, data, size) == 0);
    const struct kiln_walk_opts opts = {.follow_links = false, .max_file_bytes = FUZZ_MAX_MEMBER};
    struct kiln_walk_counts counts = {0};
    struct walk w = {0};
    struct kiln_err err = {0};
    int rc = kiln_source_walk(f.path, &opts, NULL, on_entry, &w, &counts, &err);
    /* A source that is not an archive at all is the user's mistake (EINVAL); anything wrong
     * inside one is a row. */
    FUZZ_CHECK(rc == KILN_OK || rc == KILN_EINVAL);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    fuzz_outcome_bytes(&counts, sizeof counts);
    if (rc)
        FUZZ_CHECK(err.msg[0] != '\0' && w.entries == 0);
    else if (w.ok)
        fuzz_accept();
    fuzz_file_close(&f);
    return 0;
}
