/* Source walking: folders (recursively) and archives (read in place through libarchive, never
 * extracted). A walk yields one entry per candidate file with its bytes in memory, or with a
 * status saying why it has none (symlink, unreadable, nested archive, ...). */
#ifndef KILN_SOURCE_H
#define KILN_SOURCE_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../../core/err.h"

struct kiln_source_entry {
    const char *root;   /* the source as given on the command line */
    const char *path;   /* relative path under root; for members, the archive's path ("" when
                           the archive is the source itself) */
    const char *member; /* member path inside the archive, "" for plain files */
    int status;         /* enum kiln_status: KILN_ST_OK when data holds the file's bytes */
    char reason[256];   /* when status != ok */
    uint8_t *data;      /* malloc'ed bytes (set for ok entries, and for nested archives so they
                           can be hashed); ownership passes to the entry callback */
    size_t size;
};

struct kiln_walk_opts {
    bool follow_links;
    uint64_t max_file_bytes; /* larger files get status too-large without being read */
};

/* Default bound on one file or archive member (scan's --max-file-size): 1 GiB holds the
 * largest image --max-pixels allows in the common layouts (2^28 pixels: 8-bit RGB or 16-bit
 * grey uncompressed), while a bomb (a small zip with a 2 GB member, a sparse file) is refused
 * before a byte of it is read. */
#define KILN_DEFAULT_MAX_FILE_BYTES ((uint64_t)1 << 30)

/* Files skipped without a row (hidden files, OS junk), counted per kind. */
struct kiln_walk_counts {
    size_t hidden, junk;
    /* Folders under a source that are kiln outputs by content (their manifest.json says so,
     * formats/files/owner.h): an output written inside a source is never catalogued. */
    size_t outputs;
    char first_output[256]; /* the byte-wise smallest one's relative name */
};

/* Receives each entry and owns e->data from then on. A non-OK return stops the walk. */
typedef int (*kiln_entry_fn)(void *ctx, struct kiln_source_entry *e, struct kiln_err *err);
/* Asked before reading an entry's bytes; false skips it silently (used to fetch chosen items).
 * NULL means every entry. */
typedef bool (*kiln_want_fn)(void *ctx, const char *path, const char *member);

/* Walks root: a folder, or an archive file. Entries come in an unspecified order; callers that
 * need an order sort. Returns KILN_OK, the callback's code, or KILN_EIO when root itself cannot
 * be opened. */
int kiln_source_walk(const char *root, const struct kiln_walk_opts *opts, kiln_want_fn want,
                     kiln_entry_fn fn, void *ctx, struct kiln_walk_counts *counts,
                     struct kiln_err *err);

/* The one list of names skipped without a row (docs/statuses.md): returns "hidden", "junk" or
 * NULL for one path component. */
const char *kiln_source_skip_kind(const char *name);

/* True when the first bytes are an archive or compressed stream libarchive should open. */
bool kiln_archive_sniff(const uint8_t *head, size_t len);

/* Walks the members of the archive file at fs_path (reported with the given root and path). */
int kiln_archive_walk(const char *fs_path, const char *root, const char *path,
                      const struct kiln_walk_opts *opts, kiln_want_fn want, kiln_entry_fn fn,
                      void *ctx, struct kiln_walk_counts *counts, struct kiln_err *err);

/* Reads a whole regular file into memory (used by the folder walker and by pack). Returns
 * KILN_OK, KILN_EIO (err says why) or KILN_ETOOLARGE. */
int kiln_source_read_file(const char *fs_path, uint64_t max_bytes, uint8_t **data, size_t *size,
                          struct kiln_err *err);

/* Library version for the manifest ("libarchive 3.6.2"). */
const char *kiln_archive_library_version(void);

#endif
