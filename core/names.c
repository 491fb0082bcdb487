/* Hashed names: HMAC-SHA256 of each name under a key, and the catalogue pass that applies it. */
#include "names.h"

#include <string.h>

#include "sha256.h"

static const char public_key[] = "kiln-paths-v1";

void kiln_names_init(struct kiln_names *n, bool hash, const uint8_t *key, size_t keylen)
{
    n->hash = hash;
    n->key = key ? key : (const uint8_t *)public_key;
    n->keylen = key ? keylen : sizeof public_key - 1;
}

bool kiln_names_is_hashed(const char *s)
{
    if (strncmp(s, "h:", 2) != 0 || strlen(s) != KILN_NAME_HASH_LEN - 1)
        return false;
    for (const char *p = s + 2; *p; p++)
        if (!((*p >= '0' && *p <= '9') || (*p >= 'a' && *p <= 'f')))
            return false;
    return true;
}

int kiln_names_out(const struct kiln_names *n, const char *name, char buf[KILN_NAME_HASH_LEN],
                   const char **out, struct kiln_err *err)
{
    *out = name;
    if (!n->hash || !name[0] || kiln_names_is_hashed(name))
        return KILN_OK;
    uint8_t mac[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    int rc = kiln_hmac_sha256(n->key, n->keylen, name, strlen(name), mac, err);
    if (rc)
        return rc;
    kiln_sha256_hex(mac, hex);
    memcpy(buf, "h:", 2);
    memcpy(buf + 2, hex, 32);
    buf[KILN_NAME_HASH_LEN - 1] = '\0';
    *out = buf;
    return KILN_OK;
}

/* A byte that can be part of a name's token: a match of a name inside a longer word (a short
 * folder name "b" inside "bytes") is not that name. */
static bool word_byte(unsigned char c)
{
    return c >= 0x80 || c == '_' || c == '-' || c == '.' || (c >= '0' && c <= '9') ||
           ((c | 0x20) >= 'a' && (c | 0x20) <= 'z');
}

/* Replaces every whole-token occurrence of name in *text by its hash (arena copy). */
static int scrub(const struct kiln_names *n, struct kiln_arena *a, const char **text,
                 const char *name, struct kiln_err *err)
{
    const size_t nl = strlen(name);
    if (!nl || !strstr(*text, name))
        return KILN_OK;
    char hash[KILN_NAME_HASH_LEN];
    const char *h;
    int rc = kiln_names_out(n, name, hash, &h, err);
    if (rc || h == name)
        return rc;
    char out[1024];
    size_t used = 0;
    const char *s = *text;
    while (*s && used + KILN_NAME_HASH_LEN < sizeof out) {
        const bool at = strncmp(s, name, nl) == 0 &&
                        (s == *text || !word_byte((unsigned char)s[-1])) &&
                        !word_byte((unsigned char)s[nl]);
        if (at) {
            memcpy(out + used, h, KILN_NAME_HASH_LEN - 1);
            used += KILN_NAME_HASH_LEN - 1;
            s += nl;
        } else {
            out[used++] = *s++;
        }
    }
    out[used] = '\0';
    *text = kiln_arena_strdup(a, out);
    return *text ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "out of memory");
}

static const char *last_component(const char *path)
{
    const char *slash = strrchr(path, '/');
    return slash ? slash + 1 : path;
}

int kiln_names_catalog(const struct kiln_names *n, struct kiln_catalog *cat, struct kiln_err *err)
{
    if (!n->hash)
        return KILN_OK;
    for (size_t i = 0; i < cat->n; i++) {
        struct kiln_item *it = &cat->items[i];
        if (!it->from) { /* reading still needs the real names */
            int rc = kiln_catalog_set_from(cat, it, it->source, it->path, it->member, err);
            if (rc)
                return rc;
        }
        const char *raw[] = {it->source, it->path, it->member, last_component(it->path),
                             last_component(it->member)};
        for (size_t k = 0; k < sizeof raw / sizeof raw[0]; k++) {
            int rc = scrub(n, &cat->strings, &it->reason, raw[k], err);
            if (rc)
                return rc;
        }
        const char **names[] = {&it->source, &it->path, &it->member, &it->group};
        for (size_t k = 0; k < sizeof names / sizeof names[0]; k++) {
            char buf[KILN_NAME_HASH_LEN];
            const char *out;
            int rc = kiln_names_out(n, *names[k], buf, &out, err);
            if (rc)
                return rc;
            if (out != *names[k] && !(*names[k] = kiln_arena_strdup(&cat->strings, out)))
                return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        }
    }
    return KILN_OK;
}
