/* The record pool: fixed-size slots in one scratch file, written with pwrite. */
#include "record_pool.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "pipeline.h"

int kiln_record_pool_open(struct kiln_record_pool *p, const char *outdir,
                          const struct kiln_recipe *recipe, struct kiln_err *err)
{
    memset(p, 0, sizeof *p);
    p->file.fd = -1;
    struct kiln_recipe ints = *recipe;
    ints.dtype = recipe->depth == 16 ? KILN_OUT_U16 : KILN_OUT_U8;
    p->record_bytes = kiln_recipe_record_bytes(&ints);
    p->recipe = recipe;
    atomic_init(&p->next, 0u);
    if (!p->record_bytes)
        return kiln_err_set(err, KILN_EINVAL, "record size overflows");
    int rc = kiln_pipeline_prepare_outdir(outdir, &p->debris, err);
    if (rc)
        return rc;
    size_t n = strlen(outdir) + sizeof "/records.pool";
    char *path = malloc(n);
    if (!path)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    snprintf(path, n, "%s/records.pool", outdir);
    rc = kiln_outfile_open(&p->file, path, err);
    free(path);
    return rc;
}

int kiln_record_pool_put(struct kiln_record_pool *p, const void *record, uint32_t *slot,
                         struct kiln_err *err)
{
    unsigned s = atomic_fetch_add(&p->next, 1u);
    if (s == KILN_NO_SLOT)
        return kiln_err_set(err, KILN_ETOOLARGE, "more than 2^32 - 1 records");
    *slot = s;
    int rc = kiln_outfile_write_at(&p->file, record, p->record_bytes,
                                   (uint64_t)s * p->record_bytes, err);
    /* The pool is build's scratch file: say what it is, since the user never named it. */
    if (rc)
        kiln_err_prefix(err, "cannot store a prepared record (build's temporary record pool)");
    return rc;
}

int kiln_record_pool_get(struct kiln_record_pool *p, uint32_t slot, void *buf,
                         struct kiln_err *err)
{
    uint8_t *d = buf;
    size_t left = p->record_bytes;
    uint64_t off = (uint64_t)slot * p->record_bytes;
    while (left) {
        ssize_t r = pread(p->file.fd, d, left, (off_t)off);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0)
            return kiln_err_sys(err, KILN_EIO, r < 0 ? errno : EIO, "cannot read record slot %u",
                                slot);
        d += r;
        left -= (size_t)r;
        off += (uint64_t)r;
    }
    return KILN_OK;
}

void kiln_record_pool_close(struct kiln_record_pool *p)
{
    kiln_outfile_abort(&p->file);
}
