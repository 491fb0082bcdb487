/* Leakage audit: everything that must share a split but does not. Groups, identical files,
 * identical pixels and near-identical pictures (difference hashes within BITS bits) that span
 * two splits, and classes missing from a split. Pure computation over a split catalogue. */
#ifndef KILN_AUDIT_H
#define KILN_AUDIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "err.h"

enum kiln_leak_kind { KILN_LEAK_GROUP = 0, KILN_LEAK_BYTES, KILN_LEAK_PIXELS, KILN_LEAK_NEAR,
                      KILN_LEAK_KINDS };
const char *kiln_leak_kind_name(int kind);

/* The near-duplicate radius in bits of the difference hash: the audit's default (split
 * --merge-near-duplicates without a value, and audit without --near), and the largest any
 * option accepts. */
#define KILN_AUDIT_NEAR_BITS 6
#define KILN_AUDIT_NEAR_BITS_MAX 16 /* "group", "identical-file", ... */

/* One finding: the items (indices into the catalogue) of one group, one set of identical
 * files or pixels, or one cluster of near-identical pictures (connected through pairs within
 * the radius), whose splits differ. */
struct kiln_leak {
    int kind;
    size_t first, count; /* range in kiln_audit.items */
};

struct kiln_audit {
    struct kiln_leak *leaks;
    size_t nleaks, cap;
    uint32_t *items;
    size_t nitems, icap;
    size_t per_kind[KILN_LEAK_KINDS];
    int near_bits; /* -1 when near duplicates were not checked */
    /* missing[s * nclasses + c] is 1 when class c has items in some split but none in s. */
    uint8_t *missing;
    size_t nclasses;
    size_t missing_count;
};

/* Audits cat's split column. near_bits < 0 skips the near-duplicate check. Findings are in a
 * deterministic order (kind, then smallest item). present[s] says which splits exist (NULL: all
 * that hold items), so an empty split of a two-way split is not reported as missing classes. */
int kiln_audit_run(const struct kiln_catalog *cat, int near_bits, const bool *present,
                   struct kiln_audit *out, struct kiln_err *err);
void kiln_audit_free(struct kiln_audit *a);

#endif
