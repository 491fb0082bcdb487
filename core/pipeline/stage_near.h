/* The near-duplicate stage (docs/near-duplicates.md): from the fingerprints of a catalogue's
 * usable items to checked links. The hashes are gathered from the fingerprint store in one
 * sequential pass; the eleven candidate searches run on worker threads; every candidate is
 * checked on pixels, the workers reading the two fingerprints back from the store; then the
 * unit rule decides which links may join units. The result depends on the catalogue alone,
 * never on the number of threads. */
#ifndef KILN_STAGE_NEAR_H
#define KILN_STAGE_NEAR_H

#include "../catalog.h"
#include "../err.h"
#include "../nearlink.h"

/* Gives cat (empty, or loaded without fingerprints) a fingerprint store in dir (else $TMPDIR or
 * /tmp; formats/files/fpstore.h), which kiln_catalog_free closes. Load or scan afterwards. */
int kiln_near_attach_store(struct kiln_catalog *cat, const char *dir, struct kiln_err *err);
/* The same in the folder of file (a catalogue the command reads or writes). */
int kiln_near_attach_store_beside(struct kiln_catalog *cat, const char *file,
                                  struct kiln_err *err);

/* The checked links among cat's ok items (classes indexed; the labels and exact units feed the
 * unit rule), into out (filled; kiln_nearlinks_free). jobs worker threads (0 = 1). Items
 * without a fingerprint take no part. Errors: KILN_EINTERNAL when cat's fingerprints were not
 * kept (KILN_FP_SKIPPED), KILN_EIO from the store, KILN_ENOMEM. */
int kiln_stage_near(const struct kiln_catalog *cat, const struct kiln_nearlink_params *p,
                    unsigned jobs, struct kiln_nearlinks *out, struct kiln_err *err);

#endif
