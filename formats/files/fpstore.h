/* The near-duplicate fingerprints of a catalogue (core/nearfp.h), kept in fixed slots of an
 * unnamed scratch file instead of memory: at 312 bytes each they would be the largest part of
 * a large catalogue (300 MB for a million pictures), while the split needs all of them only
 * once, in slot order, and afterwards a few for the pixel checks. The file has no name, so
 * nothing is left behind when kiln stops, however it stops. */
#ifndef KILN_FPSTORE_H
#define KILN_FPSTORE_H

#include <stdatomic.h>
#include <stddef.h>
#include <stdint.h>

#include "../../core/err.h"
#include "../../core/nearfp.h"

struct kiln_fpstore {
    int fd;
    atomic_uint next; /* slots handed out */
};

/* Creates the store in dir (the folder the command writes to, so the scratch space is on the
 * same disk as the outputs); when dir is NULL or refuses an unnamed file, in $TMPDIR or /tmp.
 * *out is allocated; release it with kiln_fpstore_close. */
int kiln_fpstore_open(struct kiln_fpstore **out, const char *dir, struct kiln_err *err);
/* Stores one fingerprint and returns its slot. Safe from several threads. */
int kiln_fpstore_put(struct kiln_fpstore *s, const struct kiln_nearfp *fp, uint32_t *slot,
                     struct kiln_err *err);
/* Stores n fingerprints already in their byte form (kiln_nearfp_encode's, checked by
 * kiln_nearfp_decode) in consecutive slots from *first, with one write: for a thread that
 * stores many in a row, as loading a catalogue does. Safe from several threads. */
int kiln_fpstore_put_raw(struct kiln_fpstore *s, const uint8_t *raw, uint32_t n, uint32_t *first,
                         struct kiln_err *err);
/* Reads the fingerprint at slot. Safe from several threads. */
int kiln_fpstore_get(struct kiln_fpstore *s, uint32_t slot, struct kiln_nearfp *fp,
                     struct kiln_err *err);
/* Reads slots [first, first + n) as raw bytes (KILN_NEARFP_BYTES each) into buf: the
 * sequential pass that gathers the hashes. */
int kiln_fpstore_read(struct kiln_fpstore *s, uint32_t first, uint32_t n, uint8_t *buf,
                      struct kiln_err *err);
/* Slots handed out so far. */
uint32_t kiln_fpstore_count(struct kiln_fpstore *s);
/* Closes (and so removes) the file and frees s; NULL is allowed. */
void kiln_fpstore_close(struct kiln_fpstore *s);

#endif
