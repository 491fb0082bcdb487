/* The assignment of an earlier output, for split --keep: the (file SHA-256 -> split) pairs of
 * the items.csv that sits beside an old manifest.json, checked against the manifest's digest. */
#ifndef KILN_KEEP_H
#define KILN_KEEP_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/catalog.h"
#include "../../core/err.h"

struct kiln_keep_entry {
    uint8_t sha256[KILN_SHA256_LEN];
    int8_t split;
};

struct kiln_keep {
    struct kiln_keep_entry *e; /* sorted by sha256 */
    size_t n;
    char manifest_sha256[KILN_SHA256_HEX];
};

/* Loads manifest_path's items.csv after checking its SHA-256 against the manifest's outputs.
 * Returns KILN_EINVAL (malformed), KILN_EMISMATCH (items.csv does not match its manifest, or
 * one file digest is listed with two splits), KILN_EIO or KILN_ENOMEM. */
int kiln_keep_load(const char *manifest_path, struct kiln_keep *k, struct kiln_err *err);
void kiln_keep_free(struct kiln_keep *k);

/* The old split of a file digest, or KILN_SPLIT_NONE. */
int kiln_keep_lookup(const struct kiln_keep *k, const uint8_t sha256[KILN_SHA256_LEN]);

/* Fills old[i] for every catalogue item (KILN_SPLIT_NONE where not found or not ok). */
void kiln_keep_map(const struct kiln_keep *k, const struct kiln_catalog *cat, int8_t *old);

#endif
