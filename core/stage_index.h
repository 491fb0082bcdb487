/* A content index of source trees: the SHA-256 and location of every file (plain or archive
 * member) under the given sources, so recorded items can be found again by content whatever
 * their names or folders now are. Used by verify --source and reproduce. */
#ifndef KILN_STAGE_INDEX_H
#define KILN_STAGE_INDEX_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "arena.h"
#include "err.h"
#include "sha256.h"

struct kiln_index_entry {
    uint8_t sha256[KILN_SHA256_LEN];
    const char *source, *path, *member; /* in the index's arena */
    uint64_t size;
};

struct kiln_index {
    struct kiln_index_entry *e; /* sorted by (sha256, source, path, member) */
    size_t n, cap;
    size_t unreadable; /* entries without bytes (links, unreadable files) */
    struct kiln_arena strings;
};

/* Walks every source (folders and archives, hidden and system files skipped as by scan) and
 * hashes every regular file. Only errors of the run are returned; unreadable files are
 * counted. */
int kiln_index_build(const char *const *sources, size_t nsources, bool follow_links,
                     struct kiln_index *idx, struct kiln_err *err);
void kiln_index_free(struct kiln_index *idx);

/* The first entry with this digest (in location order), or NULL. */
const struct kiln_index_entry *kiln_index_find(const struct kiln_index *idx,
                                               const uint8_t sha256[KILN_SHA256_LEN]);

#endif
