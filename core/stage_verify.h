/* The verify stage: re-check every output of a packed folder against manifest.json, against
 * SHA256SUMS, and the per-array SHA-256 values inside each .kten header. */
#ifndef KILN_STAGE_VERIFY_H
#define KILN_STAGE_VERIFY_H

#include <stddef.h>

#include "err.h"

enum kiln_issue_kind { KILN_ISSUE_DAMAGED = 1, KILN_ISSUE_MISSING = 2 };

/* Called once per problem found, with a message naming the file and what differs. */
typedef void (*kiln_issue_fn)(void *ctx, int kind, const char *msg);

struct kiln_verify_report {
    size_t files_checked, arrays_checked, problems;
    unsigned long long bytes_hashed;
};

/* Returns KILN_OK when every check passed, KILN_EMISMATCH when some did (each reported through
 * fn), or another code when the folder cannot be verified at all (no readable manifest). */
int kiln_stage_verify(const char *outdir, kiln_issue_fn fn, void *ctx,
                      struct kiln_verify_report *rep, struct kiln_err *err);

#endif
