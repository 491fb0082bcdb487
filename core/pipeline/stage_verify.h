/* The verify stage: re-check every output of a packed folder against manifest.json, against
 * SHA256SUMS, and the per-array SHA-256 values inside each .kten header. */
#ifndef KILN_STAGE_VERIFY_H
#define KILN_STAGE_VERIFY_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../err.h"

enum kiln_issue_kind {
    KILN_ISSUE_DAMAGED = 1, /* an output differs from its recorded checksum */
    KILN_ISSUE_MISSING = 2, /* an output is missing */
    KILN_ISSUE_SOURCE_MISSING = 3, /* a recorded source file is nowhere in the sources */
    KILN_ISSUE_SOURCE_CHANGED = 4, /* the file at a recorded location has other content */
    KILN_ISSUE_SOURCE_MOVED = 5,   /* found by content at another location (not a problem) */
    KILN_ISSUE_SOURCE_EXTRA = 6    /* a source file the output does not record (not a problem) */
};

/* Called once per problem found, with a message naming the file and what differs. */
typedef void (*kiln_issue_fn)(void *ctx, int kind, const char *msg);

struct kiln_verify_report {
    size_t files_checked, arrays_checked, problems;
    unsigned long long bytes_hashed;
    /* with sources */
    size_t sources_checked, sources_missing, sources_changed, sources_moved, sources_extra;
    /* Names hashed with a key verify was not given, and nothing at its recorded place under
     * the public key: moved and changed files cannot be told apart from elsewhere. */
    bool places_unknown;
    /* A run killed while it put its files in place had left the folder half-replaced: the
     * earlier output was put back before checking (kiln_outfile_recover), by process: */
    bool restored;
    long restored_pid;
};

/* Returns KILN_OK when every check passed, KILN_EMISMATCH when some did (each reported through
 * fn), or another code when the folder cannot be verified at all (no readable manifest, or a
 * kiln run replacing its files right now). A killed run's half-done replace is undone first. */
int kiln_stage_verify(const char *outdir, kiln_issue_fn fn, void *ctx,
                      struct kiln_verify_report *rep, struct kiln_err *err);

/* Checks the recorded source files of a packed folder (its catalog.csv, itself checked against
 * the manifest) against the given source trees by content: each recorded file must be found
 * by its SHA-256; a recorded location whose file has other content is "changed". Moved and
 * extra files are reported too but are not problems. Locations are compared in the recorded
 * form, so with hashed names (--hash-paths) the source files' names are hashed with path_key
 * (NULL: the public key) first. Returns KILN_OK, KILN_EMISMATCH when a file is missing or
 * changed, or another code when the check cannot run. */
int kiln_stage_verify_sources(const char *outdir, const char *const *sources, size_t nsources,
                              const uint8_t *path_key, size_t path_key_len, kiln_issue_fn fn,
                              void *ctx, struct kiln_verify_report *rep, struct kiln_err *err);

#endif
