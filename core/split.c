/* Unit keys and the exact and stable dealing rules of docs/split.md. */
#include "split.h"

#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "checked.h"
#include "sha256.h"
#include "sort.h"

static const char *const mode_names[] = {"exact", "stable"};

const char *kiln_split_mode_name(int mode)
{
    return mode == KILN_MODE_EXACT || mode == KILN_MODE_STABLE ? mode_names[mode] : "unknown";
}

int kiln_split_mode_parse(const char *name)
{
    for (int i = 0; i < 2; i++)
        if (strcmp(name, mode_names[i]) == 0)
            return i;
    return -1;
}

/* Parses a non-negative decimal into millionths; returns -1 on syntax error. */
static int parse_part(const char *s, size_t len, uint64_t *out, bool *decimal, bool *percent)
{
    uint64_t whole = 0, frac = 0;
    size_t i = 0, fd = 0;
    *decimal = *percent = false;
    if (len && s[len - 1] == '%') {
        *percent = true;
        len--;
    }
    if (len == 0)
        return -1;
    for (; i < len && s[i] >= '0' && s[i] <= '9'; i++) {
        whole = whole * 10 + (uint64_t)(s[i] - '0');
        if (whole > 1000000000u)
            return -1;
    }
    if (i < len && s[i] == '.') {
        *decimal = true;
        for (i++; i < len && s[i] >= '0' && s[i] <= '9'; i++, fd++) {
            if (fd >= 6)
                return -1;
            frac = frac * 10 + (uint64_t)(s[i] - '0');
        }
        for (size_t k = fd; k < 6; k++)
            frac *= 10;
    }
    if (i != len || (i == 0))
        return -1;
    *out = whole * 1000000u + frac;
    return 0;
}

int kiln_split_parse_ratios(const char *text, struct kiln_split_params *p, bool *weights_note,
                            struct kiln_err *err)
{
    uint64_t part[3];
    unsigned n = 0;
    bool any_decimal = false, any_percent = false;
    const char *s = text;
    *weights_note = false;
    for (;;) {
        const char *colon = strchr(s, ':');
        size_t len = colon ? (size_t)(colon - s) : strlen(s);
        bool dec, pct;
        if (n == 3 || parse_part(s, len, &part[n], &dec, &pct) != 0)
            return kiln_err_set(err, KILN_EINVAL,
                                "bad --ratios '%s': expected 2 or 3 numbers such as 80:10:10",
                                text);
        any_decimal |= dec;
        any_percent |= pct;
        n++;
        if (!colon)
            break;
        s = colon + 1;
    }
    if (n < 2)
        return kiln_err_set(err, KILN_EINVAL, "bad --ratios '%s': need 2 or 3 parts", text);
    uint64_t sum = 0;
    for (unsigned i = 0; i < n; i++)
        sum += part[i];
    if (sum == 0 || part[0] == 0)
        return kiln_err_set(err, KILN_EINVAL, "bad --ratios '%s': the training share must be > 0",
                            text);
    if ((any_decimal || any_percent) && sum != 1000000u && sum != 100000000u)
        return kiln_err_set(err, KILN_EINVAL,
                            "bad --ratios '%s': fractions must sum to 1 and percentages to 100",
                            text);
    if (!any_decimal && !any_percent && sum != 100000000u)
        *weights_note = true;
    p->nparts = n;
    p->ratio[KILN_SPLIT_TRAIN] = part[0];
    p->ratio[KILN_SPLIT_VAL] = n == 3 ? part[1] : 0;
    p->ratio[KILN_SPLIT_TEST] = part[n - 1];
    return KILN_OK;
}

/* Writes one share in millionths as a plain decimal: 80000000 -> "80", 250000 -> "0.25". */
static size_t format_share(uint64_t v, char *buf, size_t len)
{
    uint64_t whole = v / 1000000u, frac = v % 1000000u;
    if (!frac)
        return (size_t)snprintf(buf, len, "%llu", (unsigned long long)whole);
    char digits[8];
    snprintf(digits, sizeof digits, "%06llu", (unsigned long long)frac);
    size_t n = strlen(digits);
    while (n && digits[n - 1] == '0')
        digits[--n] = '\0';
    return (size_t)snprintf(buf, len, "%llu.%s", (unsigned long long)whole, digits);
}

void kiln_split_format_ratios(const struct kiln_split_params *p, char *buf, size_t len)
{
    size_t used = 0;
    for (int s = 0; s < KILN_NSPLITS && used < len; s++) {
        if (s == KILN_SPLIT_VAL && p->nparts == 2)
            continue;
        if (s)
            used += (size_t)snprintf(buf + used, len - used, ":");
        if (used < len)
            used += format_share(p->ratio[s], buf + used, len - used);
    }
}

/* The HMAC key for a seed: its 8 bytes, little-endian. */
static int unit_key_hmac(uint64_t seed, struct kiln_hmac *h, struct kiln_err *err)
{
    uint8_t seedle[8];
    for (int i = 0; i < 8; i++)
        seedle[i] = (uint8_t)(seed >> (8 * i));
    return kiln_hmac_init(h, seedle, sizeof seedle, err);
}

static int unit_key(struct kiln_hmac *h, int id_kind, const void *id, size_t idlen, uint64_t *key,
                    struct kiln_err *err)
{
    static const char tag[] = KILN_SPLIT_ALGORITHM;
    uint8_t mac[KILN_SHA256_LEN];
    size_t taglen = sizeof tag - 1, msglen;
    if (!kiln_add_size(taglen + 1, idlen, &msglen))
        return kiln_err_set(err, KILN_ENOMEM, "unit id too long");
    uint8_t stackbuf[256];
    uint8_t *msg = msglen <= sizeof stackbuf ? stackbuf : malloc(msglen);
    if (!msg)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a unit key message");
    memcpy(msg, tag, taglen);
    msg[taglen] = (uint8_t)id_kind;
    memcpy(msg + taglen + 1, id, idlen);
    int rc = kiln_hmac_digest(h, msg, msglen, mac, err);
    if (msg != stackbuf)
        free(msg);
    if (rc)
        return rc;
    uint64_t k = 0;
    for (int i = 0; i < 8; i++)
        k = k << 8 | mac[i];
    *key = k;
    return KILN_OK;
}

int kiln_split_unit_key(uint64_t seed, int id_kind, const void *id, size_t idlen, uint64_t *key,
                        struct kiln_err *err)
{
    struct kiln_hmac h;
    int rc = unit_key_hmac(seed, &h, err);
    if (rc)
        return rc;
    rc = unit_key(&h, id_kind, id, idlen, key, err);
    kiln_hmac_free(&h);
    return rc;
}

struct order_ctx_entry {
    uint64_t head; /* leads the order: key, or stratum and key's top bits (order_head) */
    int32_t stratum;
    uint64_t key;
    uint32_t unit;
    const uint8_t *tie; /* unit id bytes, for the (astronomically unlikely) equal keys */
    size_t tielen;
};

static int cmp_order(const void *a, const void *b)
{
    const struct order_ctx_entry *x = a, *y = b;
    if (x->stratum != y->stratum)
        return x->stratum < y->stratum ? -1 : 1;
    if (x->key != y->key)
        return x->key < y->key ? -1 : 1;
    size_t n = x->tielen < y->tielen ? x->tielen : y->tielen;
    int c = memcmp(x->tie, y->tie, n);
    if (c)
        return c;
    c = (x->tielen > y->tielen) - (x->tielen < y->tielen);
    return c ? c : (x->unit > y->unit) - (x->unit < y->unit);
}

/* A head that never contradicts cmp_order: the key alone, or (stratum + 1) in the top 16 bits
 * and the key's top 48 bits below; strata from 2^16 - 2 on share one head. */
static uint64_t order_head(int32_t stratum, uint64_t key, bool stratify)
{
    if (!stratify)
        return key;
    const uint64_t s = (uint64_t)((int64_t)stratum + 1);
    return s < 0xffff ? s << 48 | key >> 16 : UINT64_C(0xffff) << 48;
}

/* Names an item for messages: "source/path[:member]". */
static void item_label(const struct kiln_item *it, char *buf, size_t len)
{
    if (it->member[0])
        snprintf(buf, len, "%s/%s:%s", it->source, it->path, it->member);
    else
        snprintf(buf, len, "%s/%s", it->source, it->path);
}

/* Sets kept[u] to the split a unit keeps from an earlier output, or KILN_SPLIT_NONE. */
static int keep_units(const struct kiln_catalog *cat, const struct kiln_units *units,
                      const struct kiln_split_params *p, int8_t *kept, struct kiln_err *err)
{
    const size_t nu = units->nunits;
    uint32_t (*first)[KILN_NSPLITS] = kiln_alloc_array(nu, sizeof *first);
    uint8_t *mask = calloc(nu ? nu : 1, 1);
    if (!first || !mask) {
        free(first);
        free(mask);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate keep tables");
    }
    for (size_t i = 0; i < cat->n; i++) {
        uint32_t u = units->unit_of[i];
        int s = p->old_split[i];
        if (u == KILN_NO_UNIT || s < 0 || s >= KILN_NSPLITS)
            continue;
        if (!(mask[u] & (1u << s)))
            first[u][s] = (uint32_t)i;
        mask[u] |= (uint8_t)(1u << s);
    }
    int rc = KILN_OK;
    for (size_t u = 0; u < nu && !rc; u++) {
        kept[u] = KILN_SPLIT_NONE;
        if (!mask[u])
            continue;
        int lo = -1, hi = -1;
        for (int s = 0; s < KILN_NSPLITS; s++)
            if (mask[u] & (1u << s)) {
                if (lo < 0)
                    lo = s;
                hi = s;
            }
        if (lo != hi && !p->keep_to_test) {
            char a[600], b[600];
            item_label(&cat->items[first[u][lo]], a, sizeof a);
            item_label(&cat->items[first[u][hi]], b, sizeof b);
            rc = kiln_err_set(err, KILN_EINVAL,
                              "%s (old split %s) and %s (old split %s) are now one unit (same "
                              "group or duplicate content); use --keep-conflicts test to move "
                              "the unit to the later split",
                              a, kiln_split_name(lo), b, kiln_split_name(hi));
        }
        kept[u] = (int8_t)hi; /* the latest split: train < val < test */
    }
    free(first);
    free(mask);
    return rc;
}

int kiln_split_assign(struct kiln_catalog *cat, struct kiln_units *units,
                      const struct kiln_split_params *p, struct kiln_split_report *rep,
                      struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    const size_t nu = units->nunits;
    int8_t *kept = NULL;
    if (p->old_split) {
        kept = kiln_alloc_array(nu ? nu : 1, 1);
        if (!kept)
            return kiln_err_set(err, KILN_ENOMEM, "cannot allocate keep tables");
        int rc = keep_units(cat, units, p, kept, err);
        if (rc) {
            free(kept);
            return rc;
        }
    }
    struct order_ctx_entry *ord = kiln_alloc_array(nu, sizeof *ord);
    if (!ord) {
        free(kept);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate the split order for %zu units", nu);
    }
    struct kiln_hmac hmac;
    int hrc = unit_key_hmac(p->seed, &hmac, err);
    if (hrc) {
        free(ord);
        free(kept);
        return hrc;
    }
    for (size_t u = 0; u < nu; u++) {
        struct kiln_unit *un = &units->units[u];
        const struct kiln_item *id = &cat->items[un->id_item];
        const void *bytes = un->id_kind == KILN_UNIT_ID_GROUP ? (const void *)id->group
                                                               : (const void *)id->sha256;
        size_t len = un->id_kind == KILN_UNIT_ID_GROUP ? strlen(id->group) : KILN_SHA256_LEN;
        int rc = unit_key(&hmac, un->id_kind, bytes, len, &un->key, err);
        if (rc) {
            kiln_hmac_free(&hmac);
            free(ord);
            free(kept);
            return rc;
        }
        const int32_t stratum = p->stratify ? un->stratum : 0;
        ord[u] = (struct order_ctx_entry){order_head(stratum, un->key, p->stratify), stratum,
                                          un->key, (uint32_t)u, bytes, len};
        rep->mixed_units += un->mixed;
    }
    kiln_hmac_free(&hmac);
    rep->units = nu;
    uint64_t R = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        R += p->ratio[s];

    if (p->mode == KILN_MODE_STABLE) {
        /* Split s is chosen when key * R < (r_0 + ... + r_s) * 2^64: a threshold on the key as
         * a fraction of 2^64, so a unit's split depends on its own key alone. */
        for (size_t u = 0; u < nu; u++) {
            struct kiln_unit *un = &units->units[u];
            if (kept && kept[u] >= 0) {
                un->split = kept[u];
                continue;
            }
            unsigned __int128 lhs = (unsigned __int128)un->key * R, cum = 0;
            un->split = KILN_SPLIT_TEST;
            for (int s = 0; s < KILN_NSPLITS; s++) {
                cum += p->ratio[s];
                if (p->ratio[s] && lhs < (cum << 64)) {
                    un->split = (int8_t)s;
                    break;
                }
            }
        }
    } else {
        kiln_sort_by_head(ord, nu, sizeof *ord, offsetof(struct order_ctx_entry, head),
                          cmp_order);
        size_t i = 0;
        while (i < nu) {
            size_t j = i;
            uint64_t total = 0;
            while (j < nu && ord[j].stratum == ord[i].stratum)
                total += units->units[ord[j++].unit].size;
            /* Deal in key order to the split with the largest remaining deficit
             * r_s * N - C_s * R (exact integers); ties go to the earlier split. */
            __int128 count[KILN_NSPLITS] = {0, 0, 0};
            for (size_t k = i; kept && k < j; k++) {
                struct kiln_unit *un = &units->units[ord[k].unit];
                if (kept[ord[k].unit] >= 0) {
                    un->split = kept[ord[k].unit];
                    count[un->split] += un->size;
                }
            }
            for (size_t k = i; k < j; k++) {
                struct kiln_unit *un = &units->units[ord[k].unit];
                if (kept && kept[ord[k].unit] >= 0)
                    continue;
                int best = -1;
                __int128 best_d = 0;
                for (int s = 0; s < KILN_NSPLITS; s++) {
                    if (!p->ratio[s])
                        continue;
                    __int128 d = (__int128)p->ratio[s] * total - count[s] * (__int128)R;
                    if (best < 0 || d > best_d) {
                        best = s;
                        best_d = d;
                    }
                }
                un->split = (int8_t)best;
                /* Oversized: the unit alone exceeds twice the split's target r_s * N / R.
                 * Smaller excesses are the granularity of whole units, which every small
                 * stratum with a few shots per specimen shows (docs/split.md). */
                un->oversized = un->size > 1 && (__int128)un->size * R >
                                                    2 * (__int128)p->ratio[best] * total;
                rep->oversized_units += un->oversized;
                count[best] += un->size;
            }
            i = j;
        }
    }
    free(ord);
    for (size_t u = 0; u < nu; u++) {
        rep->units_per_split[units->units[u].split]++;
        if (kept && kept[u] >= 0) {
            rep->kept_units++;
            rep->kept_items += units->units[u].size;
        }
    }
    free(kept);
    for (size_t i = 0; i < cat->n; i++) {
        struct kiln_item *it = &cat->items[i];
        uint32_t u = units->unit_of[i];
        if (u == KILN_NO_UNIT) {
            it->split = KILN_SPLIT_NONE;
            it->unit_key = 0;
            continue;
        }
        it->split = units->units[u].split;
        it->unit_key = units->units[u].key;
        rep->items[it->split]++;
        if (p->old_split && p->old_split[i] >= 0 && p->old_split[i] != it->split)
            rep->moved_items++;
    }
    return KILN_OK;
}

void kiln_split_defaults(struct kiln_split_params *p)
{
    struct kiln_err e;
    bool note;
    memset(p, 0, sizeof *p);
    p->near = true;
    kiln_nearlink_defaults(&p->near_params);
    kiln_split_parse_ratios("80:10:10", p, &note, &e);
}

int kiln_split_run(struct kiln_catalog *cat, const struct kiln_split_params *p,
                   const struct kiln_nearlinks *near, struct kiln_units *units,
                   struct kiln_split_report *rep, struct kiln_err *err)
{
    struct kiln_pairs joins = {NULL, 0, 0};
    int rc = KILN_OK;
    if (p->near && near) {
        joins.pair = kiln_alloc_array(near->n ? near->n : 1, sizeof *joins.pair);
        if (!joins.pair)
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu near-duplicate links",
                              near->n);
        for (size_t k = 0; !rc && k < near->n; k++)
            if (near->link[k].verdict == KILN_NEARLINK_LINKED) {
                joins.pair[joins.n][0] = near->link[k].c.a;
                joins.pair[joins.n++][1] = near->link[k].c.b;
            }
    }
    if (!rc)
        rc = kiln_units_build(cat, p->near && near ? &joins : NULL, units, err);
    free(joins.pair);
    if (!rc)
        rc = kiln_split_assign(cat, units, p, rep, err);
    return rc;
}
