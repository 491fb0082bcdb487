/* The records of how a catalogue was made (scan options and counts, split parameters and
 * results): filled from what the stages used and found, given their output names, and read back
 * into split parameters (reproduce). Their types and their JSON are formats/files/manifest.h's. */
#ifndef KILN_STAGE_RECORD_H
#define KILN_STAGE_RECORD_H

#include "../../formats/files/manifest.h"
#include "../split.h"
#include "../units.h"
#include "stage_scan.h"

/* Fills r (freed with kiln_scan_record_free) from a finished scan. */
int kiln_record_scan(struct kiln_scan_record *r, const char *const *sources, size_t nsources,
                     const struct kiln_scan_opts *o, const struct kiln_scan_report *rep,
                     const struct kiln_catalog *cat, struct kiln_err *err);
/* Fills r (freed with kiln_split_record_free) from a finished split. near: the split's checked
 * links (NULL when near duplicates were off); cat names the items of refused links. */
int kiln_record_split(struct kiln_split_record *r, const struct kiln_split_params *p,
                      const struct kiln_units *u, const struct kiln_split_report *rep,
                      const struct kiln_nearlinks *near, const struct kiln_catalog *cat,
                      struct kiln_err *err);
/* The split parameters a record gives (reproduce reruns them). */
int kiln_record_split_params(const struct kiln_split_record *r, struct kiln_split_params *p,
                             struct kiln_err *err);
/* The near-duplicate settings of a split record: *on and p; defaults and *on = true when there
 * is no record (a catalogue split by hand or not at all). */
void kiln_near_params_from_record(const struct kiln_split_record *r, bool *on,
                                  struct kiln_nearlink_params *p);

/* The records as an output may show them: copies (into *scan_out and *split_out, freed with
 * kiln_*_record_free) whose names -- the sources, the labels CSV, the group rule and the --keep
 * manifest -- pass through kiln_names_out, so they come out hashed with --hash-paths. A field
 * added to the records that can hold a name must be added here. NULL records stay NULL (the
 * outputs are then left zeroed). */
struct kiln_names;
int kiln_record_public(const struct kiln_scan_record *scan, const struct kiln_split_record *split,
                       const struct kiln_names *n, struct kiln_scan_record *scan_out,
                       struct kiln_split_record *split_out, struct kiln_err *err);

#endif
