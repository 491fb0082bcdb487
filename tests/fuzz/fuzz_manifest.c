/* manifest.json readers: kiln_json_load (jansson, duplicate keys refused), the recipe that
 * reproduce rebuilds from it (kiln_recipe_from_json, which must accept what it writes), and the
 * verify stage reading an output folder holding this manifest.json and SHA256SUMS. The input is
 * manifest.json, then FUZZ_SEP and SHA256SUMS. */
#include <limits.h>
#include <string.h>

#include "../../core/pipeline/stage_verify.h"
#include "../../formats/files/manifest.h"
#include "fuzz.h"

static void on_issue(void *ctx, int kind, const char *msg)
{
    FUZZ_CHECK(kind >= KILN_ISSUE_DAMAGED && kind <= KILN_ISSUE_SOURCE_EXTRA);
    FUZZ_CHECK(msg && msg[0]);
    fuzz_outcome(kind, msg);
    ++*(size_t *)ctx;
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    const uint8_t *part[2];
    size_t len[2];
    size_t n = fuzz_split(data, size, part, len, 2);
    char mpath[PATH_MAX], spath[PATH_MAX];
    fuzz_tmp_file("manifest.json", part[0], len[0], mpath);
    fuzz_tmp_file("SHA256SUMS", n > 1 ? part[1] : NULL, n > 1 ? len[1] : 0, spath);

    json_t *m = NULL;
    struct kiln_err err = {0};
    int rc = kiln_json_load(mpath, &m, &err);
    fuzz_outcome(rc, rc ? err.msg : NULL);
    if (rc) {
        FUZZ_CHECK(rc == KILN_EINVAL && m == NULL && strstr(err.msg, mpath) != NULL);
        return 0;
    }
    struct kiln_recipe r;
    rc = kiln_recipe_from_json(json_object_get(m, "recipe"), &r, &err);
    fuzz_outcome(rc + 100, rc ? err.msg : NULL);
    FUZZ_CHECK(rc == KILN_OK || rc == KILN_EINVAL || rc == KILN_EUNSUPPORTED);
    if (rc == KILN_OK) {
        /* What the recipe writes, it reads back to the same recipe. */
        json_t *j = kiln_recipe_to_json(&r);
        struct kiln_recipe back;
        FUZZ_CHECK(kiln_recipe_from_json(j, &back, &err) == KILN_OK);
        json_t *j2 = kiln_recipe_to_json(&back);
        char *a = kiln_json_dump(j), *b = kiln_json_dump(j2);
        FUZZ_CHECK(a && b && strcmp(a, b) == 0);
        free(a);
        free(b);
        json_decref(j);
        json_decref(j2);
        fuzz_accept();
    }
    json_decref(m);

    size_t issues = 0;
    struct kiln_verify_report rep;
    rc = kiln_stage_verify(fuzz_tmpdir(), on_issue, &issues, &rep, &err);
    FUZZ_CHECK(rc == KILN_OK || rc == KILN_EMISMATCH || rc == KILN_EINVAL);
    fuzz_outcome(rc + 200, rc ? err.msg : NULL);
    FUZZ_CHECK(issues == rep.problems || rc == KILN_EINVAL);
    FUZZ_CHECK((rc == KILN_EMISMATCH) == (rep.problems > 0));
    return 0;
}
