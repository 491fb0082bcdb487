/* JSON stage files through jansson: manifest.json, catalog.json (the scan and split record
 * beside catalog.csv) and the metadata block of .kten files. Output is deterministic: keys in
 * insertion order, two-space indent, reals with 17 significant digits, no times or hosts. */
#ifndef KILN_MANIFEST_H
#define KILN_MANIFEST_H

#include <jansson.h>

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "../../core/audit.h"
#include "../../core/catalog.h"
#include "../../core/err.h"
#include "../../core/recipe.h"
#include "../../core/sha256.h"
#include "../../core/split.h"
#include "../../core/stats.h"

#define KILN_MANIFEST_VERSION 1

/* The files of an output folder (docs/formats.md), in the order SHA256SUMS lists them: the
 * tensor file of each split present, items.csv, catalog.csv, then manifest.json. records.pool
 * is the scratch file of build and of f32 packs, never renamed into place. Which of these files
 * in a folder are kiln's is decided by content (formats/files/owner.h). */
#define KILN_FILE_TRAIN "train.kten"
#define KILN_FILE_VAL "val.kten"
#define KILN_FILE_TEST "test.kten"
#define KILN_FILE_ITEMS "items.csv"
#define KILN_FILE_CATALOG "catalog.csv"
#define KILN_FILE_MANIFEST "manifest.json"
#define KILN_FILE_SUMS "SHA256SUMS"
#define KILN_FILE_POOL "records.pool"
/* The tensor file of each split, by enum kiln_split. */
extern const char *const kiln_manifest_split_files[3];
#define KILN_JSON_FLAGS (JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(17))

/* ---- typed records: filled by the stages, serialised only here ------------------------- */

/* How a catalogue was scanned (catalog.json "scan", copied into manifest.json). Strings hold
 * their recorded form: escaped (core/textesc.h), and in an output's copy perhaps hashed
 * (core/names.h); they are written as they are. Owned by the record (kiln_scan_record_free). */
struct kiln_scan_record {
    char kiln_version[32];
    char **sources;      /* nsources of them */
    size_t nsources;
    char labels[16];     /* the label rule's name: folder, none, csv */
    char *labels_csv;    /* NULL: none (null) */
    char *group_regex;   /* NULL: none (null) */
    bool follow_links;
    uint64_t max_pixels;
    uint32_t max_side;
    uint64_t max_file_bytes; /* 0: not recorded (catalogues of kiln 0.1.0) */
    size_t rows;
    size_t status[KILN_ST_COUNT]; /* rows per status; only those above 0 are written */
    size_t hidden, junk;          /* files skipped without a row */
    size_t outputs_skipped;       /* kiln output folders under a source (written when not 0) */
    bool has_group_counts;        /* with a group rule: */
    size_t group_matched, group_unmatched;
    bool has_csv_counts;          /* with --labels csv:FILE: */
    size_t csv_rows, csv_rows_unused;
};

/* How a catalogue was split (catalog.json "split", copied into manifest.json). keep_manifest
 * is owned (kiln_split_record_free) and in recorded form. */
struct kiln_split_record {
    char algorithm[32];
    uint64_t seed;       /* written as a decimal string: 64 bits do not survive every reader */
    char ratios[96];     /* as given: "80:10:10", "0.7:0.3" */
    unsigned parts;      /* 2 or 3 */
    char mode[16];
    bool stratify;
    /* "near_duplicates": the check's settings and what it found (kiln_manifest_near_json);
     * NULL when the check was off. Kept as the recorded JSON object, owned, so that pack copies
     * the split's findings into the manifest as written. */
    json_t *near;
    bool keep;           /* --keep given: */
    char *keep_manifest;
    char keep_sha256[KILN_SHA256_HEX];
    bool keep_to_test;   /* --keep-conflicts test (else error) */
    size_t kept_units, kept_items, moved_items;
    size_t units, merged_by_group, merged_by_bytes, merged_by_pixels, merged_by_records,
        merged_by_near;
    size_t mixed_units, oversized_units;
    size_t items[KILN_NSPLITS]; /* val is written only for three parts */
};

/* catalog.json: the catalogue's name and the records of how it was made (NULL: null). The split
 * command adds the audit of the split catalogue (catalog.json only; an output records the audit
 * of what it packed), which is written and never read back. */
struct kiln_catalog_record {
    const char *catalog;
    struct kiln_scan_record *scan;
    struct kiln_split_record *split;
    const struct kiln_audit *audit; /* with audit_cat, whose names it lists; NULL: none */
    const struct kiln_catalog *audit_cat;
};

/* The split record's "near_duplicates" object: the settings in p (when p->near), and with l
 * the counts and the links the unit rule refused, each with its evidence. */
json_t *kiln_manifest_near_json(const struct kiln_split_params *p, const struct kiln_nearlinks *l,
                                const struct kiln_catalog *cat);
/* The evidence of one checked link, for records and reports: the two items (names, splits),
 * orientation, hash distances, the correlations that decided, hue, alignment, searches and the
 * unit rule's verdict. */
json_t *kiln_manifest_nearlink_json(const struct kiln_nearlink *l, const struct kiln_catalog *cat);

void kiln_scan_record_free(struct kiln_scan_record *r);
void kiln_split_record_free(struct kiln_split_record *r);

/* Writes catalog.json atomically. */
int kiln_manifest_save_catalog_record(const char *path, const struct kiln_catalog_record *r,
                                      struct kiln_err *err);
/* Reads the scan and split records of a catalog.json, or of a manifest.json's copy, into
 * *scan and *split (malloc'ed; NULL where the record is null or absent; the caller frees
 * them with kiln_*_record_free and free). A record of the wrong shape is KILN_EINVAL naming
 * what is wrong. */
int kiln_manifest_read_records(const json_t *doc, struct kiln_scan_record **scan,
                               struct kiln_split_record **split, struct kiln_err *err);

/* One output file as the manifest and SHA256SUMS list it. */
struct kiln_manifest_output {
    const char *name;
    uint64_t bytes;
    char sha256[KILN_SHA256_HEX];
};

/* manifest.json (docs/formats.md), every field filled by pack. Names come from cat and the
 * records in their output form (hashed with --hash-paths). */
struct kiln_manifest {
    const struct kiln_recipe *recipe;
    char recipe_sha256[KILN_SHA256_HEX];
    const struct kiln_scan_record *scan;   /* NULL: null */
    const struct kiln_split_record *split; /* NULL: null */
    const struct kiln_catalog *cat;        /* classes, per-class counts, rows not packed */
    bool present[KILN_NSPLITS];            /* splits with a tensor file */
    size_t records[KILN_NSPLITS];
    const struct kiln_stats *stats;        /* [KILN_NSPLITS], integer record scale */
    size_t dct_reduced;
    const struct kiln_audit *audit;        /* of what was packed */
    /* The tensor files, items.csv and catalog.csv (noutputs of them); one more place for
     * manifest.json itself, which SHA256SUMS lists after them. */
    struct kiln_manifest_output outputs[KILN_NSPLITS + 3];
    size_t noutputs;
};

/* The recipe's SHA-256: of its JSON as the manifest writes it (docs/formats.md). */
int kiln_manifest_recipe_sha256(const struct kiln_recipe *r, char hex[KILN_SHA256_HEX],
                                struct kiln_err *err);

/* Writes manifest.json atomically. */
int kiln_manifest_save(const char *path, const struct kiln_manifest *m, struct kiln_err *err);

/* SHA256SUMS in the coreutils format ("<hex>  <name>"), so `sha256sum -c` checks it: the n
 * outputs given, in order. Written atomically. */
int kiln_manifest_save_sums(const char *path, const struct kiln_manifest_output *out, size_t n,
                            struct kiln_err *err);

/* The metadata block of split s's .kten file (docs/format.md): what the manifest says of the
 * split, and for f32 output the normalisation applied. Returns malloc'ed text, or NULL after
 * setting err. */
struct kiln_kten_meta {
    const struct kiln_manifest *m;
    int split;
    const double *mean_unit, *std_unit; /* [channels] for f32 output, else NULL */
};
char *kiln_manifest_kten_meta(const struct kiln_kten_meta *km, struct kiln_err *err);

/* Saves atomically (temporary name, fsync, rename). */
int kiln_json_save(const char *path, const json_t *doc, struct kiln_err *err);
/* Loads and checks that the top level is an object. */
int kiln_json_load(const char *path, json_t **doc, struct kiln_err *err);
/* Loads a manifest.json and checks it is kiln's: "format": "kiln output manifest" (or, from
 * kiln 0.1.0, "manifest_version": 1 with "kiln_version"); otherwise KILN_EINVAL saying what it
 * holds instead. */
int kiln_manifest_load(const char *path, json_t **doc, struct kiln_err *err);
/* Serialises compactly-but-deterministically for hashing or embedding; caller frees. */
char *kiln_json_dump(const json_t *doc);

/* The recipe with every option spelled out, and back (reproduce). */
json_t *kiln_recipe_to_json(const struct kiln_recipe *r);
int kiln_recipe_from_json(const json_t *j, struct kiln_recipe *r, struct kiln_err *err);

/* Per-channel statistics: exact totals (as decimal strings, since sums of squares exceed 2^53)
 * plus derived mean, standard deviations, min and max in the output scale and in [0,1]. */
json_t *kiln_stats_to_json(const struct kiln_stats *s, double maxval, struct kiln_err *err);

/* Run-time versions of every library that touches the bytes (decoders, zlib, libarchive,
 * OpenSSL, jansson): the version number each loaded library reports. Returns how many were
 * written (at most max; KILN_MAX_LIBRARIES holds them all). */
#define KILN_MAX_LIBRARIES 12
struct kiln_library_version;
size_t kiln_library_versions(struct kiln_library_version *out, size_t max);
/* The same as a JSON object {"libpng": "1.6.39", ...} for manifest.json. */
json_t *kiln_library_versions_json(void);

/* Helpers for readers of stage files: NULL or the value when it has the type. */
const char *kiln_json_str(const json_t *obj, const char *key);

#endif
