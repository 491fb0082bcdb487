/* Shared by the libFuzzer harnesses in tests/fuzz/ and their replay driver: the entry point
 * libFuzzer calls, a check that aborts on a broken invariant, in-memory files for readers that
 * take a path, and the decode limits every harness uses. */
#ifndef KILN_FUZZ_H
#define KILN_FUZZ_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* Decode limits inside the harnesses, far below kiln's defaults (2^28 pixels): with them a
 * 64-byte header cannot make a harness allocate gigabytes or spend seconds on one input, and
 * everything up to 1 Mpx (an 8 MiB RGBA 16-bit image) is still decoded in full. The limit
 * check itself is the same code path as with the defaults. */
#define FUZZ_MAX_PIXELS (1u << 20)
#define FUZZ_MAX_SIDE 65535u
/* Largest archive member the archive harness reads (kiln's default is 4 GiB). */
#define FUZZ_MAX_MEMBER (16u << 20)
/* Within these limits every honest allocation fits, so the harnesses treat KILN_ENOMEM as a
 * bug: it means a size taken from the input reached malloc unchecked. (Under AddressSanitizer
 * such a request aborts at once; in the plain replay it fails and breaks this rule.) */

/* A broken invariant is a bug: say which and abort, so libFuzzer keeps the input as a crash
 * and the replay test fails. */
#define FUZZ_CHECK(cond)                                                                     \
    do {                                                                                     \
        if (!(cond)) {                                                                       \
            fprintf(stderr, "%s:%d: invariant broken: %s\n", __FILE__, __LINE__, #cond);     \
            abort();                                                                         \
        }                                                                                    \
    } while (0)

/* Coverage feedback for what kiln cannot see: the decoding libraries are Debian's builds,
 * without coverage instrumentation, so an input that makes libpng take a new branch looks like
 * nothing new to libFuzzer. Each distinct outcome (return code, message without its numbers
 * and quoted names, decoded shape) is fed to libFuzzer as a feature of its own through an extra-counters
 * table, so inputs reaching new library behaviour are kept. A no-op counter without libFuzzer. */
void fuzz_outcome(int code, const char *what);
void fuzz_outcome_bytes(const void *data, size_t len);

/* Marks the current input as fully accepted by the code under test (decoded, parsed, loaded).
 * The replay driver's --valid folders must be accepted input by input: that is what makes the
 * generated seeds reach the deep paths, and a check that can fail. */
void fuzz_accept(void);
int fuzz_accepted(void); /* read and reset, by the replay driver */

/* The input as a file without touching the disk: an anonymous memory file (memfd) and a path
 * that opens it (/proc/self/fd/N). Returns 0, or -1 with errno set. */
struct fuzz_file {
    int fd;
    char path[64];
};
int fuzz_file_open(struct fuzz_file *f, const uint8_t *data, size_t size);
void fuzz_file_close(struct fuzz_file *f);

/* Harnesses that read several files take them from one input, cut at this line (it is in their
 * dictionaries). fuzz_split fills up to max parts and returns how many there are; the last part
 * runs to the end. */
#define FUZZ_SEP "\n--8<-- next file --8<--\n"
size_t fuzz_split(const uint8_t *data, size_t size, const uint8_t **part, size_t *len, size_t max);

/* Writes the bytes to path (a regular file); returns 0 or -1. */
int fuzz_write_file(const char *path, const uint8_t *data, size_t size);

/* Puts fuzz_tmpdir()/name in place: the bytes when data is not NULL, else no such file. The
 * full name goes to path (PATH_MAX bytes). Aborts when the file cannot be written. */
void fuzz_tmp_file(const char *name, const uint8_t *data, size_t size, char *path);

/* A private temporary folder for harnesses that need named files side by side, removed with
 * its contents at exit. Returns its path (created on first use) or aborts. */
const char *fuzz_tmpdir(void);

#endif
