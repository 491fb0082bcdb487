/* Leakage audit: everything that must share a split but does not. Groups, identical files,
 * identical pixels, identical records and checked near-duplicate links that span two splits,
 * and classes missing from a split. Pure computation over a split catalogue and the links of
 * the near-duplicate stage (core/pipeline/stage_near.h). */
#ifndef KILN_AUDIT_H
#define KILN_AUDIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "err.h"
#include "nearlink.h"

enum kiln_leak_kind { KILN_LEAK_GROUP = 0, KILN_LEAK_BYTES, KILN_LEAK_PIXELS, KILN_LEAK_RECORD,
                      KILN_LEAK_NEAR, KILN_LEAK_KINDS };
const char *kiln_leak_kind_name(int kind); /* "group", "identical-file", ... */

/* One finding: the items (indices into the catalogue) of one group or one set of identical
 * files, pixels or records whose splits differ; or one near-duplicate link (two items, the
 * link with its evidence and verdict in near) between two splits. A link passed the pixel
 * check but is still a judgement, not a fact: reports call it a possible near duplicate. */
struct kiln_leak {
    int kind;
    size_t first, count; /* range in kiln_audit.items */
    struct kiln_nearlink near; /* KILN_LEAK_NEAR only */
};

struct kiln_audit {
    struct kiln_leak *leaks;
    size_t nleaks, cap;
    uint32_t *items;
    size_t nitems, icap;
    size_t per_kind[KILN_LEAK_KINDS];
    bool near_checked; /* near-duplicate links were given */
    struct kiln_nearlink_params near_params; /* when near_checked */
    /* missing[s * nclasses + c] is 1 when class c has items in some split but none in s. */
    uint8_t *missing;
    size_t nclasses;
    size_t missing_count;
};

/* Audits cat's split column. near: the checked links of the catalogue, or NULL when near
 * duplicates were not checked. record: per item a record digest (pack's own records), or NULL
 * to use the catalogue's record_digest values. Findings are in a deterministic order (kind,
 * then smallest item; links by their items). present[s] says which splits exist (NULL: all
 * that hold items), so an empty split of a two-way split is not reported as missing classes. */
int kiln_audit_run(const struct kiln_catalog *cat, const struct kiln_nearlinks *near,
                   const uint8_t (*record)[KILN_RECORD_DIGEST_LEN], const bool *present,
                   struct kiln_audit *out, struct kiln_err *err);
void kiln_audit_free(struct kiln_audit *a);

#endif
