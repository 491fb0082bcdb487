/* split --keep's reader (formats/files/keep.c): an earlier manifest.json and the items.csv beside it.
 * The input is manifest.json, then FUZZ_SEP and items.csv. The literal @ITEMS_SHA256@ in the
 * manifest is replaced by the digest of the items part, so inputs get past the digest check
 * and into the CSV; without it they test the refusal. */
#include <limits.h>
#include <string.h>

#include "../../core/sha256.h"
#include "../../formats/files/keep.h"
#include "fuzz.h"

#define PLACEHOLDER "@ITEMS_SHA256@"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const uint8_t *part[2];
    size_t len[2];
    size_t n = fuzz_split(data, size, part, len, 2);
    char mpath[PATH_MAX], ipath[PATH_MAX];
    fuzz_tmp_file("items.csv", n > 1 ? part[1] : NULL, n > 1 ? len[1] : 0, ipath);
    uint8_t d[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    struct kiln_err err = {0};
    FUZZ_CHECK(kiln_sha256_buf(n > 1 ? part[1] : (const uint8_t *)"", n > 1 ? len[1] : 0, d,
                               &err) == KILN_OK);
    kiln_sha256_hex(d, hex);

    /* The manifest with every placeholder replaced by the digest. */
    char *m = NULL;
    size_t mlen = 0;
    FILE *f = open_memstream(&m, &mlen);
    FUZZ_CHECK(f != NULL);
    const uint8_t *p = part[0], *end = part[0] + len[0];
    for (;;) {
        const uint8_t *at = memmem(p, (size_t)(end - p), PLACEHOLDER, sizeof PLACEHOLDER - 1);
        if (!at)
            break;
        fwrite(p, 1, (size_t)(at - p), f);
        fputs(hex, f);
        p = at + sizeof PLACEHOLDER - 1;
    }
    fwrite(p, 1, (size_t)(end - p), f);
    FUZZ_CHECK(fclose(f) == 0);
    fuzz_tmp_file("manifest.json", (const uint8_t *)m, mlen, mpath);
    free(m);

    struct kiln_keep k;
    int rc = kiln_keep_load(mpath, &k, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(rc == KILN_EINVAL || rc == KILN_EMISMATCH || rc == KILN_EIO);
        FUZZ_CHECK(err.msg[0] != '\0');
        FUZZ_CHECK(k.e == NULL && k.n == 0);
        return 0;
    }
    FUZZ_CHECK(strlen(k.manifest_sha256) == 64);
    for (size_t i = 0; i < k.n; i++) {
        FUZZ_CHECK(k.e[i].split >= KILN_SPLIT_TRAIN && k.e[i].split < KILN_NSPLITS);
        if (i)
            FUZZ_CHECK(memcmp(k.e[i - 1].sha256, k.e[i].sha256, KILN_SHA256_LEN) < 0);
        FUZZ_CHECK(kiln_keep_lookup(&k, k.e[i].sha256) == k.e[i].split);
    }
    if (k.n)
        fuzz_accept();
    kiln_keep_free(&k);
    return 0;
}
