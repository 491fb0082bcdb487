/* The catalogue: one row per candidate file found by scan, extended by split, read by pack.
 * Rows live in one array and their strings in one arena, so an item costs a few hundred bytes. */
#ifndef KILN_CATALOG_H
#define KILN_CATALOG_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "arena.h"
#include "err.h"
#include "sha256.h"

/* Row status vocabulary. The names (kiln_status_name) are what catalog.csv holds and what
 * docs/statuses.md documents; the numbers are internal. */
enum kiln_status {
    KILN_ST_OK = 0,
    KILN_ST_EMPTY,          /* zero-byte file */
    KILN_ST_UNREADABLE,     /* the OS refused to open or read it */
    KILN_ST_NOT_IMAGE,      /* content matches no known image format */
    KILN_ST_UNSUPPORTED,    /* a known image format or feature kiln does not decode */
    KILN_ST_CORRUPT,        /* malformed image data */
    KILN_ST_TRUNCATED,      /* image data ends early */
    KILN_ST_TOO_LARGE,      /* header claims more pixels or a larger side than the limits */
    KILN_ST_SYMLINK,        /* symbolic link, not followed */
    KILN_ST_NESTED_ARCHIVE, /* an archive inside an archive, not descended */
    KILN_ST_ENCRYPTED,      /* encrypted archive member */
    KILN_ST_ARCHIVE_LINK,   /* hard or symbolic link stored in an archive */
    KILN_ST_SPECIAL,        /* device, FIFO, socket or other non-regular entry */
    KILN_ST_UNLABELLED,     /* the label rule gives this file no label */
    KILN_ST_LINK_LOOP,      /* a followed link leads back into a folder already being walked */
    KILN_ST_COUNT
};

const char *kiln_status_name(int status);
/* Returns the status for a name, or -1. */
int kiln_status_parse(const char *name);

#define KILN_SPLIT_NONE (-1)
enum kiln_split_id { KILN_SPLIT_TRAIN = 0, KILN_SPLIT_VAL = 1, KILN_SPLIT_TEST = 2, KILN_NSPLITS = 3 };
const char *kiln_split_name(int split); /* "train", "val", "test", "" for none */
int kiln_split_parse(const char *name);  /* -1 for "" or unknown */

#define KILN_RECORD_DIGEST_LEN 16
#define KILN_FP_NONE UINT32_MAX /* no fingerprint (no decode, or a hand-made catalogue) */
/* The catalogue was read without a store: its fingerprints were checked, not kept, so it must
 * not be written back (formats/files/catalog_csv.c refuses). */
#define KILN_FP_SKIPPED (UINT32_MAX - 1)

/* A place to read an item's bytes from. */
struct kiln_location {
    const char *source, *path, *member;
};

struct kiln_item {
    const char *source; /* source root as given on the command line */
    const char *path;   /* relative path under the source (of the archive, for members) */
    const char *member; /* member path inside the archive, "" for plain files */
    const char *format; /* decoder name ("png", "jpeg", ...) or "" */
    const char *label;  /* "" when none */
    const char *group;  /* "" when none */
    const char *reason; /* human explanation when status != ok, else "" */
    const char *notes;  /* facts that do not change pixels ("interlaced; sRGB ignored"), or "" */
    /* Where pack reads the bytes when that differs from the recorded location (reproduce finds
     * moved files by content; hashed names keep the real ones here); NULL = the recorded
     * source, path and member. In the catalogue's arena; not stored in CSV. One pointer, not
     * three: a row's size counts a million times (docs/performance.md, memory at scale). */
    const struct kiln_location *from;
    uint64_t size;
    uint64_t unit_key; /* set by split: the keyed hash of the item's unit */
    uint8_t sha256[KILN_SHA256_LEN];       /* of the file bytes */
    uint8_t pixel_sha256[KILN_SHA256_LEN]; /* of the canonical decoded pixels (docs/split.md) */
    /* kiln build: the first 16 bytes of the SHA-256 of the item's record (docs/split.md) */
    uint8_t record_digest[KILN_RECORD_DIGEST_LEN];
    uint32_t width, height; /* oriented size */
    int32_t class_index;    /* position of label in the sorted class list, -1 = none */
    uint16_t pages;
    uint8_t channels, depth; /* as decoded: channels 1-4, depth 8 or 16 */
    uint8_t stored_depth;    /* bits per sample in the file */
    uint8_t orientation;     /* EXIF orientation as stored (1-8) */
    uint8_t status;
    uint8_t has_pixels; /* pixel_sha256 is valid */
    uint8_t has_record; /* record_digest is valid */
    uint8_t has_sha;    /* the bytes were read and sha256 is valid (also for empty files) */
    uint8_t pixel_scale; /* the decode the pixel digest and fingerprint come from: 1, or a
                            JPEG DCT reduction 2, 4, 8 (kiln build; docs/split.md) */
    int8_t split;        /* KILN_SPLIT_NONE until split */
    uint32_t pool_slot;  /* kiln build: the item's record in the record pool, or UINT32_MAX */
    uint32_t fp_slot;    /* the near-duplicate fingerprint in cat->fps, or KILN_FP_NONE */
};

struct kiln_fpstore; /* formats/files/fpstore.h */

#define KILN_CATALOG_INTERN_SLOTS 4096
#define KILN_CATALOG_INTERN_MAXLEN 64

struct kiln_catalog {
    struct kiln_item *items;
    size_t n, cap;
    char **classes; /* byte-wise sorted distinct labels of usable items; strings in the arena */
    size_t nclasses;
    struct kiln_arena strings;
    /* Short strings that repeat from row to row (source, format, label, group, reason, notes)
     * are stored once: at 10^6 rows that is tens of MiB (docs/performance.md). An open-
     * addressing table of KILN_CATALOG_INTERN_SLOTS, filled to half at most, then left as is. */
    const char **interned;
    size_t ninterned;
    /* The near-duplicate fingerprints of the items (fp_slot), or NULL. Whoever sets it sets
     * fps_close, which kiln_catalog_free calls (core/ does no I/O itself). */
    struct kiln_fpstore *fps;
    void (*fps_close)(struct kiln_fpstore *);
};

void kiln_catalog_init(struct kiln_catalog *cat);
void kiln_catalog_free(struct kiln_catalog *cat);

/* Appends a copy of *item; its strings (NULL allowed, meaning "") are copied into the arena.
 * Returns KILN_OK or KILN_ENOMEM. */
int kiln_catalog_add(struct kiln_catalog *cat, const struct kiln_item *item, struct kiln_err *err);

/* Records that pack reads its bytes from (source, path, member) instead of the item's
 * recorded location; the strings must live as long as the catalogue. KILN_ENOMEM. */
int kiln_catalog_set_from(struct kiln_catalog *cat, struct kiln_item *it, const char *source,
                          const char *path, const char *member, struct kiln_err *err);

/* Sorts rows by (source, path, member) in byte order, so the catalogue never depends on the
 * order in which a file system or an archive listed its entries. */
void kiln_catalog_sort(struct kiln_catalog *cat);

/* Rebuilds classes from the labels of ok items (byte-wise sorted, distinct) and sets every
 * item's class_index (-1 for no label or non-ok rows). */
int kiln_catalog_index_classes(struct kiln_catalog *cat, struct kiln_err *err);

/* Counts items with each status into counts[KILN_ST_COUNT]. */
void kiln_catalog_count_status(const struct kiln_catalog *cat, size_t counts[KILN_ST_COUNT]);

/* The form of a path or member name that the label and group rules see (docs/cli.md,
 * "Relative name"): components split at '/', empty and "." components dropped, so
 * "./class//x.png" and "class/x.png" give "class/x.png". ".." is kept as it is. The result
 * is written to out (truncated to len, which must be at least 1). */
void kiln_name_normalise(const char *name, char *out, size_t len);

/* The name the label and group rules see: path, member, or "path/member" (docs/cli.md),
 * written to buf (truncated to len). */
void kiln_catalog_relname(const char *path, const char *member, char *buf, size_t len);
/* The name an item goes by in messages: "source/relname" (truncated to len). */
void kiln_catalog_item_name(const struct kiln_item *it, char *buf, size_t len);

/* Byte order comparison of two items' locations (source, path, member). */
int kiln_item_location_cmp(const struct kiln_item *a, const struct kiln_item *b);

#endif
