/* Temporary-name-then-rename output files. */
#include "outfile.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../core/sha256.h"

#define HASH_BLOCK (1u << 20)

/* Distinguishes temporary names within one process; the pid distinguishes processes. */
static atomic_uint tmp_counter;

static char *dir_of(const char *path)
{
    const char *slash = strrchr(path, '/');
    if (!slash)
        return strdup(".");
    if (slash == path)
        return strdup("/");
    return strndup(path, (size_t)(slash - path));
}

int kiln_outfile_open(struct kiln_outfile *of, const char *final_path, struct kiln_err *err)
{
    memset(of, 0, sizeof *of);
    of->fd = -1;
    const char *slash = strrchr(final_path, '/');
    const char *base = slash ? slash + 1 : final_path;
    char *dir = dir_of(final_path);
    size_t need = strlen(final_path) + 64;
    of->tmp_path = malloc(need);
    of->final_path = strdup(final_path);
    if (!dir || !of->tmp_path || !of->final_path) {
        free(dir);
        free(of->tmp_path);
        free(of->final_path);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate output names");
    }
    snprintf(of->tmp_path, need, "%s/.%s.tmp-%ld-%u", dir, base, (long)getpid(),
             atomic_fetch_add(&tmp_counter, 1u));
    free(dir);
    of->fd = open(of->tmp_path, O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    if (of->fd < 0) {
        int e = errno;
        /* The temporary name is kiln's business; the user named the final one. */
        kiln_err_sys(err, KILN_EIO, e, "cannot write %s", of->final_path);
        free(of->tmp_path);
        free(of->final_path);
        of->tmp_path = of->final_path = NULL;
        return KILN_EIO;
    }
    return KILN_OK;
}

static const char *digits(const char *s)
{
    if (!isdigit((unsigned char)*s))
        return NULL;
    while (isdigit((unsigned char)*s))
        s++;
    return s;
}

bool kiln_outfile_is_temp_name(const char *name, const char *base, long *pid)
{
    const size_t bl = strlen(base);
    if (name[0] != '.' || strncmp(name + 1, base, bl) != 0 ||
        strncmp(name + 1 + bl, ".tmp-", 5) != 0)
        return false;
    const char *p = name + 1 + bl + 5, *end = digits(p);
    if (!end || *end != '-' || end - p > 9) /* a pid_t fits in 9 digits */
        return false;
    const char *n = digits(end + 1);
    if (!n || *n)
        return false;
    *pid = strtol(p, NULL, 10);
    return *pid > 0;
}

FILE *kiln_outfile_stream(struct kiln_outfile *of, struct kiln_err *err)
{
    if (!of->f) {
        of->f = fdopen(of->fd, "wb");
        if (!of->f)
            kiln_err_sys(err, KILN_EIO, errno, "cannot write %s", of->final_path);
    }
    return of->f;
}

int kiln_fsync_dir(const char *dir, struct kiln_err *err)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open folder %s", dir);
    int rc = fsync(fd);
    int e = errno;
    close(fd);
    /* Some file systems refuse fsync on folders; that is not a failure of the write. */
    if (rc != 0 && e != EINVAL && e != EROFS)
        return kiln_err_sys(err, KILN_EIO, e, "cannot sync folder %s", dir);
    return KILN_OK;
}

int kiln_outfile_commit(struct kiln_outfile *of, struct kiln_err *err)
{
    int rc = KILN_OK;
    if (of->f) {
        if (fflush(of->f) != 0 || ferror(of->f))
            rc = kiln_err_sys(err, KILN_EIO, errno, "cannot write %s", of->final_path);
    }
    if (!rc && fsync(of->fd) != 0)
        rc = kiln_err_sys(err, KILN_EIO, errno, "cannot sync %s", of->final_path);
    int close_rc = of->f ? fclose(of->f) : close(of->fd);
    of->f = NULL;
    of->fd = -1;
    if (!rc && close_rc != 0)
        rc = kiln_err_sys(err, KILN_EIO, errno, "cannot close %s", of->final_path);
    if (!rc && rename(of->tmp_path, of->final_path) != 0)
        rc = kiln_err_sys(err, KILN_EIO, errno, "cannot rename into %s", of->final_path);
    if (rc) {
        unlink(of->tmp_path);
    } else {
        char *dir = dir_of(of->final_path);
        if (dir)
            rc = kiln_fsync_dir(dir, err);
        free(dir);
    }
    free(of->tmp_path);
    free(of->final_path);
    of->tmp_path = of->final_path = NULL;
    return rc;
}

void kiln_outfile_abort(struct kiln_outfile *of)
{
    if (of->f)
        fclose(of->f);
    else if (of->fd >= 0)
        close(of->fd);
    of->f = NULL;
    of->fd = -1;
    if (of->tmp_path)
        unlink(of->tmp_path);
    free(of->tmp_path);
    free(of->final_path);
    of->tmp_path = of->final_path = NULL;
}

int kiln_pwrite_all(int fd, const void *buf, size_t len, long long off, struct kiln_err *err)
{
    const char *p = buf;
    while (len) {
        ssize_t w = pwrite(fd, p, len, (off_t)off);
        if (w < 0) {
            if (errno == EINTR)
                continue;
            return kiln_err_sys(err, KILN_EIO, errno, "cannot write at offset %lld", off);
        }
        p += w;
        len -= (size_t)w;
        off += w;
    }
    return KILN_OK;
}

int kiln_file_sha256(const char *path, uint8_t out[32], uint64_t *size, struct kiln_err *err)
{
    *size = 0;
    uint8_t *buf = malloc(HASH_BLOCK);
    if (!buf)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a buffer to hash %s", path);
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0) {
        free(buf);
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path);
    }
    /* Everything that can fail without a context is done: from here one exit frees it. */
    struct kiln_sha256 ctx;
    int rc = kiln_sha256_init(&ctx, err);
    while (!rc) {
        ssize_t n = read(fd, buf, HASH_BLOCK);
        if (n < 0 && errno == EINTR)
            continue;
        if (n < 0)
            rc = kiln_err_sys(err, KILN_EIO, errno, "cannot read %s", path);
        if (n <= 0)
            break;
        kiln_sha256_update(&ctx, buf, (size_t)n);
        *size += (uint64_t)n;
    }
    if (ctx.evp) {
        if (!rc)
            rc = kiln_sha256_final(&ctx, out, err);
        kiln_sha256_free(&ctx);
    }
    free(buf);
    close(fd);
    return rc;
}
