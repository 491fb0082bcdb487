/* The .kten tensor file (docs/format.md): a fixed little-endian header with an array table,
 * array data aligned to 4096 bytes so it can be memory-mapped, and a JSON metadata block.
 * Records have a fixed size, so workers write record i at a computable offset with pwrite. */
#ifndef KILN_KTEN_H
#define KILN_KTEN_H

#include <stddef.h>
#include <stdint.h>

#include "../../core/err.h"
#include "../../core/sha256.h"
#include "outfile.h"

#define KILN_KTEN_MAGIC "KTEN\r\n\x1a\n"
#define KILN_KTEN_VERSION 1u
#define KILN_KTEN_ALIGN 4096u
#define KILN_KTEN_HEADER 4096u
#define KILN_KTEN_TABLE_OFFSET 128u
#define KILN_KTEN_ENTRY 128u
#define KILN_KTEN_MAX_ARRAYS ((KILN_KTEN_HEADER - KILN_KTEN_TABLE_OFFSET) / KILN_KTEN_ENTRY)
#define KILN_KTEN_NAME 16u
#define KILN_KTEN_MAX_RANK 4u

enum kiln_dtype { KILN_DT_U8 = 1, KILN_DT_U16 = 2, KILN_DT_I32 = 3, KILN_DT_U32 = 4, KILN_DT_F32 = 5 };
const char *kiln_dtype_name(int dtype); /* "u8", ... */
int kiln_dtype_parse(const char *name);
size_t kiln_dtype_size(int dtype); /* 0 for unknown */

struct kiln_kten_array {
    char name[KILN_KTEN_NAME + 1];
    int dtype;
    unsigned rank;
    uint64_t dims[KILN_KTEN_MAX_RANK];
    uint64_t offset, length;
    uint8_t sha256[KILN_SHA256_LEN];
};

struct kiln_kten_writer {
    struct kiln_outfile out;
    struct kiln_kten_array arrays[KILN_KTEN_MAX_ARRAYS];
    size_t narrays;
    uint64_t data_end; /* where the metadata block starts */
};

/* The bytes a file of these arrays reserves when it is created (the metadata block comes on
 * top, at the end: a few KB). */
int kiln_kten_plan_bytes(const struct kiln_kten_array *arrays, size_t narrays, uint64_t *bytes,
                         struct kiln_err *err);
/* Plans the layout for arrays (name, dtype, rank, dims set; offsets filled here) and creates
 * the file under a temporary name. Every length is overflow-checked. */
int kiln_kten_create(struct kiln_kten_writer *w, const char *path,
                     const struct kiln_kten_array *arrays, size_t narrays, struct kiln_err *err);
/* Writes len bytes at byte offset off inside array a. Safe to call from several threads for
 * disjoint ranges. */
int kiln_kten_write(struct kiln_kten_writer *w, size_t a, uint64_t off, const void *data,
                    size_t len, struct kiln_err *err);
/* Writes n 32-bit values (u32, or i32 as their two's-complement bits) as array a's contents,
 * little-endian whatever the host. */
int kiln_kten_write_le32(struct kiln_kten_writer *w, size_t a, const uint32_t *values, size_t n,
                         struct kiln_err *err);
/* Reads back bytes of array a (e.g. to convert integer records to f32 in another file). */
int kiln_kten_read(struct kiln_kten_writer *w, size_t a, uint64_t off, void *data, size_t len,
                   struct kiln_err *err);
/* Hashes every array, writes the metadata block and the header, syncs and renames into place.
 * On failure the temporary file is removed. */
int kiln_kten_finish(struct kiln_kten_writer *w, const char *metadata, size_t metalen,
                     struct kiln_err *err);
void kiln_kten_abort(struct kiln_kten_writer *w);

/* A parsed header. */
struct kiln_kten_info {
    uint32_t version;
    uint64_t file_size;
    uint64_t meta_offset, meta_length;
    uint8_t meta_sha256[KILN_SHA256_LEN];
    struct kiln_kten_array arrays[KILN_KTEN_MAX_ARRAYS];
    size_t narrays;
    char *metadata; /* NUL-terminated copy of the metadata block (malloc'ed) */
};

/* Reads and validates the header, the array table and the metadata block: magic, version,
 * bounds, alignment, and that each length equals the product of its dims times the dtype size.
 * Does not hash the arrays (kiln_kten_check does). */
int kiln_kten_open(const char *path, struct kiln_kten_info *info, struct kiln_err *err);
void kiln_kten_info_free(struct kiln_kten_info *info);

/* Recomputes the SHA-256 of the metadata and of every array. Returns KILN_OK or
 * KILN_EMISMATCH with err naming the first array that differs; bad_mask gets one bit per
 * array (bit 31 = metadata). */
int kiln_kten_check(const char *path, const struct kiln_kten_info *info, uint32_t *bad_mask,
                    struct kiln_err *err);

/* Index of a named array, or -1. */
int kiln_kten_find(const struct kiln_kten_info *info, const char *name);

#endif
