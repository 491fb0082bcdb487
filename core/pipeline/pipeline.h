/* What the stages share: progress reports, paths in a folder, and the output folder of pack and build (created, checked to be empty or kiln's, cleared of what
 * interrupted runs left). Every stage and cmd/ may include it; it includes no stage. */
#ifndef KILN_PIPELINE_H
#define KILN_PIPELINE_H

#include <stdbool.h>
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

/* What preparing an output folder found of interrupted runs (docs/cli.md, "Interrupted runs"). */
struct kiln_debris {
    size_t removed;   /* temporary files removed */
    uint64_t bytes;   /* their total size */
    size_t kept;      /* files of a process that is still running, left alone */
    bool restored;    /* a run killed while putting its files in place had left the folder
                       * half-replaced: the earlier output was put back */
    long restored_pid; /* that run's process */
};

/* Creates outdir if needed, finishes what a killed run left (its journal: the earlier output is
 * put back; its temporary and backup files: removed, counted in debris), and checks the folder
 * may be written: empty but for hidden files, or a kiln output by content (its manifest.json's
 * identifier, formats/files/owner.h) holding no file of a kiln name that its SHA256SUMS does not
 * list. Nothing of an earlier output is removed: its files are replaced only by
 * kiln_pipeline_replace_outputs, when the new ones are complete. Refusals are KILN_EWRITE and
 * say what was found. */
int kiln_pipeline_prepare_outdir(const char *outdir, struct kiln_debris *debris,
                                 struct kiln_err *err);

/* From here until kiln_pipeline_replace_outputs or _discard_outputs, every output file
 * committed in outdir is kept under its temporary name (kiln_outfile_stage). */
int kiln_pipeline_stage_outputs(const char *outdir, struct kiln_err *err);
/* Removes the staged outputs: the folder is as it was. */
void kiln_pipeline_discard_outputs(void);
/* Puts the staged outputs (written: their names) in place in one journaled step and takes away
 * the earlier output's files that were not written again (those its SHA256SUMS lists), after
 * checking the folder is still the kiln output (or empty folder) it was. On failure the
 * folder is as it was and the staged files are gone. */
int kiln_pipeline_replace_outputs(const char *outdir, const char *const *written,
                                  size_t nwritten, struct kiln_err *err);

#endif
