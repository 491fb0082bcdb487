/* The kinds of source kiln reads, one walker each behind one table (registry.c), as decoders
 * are: a source argument goes to the first walker that takes what it names. */
#ifndef KILN_WALKER_H
#define KILN_WALKER_H

#include <stdbool.h>
#include <sys/stat.h>

#include "source.h"

struct kiln_walker {
    const char *name; /* "folder", "archive" */
    /* Whether the walker reads a source that stat describes as st. */
    bool (*takes)(const struct stat *st);
    /* Walks root as kiln_source_walk does (source.h). */
    int (*walk)(const char *root, const struct kiln_walk_opts *opts, kiln_want_fn want,
                kiln_entry_fn fn, void *ctx, struct kiln_walk_counts *counts,
                struct kiln_err *err);
};

extern const struct kiln_walker kiln_walker_folder;  /* source_folder.c */
extern const struct kiln_walker kiln_walker_archive; /* source_archive.c */

#endif
