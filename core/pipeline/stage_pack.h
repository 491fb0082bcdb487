/* The pack stage: decode every item that has a split, prepare one fixed-size record each,
 * write train/val/test .kten files at computed offsets, compute exact statistics, and write
 * items.csv, catalog.csv, manifest.json and SHA256SUMS, all renamed into place only when
 * complete. */
#ifndef KILN_STAGE_PACK_H
#define KILN_STAGE_PACK_H

#include <stdbool.h>

#include "../../formats/files/manifest.h"
#include "../catalog.h"
#include "../err.h"
#include "../nearlink.h"
#include "../recipe.h"
#include "../stats.h"
#include "pipeline.h"

struct kiln_pack_opts {
    struct kiln_recipe recipe; /* finished (kiln_recipe_finish) */
    const char *outdir;
    unsigned jobs;
    size_t queue_bytes; /* file bytes waiting for the workers; 0: kiln_queue_bytes_for(jobs) */
    /* The records of how the catalogue was made (catalog.json), copied into the manifest with
     * their names in output form; NULL: unknown (null). The split record's parts decide
     * whether val.kten is written. */
    const struct kiln_scan_record *scan;
    const struct kiln_split_record *split;
    /* With recipe.hash_paths, every name reaches the outputs as "h:" + 32 hex digits of
     * HMAC-SHA256(path_key, name) (core/names.h, docs/formats.md); names hashed already (a
     * reproduced hashed output) stay as they are. */
    const uint8_t *path_key; /* NULL: the public key "kiln-paths-v1" (docs: weaker) */
    size_t path_key_len;
    kiln_progress_fn progress;
    void *progress_ctx;
    /* kiln build: records prepared during scan (each item's pool_slot); no decoding here. */
    struct kiln_record_pool *pool;
    /* Read rows whose path leaves its source (absolute, or with a ".." step); scan never
     * writes such rows, so by default they are refused as a hand-edited catalogue's. */
    bool allow_outside_paths;
    /* Two identical records in different splits stop the pack (KILN_ELEAK, both items named)
     * unless this is set; then they are recorded as audit findings. */
    bool allow_identical;
    /* The catalogue's checked near-duplicate links for the audit (kiln build passes the
     * split's); NULL: pack checks them itself from cat->fps with near_params. */
    const struct kiln_nearlinks *near;
    struct kiln_nearlink_params near_params;
};

struct kiln_pack_report {
    struct kiln_debris debris;   /* found when the output folder was prepared */
    bool present[KILN_NSPLITS];  /* a file was written for the split */
    size_t records[KILN_NSPLITS];
    struct kiln_stats stats[KILN_NSPLITS];
    size_t dct_reduced;          /* items decoded at a reduced scale */
    uint64_t bytes_read;
    size_t skipped;              /* catalogue rows not packed (not ok, or no split) */
    size_t leaks, missing_classes; /* audit findings recorded in the manifest */
    size_t near_leaks;             /* of which possible near duplicates */
    size_t identical_records;      /* pairs of identical records in two splits (allowed) */
};

/* Packs cat (loaded, classes indexed, split assigned) into o->outdir. The folder is created if
 * missing; it must be empty or hold an earlier kiln output, whose manifest is removed first so
 * that a failed run never leaves a manifest describing files it did not write. */
int kiln_stage_pack(struct kiln_catalog *cat, const struct kiln_pack_opts *o,
                    struct kiln_pack_report *rep, struct kiln_err *err);

#endif
