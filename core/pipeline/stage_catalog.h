/* The files of the staged route (scan, split, pack, audit): a catalogue (catalog.csv) and the
 * record of how it was made beside it (catalog.json; for x.csv, x.json), loaded and saved
 * together, and the audit of a split catalogue or of an output folder. */
#ifndef KILN_STAGE_CATALOG_H
#define KILN_STAGE_CATALOG_H

#include <stdbool.h>

#include "../../formats/files/manifest.h"
#include "../audit.h"
#include "../catalog.h"
#include "../err.h"

/* The record's path beside a catalogue ("x.csv" -> "x.json"); malloc'ed, NULL without memory. */
char *kiln_stage_catalog_record_path(const char *csv);

/* Loads a catalogue (classes indexed). With need_split, a catalogue whose split column holds no
 * value is KILN_EINVAL: "CSV has no split WHAT; run kiln split". */
int kiln_stage_catalog_load(const char *csv, bool need_split, const char *what,
                            struct kiln_catalog *cat, bool *has_split, struct kiln_err *err);

/* Loads the scan and split records beside csv (NULL where a record is null); the caller frees
 * them (kiln_*_record_free, then free). Missing or malformed: an error saying why. */
int kiln_stage_catalog_load_record(const char *csv, struct kiln_scan_record **scan,
                                   struct kiln_split_record **split, struct kiln_err *err);

/* Writes the catalogue to csv, then the record beside it (rec->catalog set to csv). */
int kiln_stage_catalog_save(const char *csv, const struct kiln_catalog *cat,
                            struct kiln_catalog_record *rec, struct kiln_err *err);

#endif
