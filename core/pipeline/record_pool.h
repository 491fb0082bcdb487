/* The record pool of kiln build: scan workers prepare each usable item's record from the one
 * decode they make and store it here at a slot; once the split is known, pack lays the records
 * out per split without decoding again. A hidden temporary file in the output folder, never
 * renamed into place. */
#ifndef KILN_RECORD_POOL_H
#define KILN_RECORD_POOL_H

#include <stdatomic.h>
#include <stddef.h>
#include <stdint.h>

#include "../../formats/files/outfile.h"
#include "../err.h"
#include "../recipe.h"
#include "pipeline.h"

#define KILN_NO_SLOT UINT32_MAX

struct kiln_record_pool {
    struct kiln_outfile file;
    const struct kiln_recipe *recipe;
    size_t record_bytes; /* one integer record (depth 8 or 16, before any f32 conversion) */
    atomic_uint next;    /* next free slot */
    struct kiln_debris debris; /* what preparing the output folder removed */
};

/* Prepares outdir as pack does (created; empty or an earlier kiln output whose manifest is
 * removed) and creates the pool in it. recipe must be finished and outlive the pool. */
int kiln_record_pool_open(struct kiln_record_pool *p, const char *outdir,
                          const struct kiln_recipe *recipe, struct kiln_err *err);
/* Stores one record (record_bytes) and returns its slot. Safe from several threads. */
int kiln_record_pool_put(struct kiln_record_pool *p, const void *record, uint32_t *slot,
                         struct kiln_err *err);
/* Reads the record at slot into buf. */
int kiln_record_pool_get(struct kiln_record_pool *p, uint32_t slot, void *buf,
                         struct kiln_err *err);
/* Removes the pool file. */
void kiln_record_pool_close(struct kiln_record_pool *p);

#endif
