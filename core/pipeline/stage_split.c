/* The split stage: the only part of splitting that reads a file (--keep's manifest and
 * items.csv); the rest is core/split.c over memory. */
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/keep.h"
#include "../checked.h"
#include "stage_split.h"

void kiln_stage_split_defaults(struct kiln_split_params *p)
{
    struct kiln_err e;
    bool note;
    memset(p, 0, sizeof *p);
    p->near_bits = -1;
    kiln_split_parse_ratios("80:10:10", p, &note, &e);
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

int kiln_stage_split(struct kiln_catalog *cat, struct kiln_split_params *p,
                     struct kiln_units *units, struct kiln_split_report *rep, int8_t **old_split,
                     struct kiln_err *err)
{
    *old_split = NULL;
    int rc = p->keep_manifest ? load_keep(cat, p, old_split, err) : KILN_OK;
    p->old_split = *old_split;
    if (!rc)
        rc = kiln_split_run(cat, p, units, rep, err);
    p->old_split = NULL; /* the caller owns the array; the record needs only the manifest */
    if (rc) {
        free(*old_split);
        *old_split = NULL;
    }
    return rc;
}

int kiln_stage_split_audit(const struct kiln_catalog *cat, const struct kiln_split_params *p,
                           struct kiln_audit *a, struct kiln_err *err)
{
    return kiln_audit_run(cat, p->near_bits >= 0 ? p->near_bits : KILN_AUDIT_NEAR_BITS, NULL, a,
                          err);
}
