/* Units: the sets of catalogue items that must land in the same split (same group, same file
 * bytes, same decoded pixels, same record in kiln build, and near duplicates the unit rule
 * accepted). They are the connected components of those relations, found with union-find
 * (docs/split.md, "Units"). */
#ifndef KILN_UNITS_H
#define KILN_UNITS_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "err.h"

#define KILN_NO_UNIT UINT32_MAX

enum kiln_unit_id_kind { KILN_UNIT_ID_CONTENT = 0, KILN_UNIT_ID_GROUP = 1 };

struct kiln_unit {
    uint64_t key;      /* keyed hash of the unit id (split.h) */
    uint32_t size;     /* number of items */
    uint32_t id_item;  /* item whose sha256 or group is the unit id */
    int32_t stratum;   /* most frequent class index, ties to the smallest; -1 = unlabelled */
    uint8_t id_kind;   /* enum kiln_unit_id_kind */
    uint8_t mixed;     /* members carry more than one label */
    uint8_t oversized; /* exact mode: the unit alone exceeds twice its split's target */
    int8_t split;
};

struct kiln_units {
    uint32_t *unit_of; /* per catalogue item; KILN_NO_UNIT for items that are not usable */
    struct kiln_unit *units;
    size_t nitems, nunits;
    /* unions that joined two components, per relation */
    size_t merged_bytes, merged_pixels, merged_groups, merged_records, merged_near;
};

/* Optional extra relation: pairs (a, b) of item indices to join, e.g. near duplicates. */
struct kiln_pairs {
    uint32_t (*pair)[2];
    size_t n, cap;
};

/* The exact units: exact[i] = the smallest index of item i's component under the relations
 * other than near duplicates (group, file bytes, pixels, record), i itself for rows that are
 * not ok. exact holds cat->n entries. */
int kiln_units_exact(const struct kiln_catalog *cat, uint32_t *exact, struct kiln_err *err);

/* Forms units over the ok items of cat. extra (the accepted near-duplicate links) may be NULL. Sets each unit's size, id, stratum
 * and mixed flag; keys and splits are left for kiln_split_assign. */
int kiln_units_build(const struct kiln_catalog *cat, const struct kiln_pairs *extra,
                     struct kiln_units *out, struct kiln_err *err);
void kiln_units_free(struct kiln_units *u);

#endif
