/* The split stage: the only part of splitting that reads a file (--keep's manifest and
 * items.csv); the rest is core/split.c over memory. */
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/keep.h"
#include "../checked.h"
#include "stage_near.h"
#include "stage_split.h"

void kiln_stage_split_defaults(struct kiln_split_params *p)
{
    kiln_split_defaults(p);
}

/* The old split of every catalogue item from p->keep_manifest; *old is malloc'ed. */
static int load_keep(const struct kiln_catalog *cat, struct kiln_split_params *p, int8_t **old,
                     struct kiln_err *err)
{
    struct kiln_keep keep = {0};
    int rc = kiln_keep_load(p->keep_manifest, &keep, err);
    if (!rc) {
        *old = kiln_alloc_array(cat->n ? cat->n : 1, 1);
        if (!*old)
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory");
    }
    if (!rc) {
        kiln_keep_map(&keep, cat, *old);
        memcpy(p->keep_sha256, keep.manifest_sha256, sizeof p->keep_sha256);
    }
    kiln_keep_free(&keep);
    return rc;
}

int kiln_stage_split(struct kiln_catalog *cat, struct kiln_split_params *p, unsigned jobs,
                     struct kiln_nearlinks *near, struct kiln_units *units,
                     struct kiln_split_report *rep, int8_t **old_split, struct kiln_err *err)
{
    *old_split = NULL;
    int rc = p->keep_manifest ? load_keep(cat, p, old_split, err) : KILN_OK;
    p->old_split = *old_split;
    if (!rc && p->near)
        rc = kiln_stage_near(cat, &p->near_params, jobs, near, err);
    if (!rc)
        rc = kiln_split_run(cat, p, p->near ? near : NULL, units, rep, err);
    p->old_split = NULL; /* the caller owns the array; the record needs only the manifest */
    if (rc) {
        free(*old_split);
        *old_split = NULL;
    }
    return rc;
}
