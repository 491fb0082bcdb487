/* The walker table: from a source argument to the walker of its kind. */
#include <errno.h>

#include "walker.h"

static const struct kiln_walker *const walkers[] = {&kiln_walker_folder, &kiln_walker_archive};

int kiln_source_walk(const char *root, const struct kiln_walk_opts *opts, kiln_want_fn want,
                     kiln_entry_fn fn, void *ctx, struct kiln_walk_counts *counts,
                     struct kiln_err *err)
{
    struct stat st;
    if (stat(root, &st) != 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open source %s", root);
    for (size_t i = 0; i < sizeof walkers / sizeof walkers[0]; i++)
        if (walkers[i]->takes(&st))
            return walkers[i]->walk(root, opts, want, fn, ctx, counts, err);
    return kiln_err_set(err, KILN_EINVAL, "source %s is neither a folder nor an archive file",
                        root);
}
