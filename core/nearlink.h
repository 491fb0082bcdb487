/* Near-duplicate links over a set of fingerprints (nearfp.h): candidate pairs from the hashes by
 * multi-index search (neardup.h), the pixel check of each candidate, and the unit rule that
 * decides which checked links may join units. docs/near-duplicates.md is the specification.
 *
 * Candidates come from five searches, low-information items taking no part:
 *  1. full hashes within radius_full bits (the picture as it is);
 *  2. centre hashes within radius_centre bits (a label or scale bar at the border);
 *  3. full hashes against the hashes of the other 7 orientations within radius_turned bits
 *     (a picture rotated or mirrored in its pixels);
 *  4./5. the coarse hashes (the 35 bits of the 6x6 lowest frequencies, which a crop or a small
 *     rotation moves less) of the whole picture and of its centre within radius_coarse bits,
 *     confirmed by full hashes within coarse_confirm bits (a crop or a slight rotation).
 * Every candidate is then checked on pixels (kiln_nearfp_verify) before it can link anything.
 *
 * Unit rule. Items start in their exact units (same group, file bytes or decoded pixels; the
 * caller says which, since those relations live in the catalogue). Checked links are taken in
 * order of decreasing evidence (the global correlation that decided, then the detail
 * correlation, then smaller hash distance, then item indices), and each joins the two units it connects
 * unless the joined unit would (a) hold two different labels (or a label and a unit already
 * holding several), or (b) hold more than max_pictures exact units. Such a link is refused, not
 * silently dropped: it is reported with its reason, and the two units stay apart. This is the
 * conservative direction for the split's integrity: a wrong merge of unrelated pictures can
 * move whole classes out of a split, while a refused link between real copies is listed for
 * the user to resolve (e.g. with a group). */
#ifndef KILN_NEARLINK_H
#define KILN_NEARLINK_H

#include <stddef.h>
#include <stdint.h>

#include "err.h"
#include "nearfp.h"

#define KILN_NEAR_ALGORITHM "kiln-near-v1" /* docs/near-duplicates.md */

#define KILN_NEARLINK_RADIUS_FULL 6
#define KILN_NEARLINK_RADIUS_CENTRE 6
#define KILN_NEARLINK_RADIUS_TURNED 4
#define KILN_NEARLINK_RADIUS_COARSE 4
#define KILN_NEARLINK_COARSE_CONFIRM 14
#define KILN_NEARLINK_MAX_PICTURES 8

struct kiln_nearlink_params {
    unsigned radius_full, radius_centre, radius_turned, radius_coarse; /* each at most 16 */
    unsigned coarse_confirm; /* full-hash distance a coarse candidate must also be within */
    unsigned max_pictures; /* most exact units one unit may gather through near links; >= 2 */
};

/* The defaults above. */
void kiln_nearlink_defaults(struct kiln_nearlink_params *p);

enum kiln_nearcand_source {
    KILN_NEARCAND_FULL = 1,
    KILN_NEARCAND_CENTRE = 2,
    KILN_NEARCAND_TURNED = 4,
    KILN_NEARCAND_COARSE = 8,
    KILN_NEARCAND_COARSE_CENTRE = 16
};

/* The coarse hash: bits (v, u), u, v < 6, of a 63-bit hash, moved to bit 64 - (6v + u). */
uint64_t kiln_nearlink_coarse(uint64_t hash);

/* What the searches need of a fingerprint (24 bytes of its 312): the pipeline keeps these in
 * memory and reads the rest from its scratch store only for the pixel checks. */
struct kiln_nearkey {
    uint64_t hash, centre;
    uint8_t flags; /* enum kiln_nearfp_flag */
};

static inline struct kiln_nearkey kiln_nearkey_of(const struct kiln_nearfp *fp)
{
    return (struct kiln_nearkey){fp->hash, fp->centre, fp->flags};
}

/* A candidate: item b as displayed under orientation (1-8) may be a copy of item a. */
struct kiln_nearcand {
    uint32_t a, b; /* a < b */
    uint8_t orientation;
    uint8_t sources;         /* enum kiln_nearcand_source bits: which searches found it */
    uint8_t distance;        /* full-hash Hamming distance in that orientation */
    uint8_t centre_distance; /* centre-hash distance in that orientation */
};

struct kiln_nearcands {
    struct kiln_nearcand *c;
    size_t n, cap;
};

void kiln_nearcands_free(struct kiln_nearcands *c);

/* Finds the candidates among key[0..n-1] into out (emptied first), sorted by (a, b,
 * orientation), each once. Errors: KILN_EINVAL (bad radius, n >= 2^31), KILN_ENOMEM. It runs
 * the searches below one after the other and merges them. */
int kiln_nearlink_candidates(const struct kiln_nearkey *key, size_t n,
                             const struct kiln_nearlink_params *p, struct kiln_nearcands *out,
                             struct kiln_err *err);

/* The same in parts, for callers that spread the work over threads: search number which
 * (0 full, 1 centre, 2 coarse, 3 coarse centre, 4..10 turned for orientations 2..8) appends its
 * pairs to out (unsorted, distances not yet set); the searches are independent. Then
 * kiln_nearlink_merge puts the parts into out (emptied first) exactly as
 * kiln_nearlink_candidates would, whatever the order the parts were computed in. */
#define KILN_NEARLINK_SEARCHES 11
int kiln_nearlink_search(const struct kiln_nearkey *key, size_t n,
                         const struct kiln_nearlink_params *p, unsigned which,
                         struct kiln_nearcands *out, struct kiln_err *err);
int kiln_nearlink_merge(const struct kiln_nearkey *key, struct kiln_nearcands *parts,
                        size_t nparts, struct kiln_nearcands *out, struct kiln_err *err);

/* Checks candidates [from, to) on pixels into match[from..to-1]. Independent per candidate,
 * so callers may share the range out among threads; the results do not depend on how. */
void kiln_nearlink_verify(const struct kiln_nearfp *fp, const struct kiln_nearcands *c,
                          size_t from, size_t to, struct kiln_nearmatch *match);
/* The pixel check of one candidate (what kiln_nearlink_verify does for each), for callers that
 * hold the two fingerprints rather than an array of all. */
void kiln_nearlink_check(const struct kiln_nearfp *a, const struct kiln_nearfp *b,
                         const struct kiln_nearcand *c, struct kiln_nearmatch *out);

enum kiln_nearlink_verdict {
    KILN_NEARLINK_UNCHECKED = 0, /* failed the pixel check: not a link */
    KILN_NEARLINK_LINKED,        /* joins (or was already inside) one unit */
    KILN_NEARLINK_REFUSED_LABEL, /* checked, but would join different labels */
    KILN_NEARLINK_REFUSED_SIZE   /* checked, but would gather more than max_pictures */
};
const char *kiln_nearlink_verdict_name(int v); /* "no match", "linked", ... */

/* The unit rule. n items; exact[i] is item i's exact unit (any ids below n; items of one exact
 * unit share it); label[i] is its class (-1: none). c and match as from the functions above.
 * Writes verdict[k] for every candidate and unit[i] = the smallest item index of item i's unit
 * (exact units joined by the accepted links). Errors: KILN_EINVAL (an id out of range),
 * KILN_ENOMEM. */
int kiln_nearlink_decide(size_t n, const uint32_t *exact, const int32_t *label,
                         const struct kiln_nearcands *c, const struct kiln_nearmatch *match,
                         unsigned max_pictures, uint8_t *verdict, uint32_t *unit,
                         struct kiln_err *err);

/* The checked links of a catalogue: every candidate that passed the pixel check, with its
 * evidence and the unit rule's verdict (the input of the split's units and of the audit).
 * Indices are catalogue rows; a and b are in the order of their file SHA-256 (the order the
 * searches saw the items in, docs/near-duplicates.md), and the links in the order of
 * (a, b, orientation) under it, so nothing depends on the catalogue's row order. */
struct kiln_nearlink {
    struct kiln_nearcand c;
    struct kiln_nearmatch m;
    uint8_t verdict; /* enum kiln_nearlink_verdict */
};

struct kiln_nearlinks {
    struct kiln_nearlink *link;
    size_t n, cap;
    struct kiln_nearlink_params params;
    size_t pictures;   /* items with a fingerprint that took part in the searches */
    size_t lowinfo;    /* items with a low-information fingerprint (exact digests only) */
    size_t candidates; /* candidate pairs checked on pixels */
    size_t per_verdict[KILN_NEARLINK_REFUSED_SIZE + 1];
};

void kiln_nearlinks_free(struct kiln_nearlinks *l);

/* The unit rule over checked links (kiln_nearlink_decide's rule; every link has passed; links
 * of equal evidence are taken in their order in l): sets each link's verdict and per_verdict.
 * n, exact, label as for kiln_nearlink_decide; unit may be NULL. */
int kiln_nearlink_decide_links(size_t n, const uint32_t *exact, const int32_t *label,
                               struct kiln_nearlinks *l, uint32_t *unit, struct kiln_err *err);

#endif
