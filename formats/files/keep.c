/* Reading an earlier assignment for split --keep. */
#include "keep.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/checked.h"
#include "csv.h"
#include "manifest.h"
#include "outfile.h"

static int cmp_entry(const void *a, const void *b)
{
    return memcmp(((const struct kiln_keep_entry *)a)->sha256,
                  ((const struct kiln_keep_entry *)b)->sha256, KILN_SHA256_LEN);
}

void kiln_keep_free(struct kiln_keep *k)
{
    free(k->e);
    memset(k, 0, sizeof *k);
}

int kiln_keep_load(const char *manifest_path, struct kiln_keep *k, struct kiln_err *err)
{
    memset(k, 0, sizeof *k);
    json_t *m;
    int rc = kiln_manifest_load(manifest_path, &m, err);
    if (rc)
        return rc;
    const char *want = NULL;
    size_t i;
    json_t *o;
    json_array_foreach(json_object_get(m, "outputs"), i, o)
    {
        const char *name = kiln_json_str(o, "name");
        if (name && strcmp(name, KILN_FILE_ITEMS) == 0)
            want = kiln_json_str(o, "sha256");
    }
    char *dir = strdup(manifest_path), *items = NULL;
    char *slash = dir ? strrchr(dir, '/') : NULL;
    if (dir) {
        const char *d = slash ? (*slash = '\0', dir) : ".";
        size_t n = strlen(d) + sizeof "/items.csv";
        items = malloc(n);
        if (items)
            snprintf(items, n, "%s/items.csv", d);
    }
    free(dir);
    if (!items) {
        json_decref(m);
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    }
    if (!want) {
        rc = kiln_err_set(err, KILN_EINVAL, "%s lists no items.csv output", manifest_path);
        goto out;
    }
    uint8_t d[KILN_SHA256_LEN];
    uint64_t size;
    char hex[KILN_SHA256_HEX];
    rc = kiln_file_sha256(items, d, &size, err);
    if (rc)
        goto out;
    kiln_sha256_hex(d, hex);
    if (strcmp(hex, want) != 0) {
        rc = kiln_err_set(err, KILN_EMISMATCH,
                          "%s does not match the SHA-256 recorded in %s; the old split cannot be "
                          "trusted",
                          items, manifest_path);
        goto out;
    }
    rc = kiln_file_sha256(manifest_path, d, &size, err);
    if (rc)
        goto out;
    kiln_sha256_hex(d, k->manifest_sha256);
    struct kiln_csv_reader r;
    rc = kiln_csv_open(&r, items, err);
    if (rc)
        goto out;
    int got = kiln_csv_next(&r, err);
    int csha = -1, csplit = -1;
    for (size_t f = 0; got == 1 && f < r.nfields; f++) {
        if (strcmp(r.fields[f], "sha256") == 0)
            csha = (int)f;
        else if (strcmp(r.fields[f], "split") == 0)
            csplit = (int)f;
    }
    if (got == 0)
        rc = kiln_err_set(err, KILN_EINVAL, "%s is empty: not even a header row", items);
    else if (got == 1 && (csha < 0 || csplit < 0))
        rc = kiln_err_set(err, KILN_EINVAL, "%s has no sha256 and split columns", items);
    size_t cap = 0;
    while (!rc && (got = kiln_csv_next(&r, err)) == 1) {
        if ((size_t)csha >= r.nfields || (size_t)csplit >= r.nfields || !r.fields[csplit][0])
            continue;
        int sp = kiln_split_parse(r.fields[csplit]);
        if (!kiln_grow((void **)&k->e, &cap, k->n + 1, sizeof *k->e)) {
            rc = kiln_err_set(err, KILN_ENOMEM, "out of memory reading %s", items);
            break;
        }
        if (sp < 0 || kiln_sha256_parse(r.fields[csha], k->e[k->n].sha256) != 0) {
            rc = kiln_err_set(err, KILN_EINVAL, "%s:%zu: bad sha256 or split", items, r.line);
            break;
        }
        k->e[k->n++].split = (int8_t)sp;
    }
    if (!rc && got < 0)
        rc = -got;
    kiln_csv_close(&r);
    if (!rc) {
        if (k->n > 1) /* k->e is NULL for a header-only file, and qsort may not take NULL */
            qsort(k->e, k->n, sizeof *k->e, cmp_entry);
        size_t u = 0;
        for (size_t j = 0; j < k->n && !rc; j++) {
            if (u && memcmp(k->e[u - 1].sha256, k->e[j].sha256, KILN_SHA256_LEN) == 0) {
                if (k->e[u - 1].split != k->e[j].split) {
                    char hexd[KILN_SHA256_HEX];
                    kiln_sha256_hex(k->e[j].sha256, hexd);
                    rc = kiln_err_set(err, KILN_EMISMATCH,
                                      "%s lists the file digest %s in two splits (%s and %s)",
                                      items, hexd, kiln_split_name(k->e[u - 1].split),
                                      kiln_split_name(k->e[j].split));
                }
                continue;
            }
            k->e[u++] = k->e[j];
        }
        k->n = u;
    }
out:
    if (rc)
        kiln_keep_free(k);
    free(items);
    json_decref(m);
    return rc;
}

int kiln_keep_lookup(const struct kiln_keep *k, const uint8_t sha256[KILN_SHA256_LEN])
{
    struct kiln_keep_entry key;
    memcpy(key.sha256, sha256, KILN_SHA256_LEN);
    const struct kiln_keep_entry *hit = k->n ? bsearch(&key, k->e, k->n, sizeof key, cmp_entry) : NULL;
    return hit ? hit->split : KILN_SPLIT_NONE;
}

void kiln_keep_map(const struct kiln_keep *k, const struct kiln_catalog *cat, int8_t *old)
{
    for (size_t i = 0; i < cat->n; i++)
        old[i] = cat->items[i].status == KILN_ST_OK
                     ? (int8_t)kiln_keep_lookup(k, cat->items[i].sha256)
                     : (int8_t)KILN_SPLIT_NONE;
}
