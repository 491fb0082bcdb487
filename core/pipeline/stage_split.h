/* The split stage: loads --keep (the assignment of an earlier output) when asked, checks near
 * duplicates (stage_near.c) when they are on, and runs the split over a catalogue in memory
 * (core/split.c). Shared by split, build and reproduce's callers in cmd/. */
#ifndef KILN_STAGE_SPLIT_H
#define KILN_STAGE_SPLIT_H

#include <stdint.h>

#include "../audit.h"
#include "../catalog.h"
#include "../err.h"
#include "../split.h"
#include "../units.h"

/* Split parameters with their defaults: 80:10:10, exact, near duplicates on. */
void kiln_stage_split_defaults(struct kiln_split_params *p);

/* Runs the split over cat (classes indexed). With p->keep_manifest, the earlier output's
 * items.csv is loaded and checked first and p->keep_sha256 is filled; *old_split then receives
 * each item's split in that output (KILN_SPLIT_NONE when new; malloc'ed, the caller frees it),
 * so the caller can name the items that moved (rep->moved_items). Without --keep *old_split is
 * NULL. With p->near the checked links go to near (filled; the caller frees it with
 * kiln_nearlinks_free; jobs threads check them); the split uses the ones the unit rule accepts.
 * units is filled and owned by the caller (kiln_units_free). */
int kiln_stage_split(struct kiln_catalog *cat, struct kiln_split_params *p, unsigned jobs,
                     struct kiln_nearlinks *near, struct kiln_units *units,
                     struct kiln_split_report *rep, int8_t **old_split, struct kiln_err *err);

#endif
