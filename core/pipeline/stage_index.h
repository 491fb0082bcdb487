/* A content index of source trees: the SHA-256 and location of every file (plain or archive
 * member) under the given sources, so recorded items can be found again by content whatever
 * their names or folders now are. Used by verify --source and reproduce. */
#ifndef KILN_STAGE_INDEX_H
#define KILN_STAGE_INDEX_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../arena.h"
#include "../err.h"
#include "../sha256.h"

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
 * hashes every regular file of at most max_bytes (files larger than every recorded item cannot
 * hold one, and are not read: that bounds memory by the largest item). Only errors of the run
 * are returned; unreadable and skipped files are counted. */
int kiln_index_build(const char *const *sources, size_t nsources, bool follow_links,
                     uint64_t max_bytes, struct kiln_index *idx, struct kiln_err *err);
/* The largest recorded size of a catalogue's items (at least 1): the max_bytes to index for. */
struct kiln_catalog;
uint64_t kiln_index_max_bytes(const struct kiln_catalog *cat);
void kiln_index_free(struct kiln_index *idx);

/* The first entry with this digest (in location order), or NULL. */
const struct kiln_index_entry *kiln_index_find(const struct kiln_index *idx,
                                               const uint8_t sha256[KILN_SHA256_LEN]);

/* Where a recorded item is now: among the entries with its digest, the one at its recorded
 * path and member if there is one (*at_place set), else the first in location order (a copy
 * elsewhere, or the item moved); *hit NULL when no entry has the digest. Locations are
 * compared in the form the record holds them: each candidate's names go through
 * kiln_names_out first (hashed when the output's names are). */
struct kiln_item;
struct kiln_names;
int kiln_index_locate(const struct kiln_index *idx, const struct kiln_item *it,
                      const struct kiln_names *names, const struct kiln_index_entry **hit,
                      bool *at_place, struct kiln_err *err);

#endif
