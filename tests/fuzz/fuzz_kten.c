/* .kten reading (formats/files/kten.c) as verify and inspect do it: header, array table and metadata
 * block validated by kiln_kten_open, then every digest recomputed by kiln_kten_check, array
 * lookup, and the metadata parsed as JSON. A header that opens must describe arrays that lie
 * inside the file. */
#include <jansson.h>
#include <string.h>

#include "../../formats/files/kten.h"
#include "fuzz.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    struct fuzz_file in;
    FUZZ_CHECK(fuzz_file_open(&in, data, size) == 0);
    struct kiln_kten_info info;
    struct kiln_err err = {0};
    int rc = kiln_kten_open(in.path, &info, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(rc == KILN_ECORRUPT || rc == KILN_EUNSUPPORTED);
        FUZZ_CHECK(strstr(err.msg, in.path) != NULL);
        FUZZ_CHECK(info.metadata == NULL);
        fuzz_file_close(&in);
        return 0;
    }
    FUZZ_CHECK(info.file_size == size);
    FUZZ_CHECK(info.narrays <= KILN_KTEN_MAX_ARRAYS);
    FUZZ_CHECK(info.meta_offset >= KILN_KTEN_HEADER && info.meta_offset <= size);
    FUZZ_CHECK(info.meta_length == size - info.meta_offset);
    FUZZ_CHECK(info.metadata != NULL && info.metadata[info.meta_length] == '\0');
    for (size_t i = 0; i < info.narrays; i++) {
        const struct kiln_kten_array *a = &info.arrays[i];
        FUZZ_CHECK(a->offset % KILN_KTEN_ALIGN == 0 && a->offset >= KILN_KTEN_HEADER);
        FUZZ_CHECK(a->offset <= info.meta_offset && a->length <= info.meta_offset - a->offset);
        FUZZ_CHECK(kiln_dtype_size(a->dtype) > 0 && a->rank >= 1 && a->rank <= 4);
        FUZZ_CHECK(strlen(a->name) <= KILN_KTEN_NAME);
        FUZZ_CHECK(kiln_kten_find(&info, a->name) >= 0);
        (void)kiln_dtype_name(a->dtype);
    }
    uint32_t bad = 0;
    rc = kiln_kten_check(in.path, &info, &bad, &err);
    fuzz_outcome(rc + 100, rc ? err.msg : NULL);
    FUZZ_CHECK(rc == KILN_OK || rc == KILN_EMISMATCH);
    FUZZ_CHECK((rc == KILN_OK) == (bad == 0));
    json_error_t je;
    json_t *meta = json_loads(info.metadata, 0, &je);
    json_decref(meta);
    if (rc == KILN_OK && meta)
        fuzz_accept();
    kiln_kten_info_free(&info);
    fuzz_file_close(&in);
    return 0;
}
