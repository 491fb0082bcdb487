/* The reproduce stage: from an old manifest and today's source trees, find every recorded item
 * by its content, rerun the recorded split and recipe, and compare every rebuilt output with
 * the recorded SHA-256. */
#ifndef KILN_STAGE_REPRODUCE_H
#define KILN_STAGE_REPRODUCE_H

#include <stdbool.h>
#include <stddef.h>

#include "../err.h"
#include "../sha256.h"
#include "stage_pack.h"
#include "pipeline.h"

struct kiln_reproduce_opts {
    const char *manifest;
    const char *const *sources;
    size_t nsources;
    const char *outdir;
    bool allow_missing; /* rebuild without the items that cannot be found */
    /* The --path-key of a hashed output, to tell moved items from items in place; NULL: the
     * public key. Never needed for the rebuild itself. */
    const uint8_t *path_key;
    size_t path_key_len;
    unsigned jobs;
    kiln_progress_fn progress;
    void *progress_ctx;
};

enum kiln_reproduce_note {
    KILN_REPRO_MISSING = 1,   /* a recorded item is in no source */
    KILN_REPRO_MOVED = 2,     /* found by content at another location */
    KILN_REPRO_LIBRARY = 3,   /* a library version differs from the recorded one */
    KILN_REPRO_SPLIT = 4,     /* the rerun split puts an item elsewhere than recorded */
};
typedef void (*kiln_reproduce_fn)(void *ctx, int kind, const char *msg);

#define KILN_REPRO_MAX_OUTPUTS 8

struct kiln_reproduce_output {
    char name[64];
    char recorded[KILN_SHA256_HEX], rebuilt[KILN_SHA256_HEX];
    bool identical;
};

struct kiln_reproduce_report {
    size_t items, found, missing, moved, split_differs, library_differs;
    /* Names are hashed with a key kiln was not given and no item was at its recorded place
     * under the public key: whether items moved cannot be told (moved stays 0). */
    bool places_unknown;
    size_t noutputs;
    struct kiln_reproduce_output out[KILN_REPRO_MAX_OUTPUTS];
    bool all_identical;
    struct kiln_debris debris; /* interrupted runs' temporary files removed from outdir */
};

/* Returns KILN_OK when the rebuild ran (see rep->all_identical), KILN_EMISMATCH when recorded
 * items are missing and allow_missing is off (nothing is rebuilt), or another code when the
 * manifest or its files cannot be read or the rebuild fails. */
int kiln_stage_reproduce(const struct kiln_reproduce_opts *o, kiln_reproduce_fn fn, void *ctx,
                         struct kiln_reproduce_report *rep, struct kiln_err *err);

#endif
