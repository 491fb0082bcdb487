/* JSON stage files through jansson: manifest.json, catalog.json (the scan and split record
 * beside catalog.csv) and the metadata block of .kten files. Output is deterministic: keys in
 * insertion order, two-space indent, reals with 17 significant digits, no times or hosts. */
#ifndef KILN_MANIFEST_H
#define KILN_MANIFEST_H

#include <jansson.h>

#include "../../core/err.h"
#include "../../core/recipe.h"
#include "../../core/stats.h"

#define KILN_MANIFEST_VERSION 1

/* The files of an output folder (docs/formats.md), in the order SHA256SUMS lists them: the
 * tensor file of each split present, items.csv, catalog.csv, then manifest.json. records.pool
 * is the scratch file of build and of f32 packs, never renamed into place. No version writes
 * run.log; a folder holding it is still taken for kiln's (pipeline.c). */
#define KILN_FILE_TRAIN "train.kten"
#define KILN_FILE_VAL "val.kten"
#define KILN_FILE_TEST "test.kten"
#define KILN_FILE_ITEMS "items.csv"
#define KILN_FILE_CATALOG "catalog.csv"
#define KILN_FILE_MANIFEST "manifest.json"
#define KILN_FILE_SUMS "SHA256SUMS"
#define KILN_FILE_POOL "records.pool"
#define KILN_FILE_LOG "run.log"
/* The tensor file of each split, by enum kiln_split. */
extern const char *const kiln_manifest_split_files[3];
#define KILN_JSON_FLAGS (JSON_INDENT(2) | JSON_PRESERVE_ORDER | JSON_REAL_PRECISION(17))

/* Saves atomically (temporary name, fsync, rename). */
int kiln_json_save(const char *path, const json_t *doc, struct kiln_err *err);
/* Loads and checks that the top level is an object. */
int kiln_json_load(const char *path, json_t **doc, struct kiln_err *err);
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
