/* Whether a folder is a kiln output, decided from its content, never from file names alone
 * (docs/cli.md, "Output folders"): a folder is kiln's when its manifest.json begins with kiln's
 * format identifier. Only the first bytes are read, so a manifest of 10^6 items costs nothing.
 * The files kiln wrote there are the ones its SHA256SUMS lists, with manifest.json and
 * SHA256SUMS themselves; everything else in the folder is someone else's. */
#ifndef KILN_OWNER_H
#define KILN_OWNER_H

#include <stdbool.h>
#include <stddef.h>

#include "../../core/err.h"

/* The first member of every manifest.json kiln writes. */
#define KILN_MANIFEST_FORMAT_KEY "format"
#define KILN_MANIFEST_FORMAT "kiln output manifest"

/* The names a kiln output folder may hold, in SHA256SUMS order; bit i of a file set is
 * kiln_owner_names[i]. */
#define KILN_OWNER_NNAMES 7
extern const char *const kiln_owner_names[KILN_OWNER_NNAMES];
/* Index of name in kiln_owner_names, or -1. */
int kiln_owner_name_index(const char *name);
/* Whether name is one of kiln_owner_names (for kiln_outfile_recover). */
bool kiln_owner_is_output_name(const char *name);

enum kiln_owner_kind {
    KILN_OWNER_NONE = 0, /* no manifest.json (nor anything else of kiln's known) */
    KILN_OWNER_KILN,     /* a manifest.json that says it is kiln's */
    KILN_OWNER_OTHER     /* a manifest.json that is not kiln's */
};

struct kiln_owner {
    enum kiln_owner_kind kind;
    unsigned files;  /* KILN_OWNER_KILN: the kiln files present (bits of kiln_owner_names) */
    char found[256]; /* KILN_OWNER_OTHER: what the manifest holds instead, for the refusal */
};

/* Looks at dir/manifest.json (and, when it is kiln's, dir/SHA256SUMS). A manifest written by
 * kiln 0.1.0 before the identifier existed is recognised by its first two members
 * ("manifest_version": 1, then "kiln_version"). Errors are only those of reading (KILN_EIO). */
int kiln_owner_of(const char *dir, struct kiln_owner *o, struct kiln_err *err);

/* Whether the first bytes of a JSON text are those of a kiln manifest; when not, says what they
 * are instead in found (may be NULL). */
bool kiln_owner_manifest_prefix(const char *text, size_t len, char *found, size_t found_len);

#endif
