/* Temporary-name-then-rename output files, and the list of this process's temporary files. */
#include "outfile.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../core/checked.h"
#include "../../core/sha256.h"

#define HASH_BLOCK (1u << 20)

/* Distinguishes temporary names within one process; the pid distinguishes processes. */
static atomic_uint tmp_counter;

/* The temporary files that exist, so that an interrupted run can remove them: the one piece of
 * process-wide state in formats/, because a signal brings no context with it. Each entry is
 * the tmp_path of an open kiln_outfile; a file is listed before it is created and unlisted
 * only after it is renamed or removed, all under live_mu, so the list never misses a file and
 * kiln_outfile_remove_all never races a rename. */
static pthread_mutex_t live_mu = PTHREAD_MUTEX_INITIALIZER;
static char **live;
static size_t nlive, live_cap;
static bool live_closed; /* set by kiln_outfile_remove_all: no file is created or renamed */

/* Called with live_mu held. */
static void live_drop(const char *tmp_path)
{
    for (size_t i = 0; i < nlive; i++)
        if (live[i] == tmp_path) {
            live[i] = live[--nlive];
            return;
        }
}

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
        of->tmp_path = of->final_path = NULL;
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate output names");
    }
    snprintf(of->tmp_path, need, "%s/.%s.tmp-%ld-%u", dir, base, (long)getpid(),
             atomic_fetch_add(&tmp_counter, 1u));
    free(dir);
    int e = 0;
    pthread_mutex_lock(&live_mu);
    if (live_closed)
        e = EINTR;
    else if (!kiln_grow((void **)&live, &live_cap, nlive + 1, sizeof *live))
        e = ENOMEM;
    if (!e) {
        live[nlive++] = of->tmp_path;
        of->fd = open(of->tmp_path, O_RDWR | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
        if (of->fd < 0) {
            e = errno;
            live_drop(of->tmp_path);
        }
    }
    pthread_mutex_unlock(&live_mu);
    if (e) {
        /* The temporary name is kiln's business; the user named the final one. */
        if (e == ENOMEM)
            kiln_err_set(err, KILN_ENOMEM, "cannot list the temporary file of %s", final_path);
        else if (e == EINTR)
            kiln_err_set(err, KILN_EWRITE, "cannot write %s: the run is being interrupted",
                         final_path);
        else
            kiln_err_sys(err, KILN_EWRITE, e, "cannot write %s", final_path);
        free(of->tmp_path);
        free(of->final_path);
        of->tmp_path = of->final_path = NULL;
        return e == ENOMEM ? KILN_ENOMEM : KILN_EWRITE;
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
            kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s", of->final_path);
    }
    return of->f;
}

int kiln_fsync_dir(const char *dir, struct kiln_err *err)
{
    int fd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (fd < 0)
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot open folder %s", dir);
    int rc = fsync(fd);
    int e = errno;
    close(fd);
    /* Some file systems refuse fsync on folders; that is not a failure of the write. */
    if (rc != 0 && e != EINVAL && e != EROFS)
        return kiln_err_sys(err, KILN_EWRITE, e, "cannot sync folder %s", dir);
    return KILN_OK;
}

int kiln_outfile_commit(struct kiln_outfile *of, struct kiln_err *err)
{
    int rc = KILN_OK;
    if (of->f) {
        if (fflush(of->f) != 0 || ferror(of->f))
            rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s", of->final_path);
    }
    if (!rc && fsync(of->fd) != 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot sync %s", of->final_path);
    int close_rc = of->f ? fclose(of->f) : close(of->fd);
    of->f = NULL;
    of->fd = -1;
    if (!rc && close_rc != 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot close %s", of->final_path);
    pthread_mutex_lock(&live_mu);
    if (!rc && live_closed)
        rc = kiln_err_set(err, KILN_EWRITE, "cannot write %s: the run is being interrupted",
                          of->final_path);
    if (!rc && rename(of->tmp_path, of->final_path) != 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot rename into %s", of->final_path);
    if (rc)
        unlink(of->tmp_path);
    live_drop(of->tmp_path);
    pthread_mutex_unlock(&live_mu);
    if (!rc) {
        char *dir = dir_of(of->final_path);
        rc = dir ? kiln_fsync_dir(dir, err)
                 : kiln_err_set(err, KILN_ENOMEM, "cannot sync the folder of %s", of->final_path);
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
    if (of->tmp_path) {
        pthread_mutex_lock(&live_mu);
        unlink(of->tmp_path);
        live_drop(of->tmp_path);
        pthread_mutex_unlock(&live_mu);
    }
    free(of->tmp_path);
    free(of->final_path);
    of->tmp_path = of->final_path = NULL;
}

void kiln_outfile_remove_all(size_t *files, uint64_t *bytes)
{
    *files = 0;
    *bytes = 0;
    /* From here on kiln_outfile_open and kiln_outfile_commit refuse (live_closed, checked under
     * the lock before a file is created or renamed), so nothing appears after this sweep. */
    pthread_mutex_lock(&live_mu);
    live_closed = true;
    for (size_t i = 0; i < nlive; i++) {
        struct stat st;
        const bool sized = stat(live[i], &st) == 0;
        if (unlink(live[i]) == 0) {
            ++*files;
            *bytes += sized ? (uint64_t)st.st_size : 0;
        }
    }
    nlive = 0;
    pthread_mutex_unlock(&live_mu);
}

int kiln_outfile_write_at(struct kiln_outfile *of, const void *buf, size_t len, uint64_t off,
                          struct kiln_err *err)
{
    const char *p = buf;
    while (len) {
        if (off > (uint64_t)INT64_MAX - len)
            return kiln_err_set(err, KILN_EWRITE, "cannot write %s: offset %llu is too large",
                                of->final_path, (unsigned long long)off);
        ssize_t w = pwrite(of->fd, p, len, (off_t)off);
        if (w < 0) {
            if (errno == EINTR)
                continue;
            return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s", of->final_path);
        }
        p += w;
        len -= (size_t)w;
        off += (uint64_t)w;
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
