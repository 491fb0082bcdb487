/* The JSON record of how a catalogue was made (scan options and counts, split parameters and
 * results). It sits beside catalog.csv as catalog.json and is copied into manifest.json. */
#ifndef KILN_STAGE_RECORD_H
#define KILN_STAGE_RECORD_H

#include <jansson.h>

#include "../split.h"
#include "stage_scan.h"
#include "../units.h"

json_t *kiln_scan_record(const char *const *sources, size_t nsources,
                         const struct kiln_scan_opts *o, const struct kiln_scan_report *rep,
                         const struct kiln_catalog *cat);
/* near: the split's checked links (NULL when near duplicates were off); cat names the items
 * of refused links. */
json_t *kiln_split_record(const struct kiln_split_params *p, const struct kiln_units *u,
                          const struct kiln_split_report *rep, const struct kiln_nearlinks *near,
                          const struct kiln_catalog *cat);
/* Reads the split parameters back from a split record (reproduce). */
int kiln_split_params_from_record(const json_t *split, struct kiln_split_params *p,
                                  struct kiln_err *err);
/* The near-duplicate settings of a split record ("near_duplicates"): *on and p; defaults and
 * *on = true when the record has none (a catalogue split by hand or not at all). */
void kiln_near_params_from_record(const json_t *split, bool *on, struct kiln_nearlink_params *p);

/* The evidence of one checked link, for records and reports: the two items (names, splits),
 * orientation, hash distances, the correlations that decided, hue, alignment, searches and the
 * unit rule's verdict. */
json_t *kiln_nearlink_record(const struct kiln_nearlink *l, const struct kiln_catalog *cat);

/* The scan and split records of catalog.json as an output may show them: a copy in which every
 * string value is passed through kiln_names_out unless its key is known to hold no name (rule
 * names, versions, digests, the seed and ratios); names therefore come out hashed with
 * --hash-paths, including those of fields added later. The split record's audit is left out:
 * pack audits what it packed and records that (manifest.json "audit"). NULL on failure. */
struct kiln_names;
json_t *kiln_record_public(const json_t *record, const struct kiln_names *n, struct kiln_err *err);

/* The audit result for manifest.json and catalog.json: counts per kind, the classes missing
 * from a split, and the findings (at most 100, each with its items' names and splits). */
struct kiln_audit;
json_t *kiln_audit_record(const struct kiln_audit *a, const struct kiln_catalog *cat);

#endif
