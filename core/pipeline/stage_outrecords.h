/* The records an output folder holds, as digests per item of its catalogue: what `kiln audit
 * OUTDIR` compares to find identical records in two splits (docs/split.md section 8), read from
 * the tensor files themselves rather than from what the manifest says. */
#ifndef KILN_STAGE_OUTRECORDS_H
#define KILN_STAGE_OUTRECORDS_H

#include <stdint.h>

#include "../catalog.h"
#include "../err.h"

/* For every item of cat (outdir's catalog.csv, loaded) that has a split: the first
 * KILN_RECORD_DIGEST_LEN bytes of the SHA-256 of its record, found through items.csv (split and
 * index by location) in the split's .kten file, into digest[i]. Items without a split get
 * zeros. Errors name the file: an items.csv row or a record missing (KILN_ECORRUPT), a file
 * that cannot be read (KILN_EIO), memory. */
int kiln_output_record_digests(const char *outdir, const struct kiln_catalog *cat,
                               uint8_t (*digest)[KILN_RECORD_DIGEST_LEN], struct kiln_err *err);

#endif
