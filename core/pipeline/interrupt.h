/* Clean interruption: SIGINT, SIGTERM and SIGHUP end a run without leaving its temporary files
 * behind (docs/cli.md, "Interruptions"). */
#ifndef KILN_INTERRUPT_H
#define KILN_INTERRUPT_H

#include <stddef.h>
#include <stdint.h>

#include "../err.h"

/* Told which signal came and what was removed, just before the process ends; may print. */
typedef void (*kiln_interrupt_fn)(int sig, size_t files, uint64_t bytes);

/* Blocks SIGINT, SIGTERM and SIGHUP in the calling thread (and so in every thread it starts
 * later) and starts a thread that waits for them. When one comes, that thread removes every
 * temporary file of the process (kiln_outfile_remove_all: reservations and half-written outputs
 * alike; a file being renamed into place finishes first), calls fn, and ends the process by
 * the same signal, so a shell reports 128 + its number (130 for SIGINT, 143 for SIGTERM).
 * A signal the process was started with ignored (nohup, `&` in a script) stays ignored.
 * Call once, from main, before any other thread exists. */
int kiln_interrupt_start(kiln_interrupt_fn fn, struct kiln_err *err);

#endif
