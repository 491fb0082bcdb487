/* Error reporting shared by every layer: a pinned status code and a message, kept in a struct
 * the caller owns so that no library code needs global state or prints anything. */
#ifndef KILN_ERR_H
#define KILN_ERR_H

/* Values are pinned: docs/statuses.md lists them and later versions only append. */
enum kiln_code {
    KILN_OK = 0,
    KILN_EINVAL = 1,       /* bad argument, option value or malformed stage file */
    KILN_EIO = 2,          /* the operating system refused a read, write, open or rename */
    KILN_ENOMEM = 3,       /* allocation failed or a size computation would overflow */
    KILN_ECORRUPT = 4,     /* input content is malformed */
    KILN_ETRUNCATED = 5,   /* input content ends early */
    KILN_EUNSUPPORTED = 6, /* input is well formed but uses a feature kiln does not handle */
    KILN_ETOOLARGE = 7,    /* input exceeds a configured limit (checked before allocating) */
    KILN_EMISMATCH = 8,    /* a checksum or recorded value does not match */
    KILN_EINTERNAL = 9,    /* a broken invariant: a bug in kiln */
    KILN_ELEAK = 10,       /* the output would hold identical content in two splits */
    KILN_EWRITE = 11       /* an output file could not be written (full disk, permissions, an
                              interruption): the message names the output, never an input */
};

struct kiln_err {
    int code;
    char msg[512];
};

/* Sets code and a printf-style message; returns code so callers can `return kiln_err_set(...)`.
 * err may be NULL, in which case only the code is returned. */
int kiln_err_set(struct kiln_err *err, int code, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Like kiln_err_set but appends ": <strerror(errnum)>". */
int kiln_err_sys(struct kiln_err *err, int code, int errnum, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* Prepends "prefix: " to an existing message (used to add a file name on the way up). */
void kiln_err_prefix(struct kiln_err *err, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

void kiln_err_clear(struct kiln_err *err);

/* Short stable name of a code ("corrupt", "io", ...). */
const char *kiln_code_name(int code);

#endif
