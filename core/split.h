/* Split assignment: a pure function of (content hashes, group keys, labels, seed, ratios, mode,
 * algorithm version). docs/split.md specifies every step so that it can be re-implemented. */
#ifndef KILN_SPLIT_H
#define KILN_SPLIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "err.h"
#include "nearlink.h"
#include "units.h"

#define KILN_SPLIT_ALGORITHM "kiln-split-v2"

enum kiln_split_mode { KILN_MODE_EXACT = 0, KILN_MODE_STABLE = 1 };
const char *kiln_split_mode_name(int mode);
int kiln_split_mode_parse(const char *name);

struct kiln_split_params {
    uint64_t seed;
    uint64_t ratio[KILN_NSPLITS]; /* weights in millionths; two-way splits leave ratio[1] = 0 */
    unsigned nparts;              /* 2 (train:test) or 3 (train:val:test) as written */
    int mode;
    bool stratify;
    bool near;     /* near duplicates join units (docs/near-duplicates.md); on by default */
    struct kiln_nearlink_params near_params;
    /* --keep: per catalogue item its split in an earlier output, KILN_SPLIT_NONE when new; NULL
     * without --keep. keep_to_test resolves units that join two old splits (docs/split.md). */
    const int8_t *old_split;
    bool keep_to_test;
    const char *keep_manifest; /* for the record: the old manifest's path and SHA-256 */
    char keep_sha256[KILN_SHA256_HEX];
};

/* Parses "80:10:10", "70:30", "0.8:0.1:0.1" or "80%:20%". Parts with a decimal point or a
 * percent sign must sum to 1 or 100; plain integers are weights. *weights_note is set to true
 * when integer weights do not sum to 100 (the command warns). Two parts mean train:test. */
int kiln_split_parse_ratios(const char *text, struct kiln_split_params *p, bool *weights_note,
                            struct kiln_err *err);
/* Writes the ratios as given, in the same decimal form ("80:10:10", "0.7:0.3"). */
void kiln_split_format_ratios(const struct kiln_split_params *p, char *buf, size_t len);

/* The unit key: the first 8 bytes, big-endian, of HMAC-SHA256 with key = seed as 8 bytes
 * little-endian and message = KILN_SPLIT_ALGORITHM || kind byte || id bytes. */
int kiln_split_unit_key(uint64_t seed, int id_kind, const void *id, size_t idlen, uint64_t *key,
                        struct kiln_err *err);

struct kiln_split_report {
    size_t units, mixed_units;
    size_t items[KILN_NSPLITS];
    size_t units_per_split[KILN_NSPLITS];
    size_t oversized_units; /* units larger than twice their stratum's target for their split */
    size_t kept_units, kept_items; /* units and items placed by --keep */
    size_t moved_items;            /* old items whose split changed (conflicts resolved) */
};

/* Assigns every unit (keys first) and copies the split and unit key to each item of cat.
 * Items outside any unit get KILN_SPLIT_NONE. With p->old_split, a unit whose old items name two
 * splits is an error naming two of them (KILN_EINVAL), unless p->keep_to_test. */
int kiln_split_assign(struct kiln_catalog *cat, struct kiln_units *units,
                      const struct kiln_split_params *p, struct kiln_split_report *rep,
                      struct kiln_err *err);

/* Split defaults: 80:10:10, exact, near duplicates on with the detector's defaults. */
void kiln_split_defaults(struct kiln_split_params *p);

/* The split over memory: units (near contributes the links the unit rule accepted, when
 * p->near; NULL when no link was checked), then the assignment. units is filled and owned by
 * the caller (kiln_units_free). */
int kiln_split_run(struct kiln_catalog *cat, const struct kiln_split_params *p,
                   const struct kiln_nearlinks *near, struct kiln_units *units,
                   struct kiln_split_report *rep, struct kiln_err *err);

#endif
