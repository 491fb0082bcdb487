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
/* For text writers: kiln_outfile_open and kiln_outfile_stream in one; NULL after setting err,
 * with nothing left behind. */
FILE *kiln_outfile_open_stream(struct kiln_outfile *of, const char *final_path,
                               struct kiln_err *err);
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

/* ---- Replacing an output folder's files together (docs/cli.md, "What a failed run leaves").
 * A run stages its folder, writes every file through kiln_outfile_open and _commit as usual
 * (which then only finish them under their temporary names), and puts them all in place with
 * kiln_outfile_replace, or drops them with kiln_outfile_discard: until then the folder's files
 * are exactly as they were. The replace writes a journal first (KILN_OUTFILE_JOURNAL: each
 * file's final, temporary and backup name), moves each old file aside under a backup name
 * (".<name>.old-<pid>-<n>") and the new one into place, and removes the journal: that removal is
 * the moment the new files become the output. A replace that fails or is interrupted, in the
 * process (it rolls back) or by a kill (kiln_outfile_recover, next time), leaves the old files. */
#define KILN_OUTFILE_JOURNAL ".kiln-journal"

/* From now until kiln_outfile_replace or _discard, kiln_outfile_commit of a file whose final
 * path is in dir (the same string) flushes, fsyncs and closes it and keeps it, still listed,
 * under its temporary name; writing one final name twice keeps the second. One folder at a
 * time. */
int kiln_outfile_stage(const char *dir, struct kiln_err *err);
/* The temporary path holding final_path's staged file (malloc'ed), or NULL: to hash a file
 * before it is in place. */
char *kiln_outfile_staged_path(const char *final_path);
/* Puts every staged file in place and takes away the files named in remove (names inside the
 * staged folder; those that do not exist or are staged are skipped), all or nothing, and ends
 * staging. KILN_OK, or KILN_EWRITE with the folder as it was and the staged files removed. */
int kiln_outfile_replace(const char *const *remove, size_t nremove, struct kiln_err *err);
/* Removes the staged files and ends staging: the folder is as it was. */
void kiln_outfile_discard(void);

/* What kiln_outfile_recover found. */
struct kiln_recovery {
    bool journal;  /* the folder held a journal */
    bool busy;     /* ... of a process that is still running: nothing was touched */
    bool restored; /* ... of a process that was killed while renaming: the old files are back */
    long pid;      /* the process that wrote it */
};
/* Looks for the journal of a replace in dir. When its process is gone, puts the folder back as
 * it was before that replace (or, for a journal cut short before any rename, removes its
 * temporary files) and removes the journal. Every name in the journal must be one is_output
 * accepts, with kiln's temporary and backup names for the journal's process; otherwise nothing
 * is touched and the result is KILN_EINVAL naming the journal. */
int kiln_outfile_recover(const char *dir, bool (*is_output)(const char *name),
                         struct kiln_recovery *r, struct kiln_err *err);
/* Whether name is a backup name the replace makes for base, and for which process. */
bool kiln_outfile_is_backup_name(const char *name, const char *base, long *pid);

/* fsyncs a folder so a rename inside it is durable; a failure is KILN_EWRITE. */
int kiln_fsync_dir(const char *dir, struct kiln_err *err);

/* SHA-256 and size of a whole file, read in 1 MiB blocks. */
int kiln_file_sha256(const char *path, uint8_t out[32], uint64_t *size, struct kiln_err *err);

#endif
