/* Fingerprint scratch store: one unnamed file (O_TMPFILE, or a named one removed at once where
 * the file system has no unnamed files), slots written with pwrite and read with pread. */
#include "fpstore.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "outfile.h"

#define SLOT KILN_NEARFP_BYTES

/* An unnamed read-write file in dir, or -1 with errno set. */
static int scratch_in(const char *dir)
{
#ifdef O_TMPFILE
    int fd = open(dir, O_TMPFILE | O_RDWR | O_CLOEXEC, 0600);
    if (fd >= 0 || (errno != EOPNOTSUPP && errno != EISDIR && errno != EINVAL))
        return fd;
#endif
    size_t n = strlen(dir) + sizeof "/.kiln-fingerprints-XXXXXX";
    char *path = malloc(n);
    if (!path) {
        errno = ENOMEM;
        return -1;
    }
    snprintf(path, n, "%s/.kiln-fingerprints-XXXXXX", dir);
    int named = mkostemp(path, O_CLOEXEC);
    if (named >= 0)
        unlink(path);
    free(path);
    return named;
}

int kiln_fpstore_open(struct kiln_fpstore **out, const char *dir, struct kiln_err *err)
{
    *out = NULL;
    struct kiln_fpstore *s = malloc(sizeof *s);
    if (!s)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate the fingerprint store");
    const char *tmp = getenv("TMPDIR");
    const char *where[2] = {dir, tmp && *tmp ? tmp : "/tmp"};
    int fd = -1, e = 0;
    for (int k = 0; k < 2 && fd < 0; k++)
        if (where[k]) {
            fd = scratch_in(where[k]);
            if (fd < 0 && !e)
                e = errno;
        }
    if (fd < 0) {
        free(s);
        return kiln_err_sys(err, KILN_EIO, e, "cannot create a scratch file for near-duplicate "
                            "fingerprints in %s or %s", dir ? dir : "(no folder)", where[1]);
    }
    s->fd = fd;
    atomic_init(&s->next, 0u);
    *out = s;
    return KILN_OK;
}

int kiln_fpstore_put(struct kiln_fpstore *s, const struct kiln_nearfp *fp, uint32_t *slot,
                     struct kiln_err *err)
{
    uint8_t buf[SLOT];
    kiln_nearfp_encode(fp, buf);
    return kiln_fpstore_put_raw(s, buf, 1, slot, err);
}

int kiln_fpstore_put_raw(struct kiln_fpstore *s, const uint8_t *raw, uint32_t n, uint32_t *first,
                         struct kiln_err *err)
{
    unsigned k = atomic_fetch_add(&s->next, n);
    if (k >= UINT32_MAX - 1 || n > UINT32_MAX - 1 - k)
        return kiln_err_set(err, KILN_ETOOLARGE, "more than 2^32 - 2 fingerprints");
    *first = k;
    const uint8_t *p = raw;
    size_t len = (size_t)n * SLOT;
    off_t off = (off_t)((uint64_t)k * SLOT);
    while (len) {
        ssize_t w = pwrite(s->fd, p, len, off);
        if (w < 0 && errno == EINTR)
            continue;
        if (w < 0)
            return kiln_err_sys(err, KILN_EWRITE, errno,
                                "cannot write the near-duplicate scratch file");
        p += w;
        len -= (size_t)w;
        off += w;
    }
    return KILN_OK;
}

int kiln_fpstore_read(struct kiln_fpstore *s, uint32_t first, uint32_t n, uint8_t *buf,
                      struct kiln_err *err)
{
    uint64_t off = (uint64_t)first * SLOT, left = (uint64_t)n * SLOT;
    if ((uint64_t)first + n > atomic_load(&s->next))
        return kiln_err_set(err, KILN_EINTERNAL, "fingerprint slot %u is not in the store",
                            first + n - 1);
    while (left) {
        ssize_t r = pread(s->fd, buf, left, (off_t)off);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0)
            return kiln_err_sys(err, KILN_EIO, r < 0 ? errno : EIO,
                                "cannot read the near-duplicate fingerprint scratch file");
        buf += r;
        left -= (uint64_t)r;
        off += (uint64_t)r;
    }
    return KILN_OK;
}

int kiln_fpstore_get(struct kiln_fpstore *s, uint32_t slot, struct kiln_nearfp *fp,
                     struct kiln_err *err)
{
    uint8_t buf[SLOT];
    int rc = kiln_fpstore_read(s, slot, 1, buf, err);
    if (!rc && kiln_nearfp_decode(buf, fp) != 0)
        rc = kiln_err_set(err, KILN_EIO, "fingerprint slot %u of the scratch file is damaged",
                          slot);
    return rc;
}

uint32_t kiln_fpstore_count(struct kiln_fpstore *s)
{
    return atomic_load(&s->next);
}

void kiln_fpstore_close(struct kiln_fpstore *s)
{
    if (!s)
        return;
    close(s->fd);
    free(s);
}
