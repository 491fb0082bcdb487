/* SHA-256 (FIPS 180-4) through OpenSSL's EVP interface, which uses the CPU's SHA instructions.
 * A context is a plain struct the caller owns, one per thread. */
#ifndef KILN_SHA256_H
#define KILN_SHA256_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "err.h"

#define KILN_SHA256_LEN 32
#define KILN_SHA256_HEX 65 /* 64 hex digits and a NUL */

struct kiln_sha256 {
    void *evp;   /* EVP_MD_CTX *, opaque to callers */
    void *md;    /* EVP_MD *, fetched once per context */
    bool failed; /* libcrypto refused an update (or the reset after a digest) */
};

/* Returns KILN_OK or KILN_ENOMEM/KILN_EINTERNAL with err set. */
int kiln_sha256_init(struct kiln_sha256 *ctx, struct kiln_err *err);
/* Feeds bytes. A refusal by libcrypto is remembered and reported by kiln_sha256_final, so a
 * loop of updates needs one check at the end. */
void kiln_sha256_update(struct kiln_sha256 *ctx, const void *data, size_t len);
/* Writes the digest and resets the context for reuse. Returns KILN_EINTERNAL with err set (and
 * out zeroed) when libcrypto refused any step since the last digest: the result must not be
 * used. */
int kiln_sha256_final(struct kiln_sha256 *ctx, uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
    __attribute__((warn_unused_result));
void kiln_sha256_free(struct kiln_sha256 *ctx);

/* One-shot digest of a buffer. */
__attribute__((warn_unused_result)) int kiln_sha256_buf(const void *data, size_t len, uint8_t out[KILN_SHA256_LEN], struct kiln_err *err);

/* Lower-case hex; hex must hold KILN_SHA256_HEX bytes. */
void kiln_sha256_hex(const uint8_t digest[KILN_SHA256_LEN], char hex[KILN_SHA256_HEX]);
/* Parses 64 hex digits (either case); returns 0 on success, -1 otherwise. */
int kiln_sha256_parse(const char *hex, uint8_t digest[KILN_SHA256_LEN]);

/* HMAC-SHA256 (RFC 2104) built on the functions above, under one key for many messages: the
 * padded key blocks are made once, and one context serves every message. */
struct kiln_hmac {
    struct kiln_sha256 sha;
    uint8_t ipad[64], opad[64];
};
/* Returns KILN_OK, or KILN_ENOMEM/KILN_EINTERNAL with err set and nothing to free. */
int kiln_hmac_init(struct kiln_hmac *h, const void *key, size_t keylen, struct kiln_err *err)
    __attribute__((warn_unused_result));
/* Returns KILN_OK, or KILN_EINTERNAL with err set and out zeroed; h works again afterwards. */
int kiln_hmac_digest(struct kiln_hmac *h, const void *msg, size_t msglen,
                     uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
    __attribute__((warn_unused_result));
void kiln_hmac_free(struct kiln_hmac *h);
/* One message under one key. */
int kiln_hmac_sha256(const void *key, size_t keylen, const void *msg, size_t msglen,
                     uint8_t out[KILN_SHA256_LEN], struct kiln_err *err);
#endif
