/* What the stages share: progress reports, paths in a folder, and the output folder of pack and build (created, checked to be empty or kiln's, cleared of what
 * interrupted runs left). Every stage and cmd/ may include it; it includes no stage. */
#ifndef KILN_PIPELINE_H
#define KILN_PIPELINE_H

#include <stddef.h>
#include <stdint.h>

#include "../err.h"

/* Progress of a stage, reported to the caller's function (cmd/ draws it). */
struct kiln_progress {
    size_t items, total_items; /* total 0 when unknown */
    uint64_t bytes;
};
typedef void (*kiln_progress_fn)(void *ctx, const struct kiln_progress *p);

/* "dir/name", malloc'ed; NULL when memory runs out. */
char *kiln_pipeline_path(const char *dir, const char *name);

/* Temporary files that interrupted runs left in an output folder (docs/cli.md, "Interrupted
 * runs"). */
struct kiln_debris {
    size_t removed;  /* files removed */
    uint64_t bytes;  /* their total size */
    size_t kept;     /* files of a process that is still running, left alone */
};

/* Creates outdir if needed and checks it is empty or an earlier kiln output, removes the
 * temporary files interrupted kiln runs left there (counted in debris), then removes the old
 * manifest and checksum list, so that from here until new ones are written nothing in the
 * folder claims to be complete. */
int kiln_pipeline_prepare_outdir(const char *outdir, struct kiln_debris *debris,
                                 struct kiln_err *err);

#endif
