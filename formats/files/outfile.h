/* Output files that never look complete before they are: written under a temporary hidden name
 * in the destination folder, flushed and fsync'ed, then renamed into place. Every temporary file
 * of the process is listed while it exists, so an interrupted run can remove them all
 * (kiln_outfile_remove_all). */
#ifndef KILN_OUTFILE_H
#define KILN_OUTFILE_H

#include <stdbool.h>
#include <stdint.h>
#include <stdio.h>

#include "../../core/err.h"

struct kiln_outfile {
    char *final_path;
    char *tmp_path;
    int fd;
    FILE *f; /* stream over fd, for text writers; NULL until kiln_outfile_stream */
};

/* Creates "<dir>/.<name>.tmp-<pid>-<n>" next to final_path. Failures are KILN_EWRITE naming
 * final_path (KILN_ENOMEM for memory); after kiln_outfile_remove_all every call fails. */
int kiln_outfile_open(struct kiln_outfile *of, const char *final_path, struct kiln_err *err);
/* Whether name (no folder) is a temporary name kiln_outfile_open makes for the final name
 * base; sets *pid to the process that made it. */
bool kiln_outfile_is_temp_name(const char *name, const char *base, long *pid);
/* Gives a stdio stream on the file (owned by of). */
FILE *kiln_outfile_stream(struct kiln_outfile *of, struct kiln_err *err);
/* Writes a whole buffer at an offset, retrying short writes; a failure is KILN_EWRITE naming
 * the final name ("cannot write OUT/train.kten: No space left on device"). Safe from several
 * threads for disjoint ranges. */
int kiln_outfile_write_at(struct kiln_outfile *of, const void *buf, size_t len, uint64_t off,
                          struct kiln_err *err);
/* Flushes, fsyncs, closes and renames into place, then fsyncs the folder. Checks every step;
 * on failure (KILN_EWRITE) the temporary file is removed. Frees of's strings either way. */
int kiln_outfile_commit(struct kiln_outfile *of, struct kiln_err *err);
/* Closes and removes the temporary file (safe to call after a failed commit or twice). */
void kiln_outfile_abort(struct kiln_outfile *of);

/* For a run that is being interrupted (SIGINT, SIGTERM): removes every temporary file this
 * process has open, counting them (*files) and their sizes (*bytes), and from then on refuses
 * to create or rename any, so nothing is half-replaced while the process ends. Never returns
 * the list to normal use: call it only on the way out. Safe from any thread, but not from a
 * signal handler (it takes a lock); kiln calls it from a thread that waits for signals. */
void kiln_outfile_remove_all(size_t *files, uint64_t *bytes);

/* fsyncs a folder so a rename inside it is durable; a failure is KILN_EWRITE. */
int kiln_fsync_dir(const char *dir, struct kiln_err *err);

/* SHA-256 and size of a whole file, read in 1 MiB blocks. */
int kiln_file_sha256(const char *path, uint8_t out[32], uint64_t *size, struct kiln_err *err);

#endif
