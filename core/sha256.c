/* SHA-256 via libcrypto EVP; kiln never implements the compression function itself. */
#include "sha256.h"

#include <openssl/evp.h>
#include <string.h>

int kiln_sha256_init(struct kiln_sha256 *ctx, struct kiln_err *err)
{
    ctx->evp = NULL;
    ctx->md = NULL;
    ctx->failed = false;
    /* Fetched once per context: EVP_sha256() makes libcrypto look the algorithm up again on
     * every initialisation, which cost a split of 10^6 units more than the digests did. */
    EVP_MD *md = EVP_MD_fetch(NULL, "SHA256", NULL);
    if (!md)
        return kiln_err_set(err, KILN_EINTERNAL, "cannot fetch SHA-256 from libcrypto");
    EVP_MD_CTX *c = EVP_MD_CTX_new();
    if (!c) {
        EVP_MD_free(md);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a SHA-256 context");
    }
    if (EVP_DigestInit_ex2(c, md, NULL) != 1) {
        EVP_MD_CTX_free(c);
        EVP_MD_free(md);
        return kiln_err_set(err, KILN_EINTERNAL, "cannot initialise SHA-256 in libcrypto");
    }
    ctx->evp = c;
    ctx->md = md;
    return KILN_OK;
}

void kiln_sha256_update(struct kiln_sha256 *ctx, const void *data, size_t len)
{
    if (len && !ctx->failed && EVP_DigestUpdate(ctx->evp, data, len) != 1)
        ctx->failed = true;
}

int kiln_sha256_final(struct kiln_sha256 *ctx, uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
{
    unsigned int n = 0;
    const bool ok = !ctx->failed && EVP_DigestFinal_ex(ctx->evp, out, &n) == 1 &&
                    n == KILN_SHA256_LEN;
    /* A context that cannot be re-armed stays failed, so its next digest reports it. */
    ctx->failed = EVP_DigestInit_ex2(ctx->evp, ctx->md, NULL) != 1;
    if (ok)
        return KILN_OK;
    memset(out, 0, KILN_SHA256_LEN);
    return kiln_err_set(err, KILN_EINTERNAL, "libcrypto could not compute a SHA-256 digest");
}

void kiln_sha256_free(struct kiln_sha256 *ctx)
{
    EVP_MD_CTX_free(ctx->evp);
    EVP_MD_free(ctx->md);
    ctx->evp = NULL;
    ctx->md = NULL;
}

int kiln_sha256_buf(const void *data, size_t len, uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
{
    struct kiln_sha256 ctx;
    int rc = kiln_sha256_init(&ctx, err);
    if (rc)
        return rc;
    kiln_sha256_update(&ctx, data, len);
    rc = kiln_sha256_final(&ctx, out, err);
    kiln_sha256_free(&ctx);
    return rc;
}

void kiln_sha256_hex(const uint8_t digest[KILN_SHA256_LEN], char hex[KILN_SHA256_HEX])
{
    static const char digits[] = "0123456789abcdef";
    for (int i = 0; i < KILN_SHA256_LEN; i++) {
        hex[2 * i] = digits[digest[i] >> 4];
        hex[2 * i + 1] = digits[digest[i] & 15];
    }
    hex[64] = '\0';
}

/* One more than each hex digit's value, 0 for any other byte (a catalogue of 10^6 rows holds
 * 1.3 * 10^8 digits to read). */
static const uint8_t hex_rev[256] = {
    ['0'] = 1, ['1'] = 2, ['2'] = 3, ['3'] = 4, ['4'] = 5, ['5'] = 6, ['6'] = 7, ['7'] = 8,
    ['8'] = 9, ['9'] = 10, ['a'] = 11, ['b'] = 12, ['c'] = 13, ['d'] = 14, ['e'] = 15, ['f'] = 16,
    ['A'] = 11, ['B'] = 12, ['C'] = 13, ['D'] = 14, ['E'] = 15, ['F'] = 16,
};

int kiln_sha256_parse(const char *hex, uint8_t digest[KILN_SHA256_LEN])
{
    if (strlen(hex) != 64)
        return -1;
    for (int i = 0; i < KILN_SHA256_LEN; i++) {
        const int hi = hex_rev[(unsigned char)hex[2 * i]];
        const int lo = hex_rev[(unsigned char)hex[2 * i + 1]];
        if (!hi || !lo)
            return -1;
        digest[i] = (uint8_t)((hi - 1) << 4 | (lo - 1));
    }
    return 0;
}

int kiln_hmac_init(struct kiln_hmac *h, const void *key, size_t keylen, struct kiln_err *err)
{
    uint8_t k[64] = {0};
    int rc;
    h->sha = (struct kiln_sha256){NULL, NULL, false}; /* nothing to free after a failure */
    if (keylen > 64) {
        rc = kiln_sha256_buf(key, keylen, k, err);
        if (rc)
            return rc;
    } else if (keylen) {
        memcpy(k, key, keylen);
    }
    for (int i = 0; i < 64; i++) {
        h->ipad[i] = k[i] ^ 0x36;
        h->opad[i] = k[i] ^ 0x5c;
    }
    return kiln_sha256_init(&h->sha, err);
}

int kiln_hmac_digest(struct kiln_hmac *h, const void *msg, size_t msglen,
                     uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
{
    uint8_t inner[KILN_SHA256_LEN];
    kiln_sha256_update(&h->sha, h->ipad, 64);
    kiln_sha256_update(&h->sha, msg, msglen);
    int rc = kiln_sha256_final(&h->sha, inner, err);
    if (rc) {
        memset(out, 0, KILN_SHA256_LEN);
        return rc;
    }
    kiln_sha256_update(&h->sha, h->opad, 64);
    kiln_sha256_update(&h->sha, inner, sizeof inner);
    return kiln_sha256_final(&h->sha, out, err);
}

void kiln_hmac_free(struct kiln_hmac *h)
{
    kiln_sha256_free(&h->sha);
}

int kiln_hmac_sha256(const void *key, size_t keylen, const void *msg, size_t msglen,
                     uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
{
    struct kiln_hmac h;
    int rc = kiln_hmac_init(&h, key, keylen, err);
    if (rc)
        return rc;
    rc = kiln_hmac_digest(&h, msg, msglen, out, err);
    kiln_hmac_free(&h);
    return rc;
}
