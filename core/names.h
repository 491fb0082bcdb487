/* Names in outputs. Every file, folder, archive, member and group name that kiln writes into
 * an output passes through kiln_names_out: unchanged, or with --hash-paths as "h:" followed by
 * the first 32 hex digits of HMAC-SHA256(key, name) (docs/formats.md, "Hashed names"). The
 * stages apply it in one place each for the catalogue (kiln_names_catalog) and for the JSON
 * records copied into a manifest (core/pipeline/stage_record.c, kiln_record_public). */
#ifndef KILN_NAMES_H
#define KILN_NAMES_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "catalog.h"
#include "err.h"

#define KILN_NAME_HASH_LEN 35 /* "h:" + 32 hex digits + NUL */

struct kiln_names {
    bool hash;          /* --hash-paths */
    const uint8_t *key; /* the --path-key bytes, or the public key "kiln-paths-v1" */
    size_t keylen;
};

/* key NULL: the public key (anyone who guesses a name can confirm it; docs). */
void kiln_names_init(struct kiln_names *n, bool hash, const uint8_t *key, size_t keylen);

/* True for "h:" followed by exactly 32 lower-case hex digits: a name hashed already, which
 * passes unchanged, so that hashing twice (reproduce of a hashed output) changes nothing. */
bool kiln_names_is_hashed(const char *s);

/* Sets *out to what an output may show for name: name itself when hashing is off, when it is
 * empty ("no member", "no group") or hashed already; otherwise its hash, written into buf. */
int kiln_names_out(const struct kiln_names *n, const char *name, char buf[KILN_NAME_HASH_LEN],
                   const char **out, struct kiln_err *err);

/* Replaces, in every item of cat, source, path, member and group by their output form, and
 * each occurrence of those names (and of their last path components) inside the item's reason
 * by its hash. Strings come from cat's arena. With hashing, the raw names are kept in the
 * item's from_* fields first (unless set already), so the bytes can still be read. */
int kiln_names_catalog(const struct kiln_names *n, struct kiln_catalog *cat, struct kiln_err *err);

#endif
