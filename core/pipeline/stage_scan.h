/* The scan stage: walk sources, hash and probe every file, decode it once for the pixel digest
 * and near-duplicate fingerprint, apply the label and group rules, and fill a sorted catalogue. Runs a
 * reader thread and --jobs decode workers joined by a byte-bounded queue. */
#ifndef KILN_STAGE_SCAN_H
#define KILN_STAGE_SCAN_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../../formats/decoders/decoder.h"
#include "../../formats/sources/source.h"
#include "../catalog.h"
#include "../err.h"
#include "pipeline.h"

enum kiln_label_rule { KILN_LABELS_FOLDER = 0, KILN_LABELS_NONE = 1, KILN_LABELS_CSV = 2 };
const char *kiln_label_rule_name(int rule);

struct kiln_scan_opts {
    int labels;             /* enum kiln_label_rule */
    const char *labels_csv; /* for KILN_LABELS_CSV */
    const char *group_regex; /* POSIX ERE on the relative name; first capture group; or NULL */
    struct kiln_walk_opts walk;
    struct kiln_decode_limits limits;
    unsigned jobs;
    size_t queue_bytes; /* file bytes waiting for the workers; 0: kiln_queue_bytes_for(jobs) */
    kiln_progress_fn progress;
    void *progress_ctx;
    /* kiln build: prepare each usable item's record from the scan's one decode, at the scale
     * the pool's recipe needs, and store it in the pool (NULL: a plain scan). */
    struct kiln_record_pool *pool;
};

void kiln_scan_opts_defaults(struct kiln_scan_opts *o);

struct kiln_scan_report {
    size_t hidden, junk;
    size_t outputs;          /* kiln output folders under a source, skipped */
    char first_output[256];  /* the first of them, as source/relative name */
    size_t status[KILN_ST_COUNT];
    uint64_t bytes;
    size_t group_matched, group_unmatched; /* usable files, with a group rule */
    char first_unmatched[256]; /* byte-wise smallest relative name the group rule missed */
    size_t groups, groups_shared; /* distinct group keys of usable files; those with 2+ files */
    size_t csv_rows, csv_rows_unused; /* label CSV rows, and rows that matched no file */
    char first_unused_csv_row[256];
};

/* Scans sources into cat (which must be empty), sorted by location, classes indexed; each
 * decoded picture's near-duplicate fingerprint goes into cat->fps when it is set. Errors of
 * individual files become rows; only errors of the run itself (a source that cannot be
 * opened, a bad option, memory) are returned. */
int kiln_stage_scan(const char *const *sources, size_t nsources, const struct kiln_scan_opts *o,
                    struct kiln_catalog *cat, struct kiln_scan_report *rep, struct kiln_err *err);

/* Loads a labels CSV (--labels csv:FILE) with scan's own loader and checks it, then frees it:
 * KILN_OK with *rows set, or the error scan would report. Lets tests/fuzz/ reach the loader. */
int kiln_labels_csv_check(const char *path, size_t *rows, struct kiln_err *err);

#endif
