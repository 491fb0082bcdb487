/* Temporary-name-then-rename output files, and the list of this process's temporary files. */
#include "outfile.h"

#include <ctype.h>
#include <errno.h>
#include <fcntl.h>
#include <pthread.h>
#include <signal.h>
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
 * process-wide state in formats/, because a signal brings no context with it. Each entry is a
 * copy of a temporary file's path; a file is listed before it is created and unlisted only
 * after it is renamed or removed, all under live_mu, so the list never misses a file and
 * kiln_outfile_remove_all never races a rename. A staged file (below) stays listed until the
 * replace puts it in place. */
static pthread_mutex_t live_mu = PTHREAD_MUTEX_INITIALIZER;
static char **live;
static size_t nlive, live_cap;
static bool live_closed; /* set by kiln_outfile_remove_all: no file is created or renamed */
static atomic_bool interrupting; /* set by kiln_outfile_remove_all before it waits for live_mu */

/* Called with live_mu held. */
static bool live_add(const char *tmp_path)
{
    char *copy = strdup(tmp_path);
    if (!copy || !kiln_grow((void **)&live, &live_cap, nlive + 1, sizeof *live)) {
        free(copy);
        return false;
    }
    live[nlive++] = copy;
    return true;
}

/* Called with live_mu held. */
static void live_drop(const char *tmp_path)
{
    for (size_t i = 0; i < nlive; i++)
        if (strcmp(live[i], tmp_path) == 0) {
            free(live[i]);
            live[i] = live[--nlive];
            return;
        }
}

/* The folder being staged (kiln_outfile_stage) and the files waiting in it: final path and
 * temporary path, both owned here. Guarded by live_mu. */
struct staged {
    char *final, *tmp;
};
static char *stage_dir;
static struct staged *staged;
static size_t nstaged, staged_cap;

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
    else if (!live_add(of->tmp_path))
        e = ENOMEM;
    if (!e) {
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

/* ".<base><marker><pid>-<n>": kiln's temporary (".tmp-") and backup (".old-") names. */
static bool is_pid_name(const char *name, const char *base, const char *marker, long *pid)
{
    const size_t bl = strlen(base), ml = strlen(marker);
    if (name[0] != '.' || strncmp(name + 1, base, bl) != 0 ||
        strncmp(name + 1 + bl, marker, ml) != 0)
        return false;
    const char *p = name + 1 + bl + ml, *end = digits(p);
    if (!end || *end != '-' || end - p > 9) /* a pid_t fits in 9 digits */
        return false;
    const char *n = digits(end + 1);
    if (!n || *n)
        return false;
    *pid = strtol(p, NULL, 10);
    return *pid > 0;
}

bool kiln_outfile_is_temp_name(const char *name, const char *base, long *pid)
{
    return is_pid_name(name, base, ".tmp-", pid);
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

FILE *kiln_outfile_open_stream(struct kiln_outfile *of, const char *final_path,
                               struct kiln_err *err)
{
    if (kiln_outfile_open(of, final_path, err))
        return NULL;
    FILE *f = kiln_outfile_stream(of, err);
    if (!f)
        kiln_outfile_abort(of);
    return f;
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

/* Keeps a finished file under its temporary name for kiln_outfile_replace. Called with live_mu
 * held; on failure the file is removed. */
static int stage_file(const struct kiln_outfile *of, struct kiln_err *err)
{
    for (size_t i = 0; i < nstaged; i++)
        if (strcmp(staged[i].final, of->final_path) == 0) { /* written again: the new one counts */
            unlink(staged[i].tmp);
            live_drop(staged[i].tmp);
            free(staged[i].tmp);
            staged[i].tmp = strdup(of->tmp_path);
            if (!staged[i].tmp) {
                free(staged[i].final);
                staged[i] = staged[--nstaged];
                break;
            }
            return KILN_OK;
        }
    struct staged st = {strdup(of->final_path), strdup(of->tmp_path)};
    if (!st.final || !st.tmp || !kiln_grow((void **)&staged, &staged_cap, nstaged + 1,
                                           sizeof *staged)) {
        free(st.final);
        free(st.tmp);
        unlink(of->tmp_path);
        live_drop(of->tmp_path);
        return kiln_err_set(err, KILN_ENOMEM, "cannot keep %s for the replace", of->final_path);
    }
    staged[nstaged++] = st;
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
    if (!rc && stage_dir) {
        char *dir = dir_of(of->final_path);
        const bool in_stage = dir && strcmp(dir, stage_dir) == 0;
        free(dir);
        if (in_stage) {
            rc = stage_file(of, err);
            pthread_mutex_unlock(&live_mu);
            free(of->tmp_path);
            free(of->final_path);
            of->tmp_path = of->final_path = NULL;
            return rc;
        }
    }
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
    atomic_store(&interrupting, true); /* a replace holding the lock rolls back */
    pthread_mutex_lock(&live_mu);
    live_closed = true;
    for (size_t i = 0; i < nlive; i++) {
        struct stat st;
        const bool sized = stat(live[i], &st) == 0;
        if (unlink(live[i]) == 0) {
            ++*files;
            *bytes += sized ? (uint64_t)st.st_size : 0;
        }
        free(live[i]);
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

/* ---- replacing a folder's files together ------------------------------------------------ */

#define JOURNAL_HEAD "kiln replace journal 1"
#define JOURNAL_MAX (64u << 10)
#define NAME_MAX_LEN 255

/* One file of a replace, by name inside the folder: its final name, the temporary file that
 * becomes it ("" when the file is only taken away) and where the file it replaces is kept
 * until the replace is done ("" when there is none). */
struct jentry {
    char final[NAME_MAX_LEN + 1], tmp[NAME_MAX_LEN + 1], backup[NAME_MAX_LEN + 1];
};

static const char *base_of(const char *path)
{
    const char *slash = strrchr(path, '/');
    return slash ? slash + 1 : path;
}

static bool exists_at(int dfd, const char *name)
{
    struct stat st;
    return name[0] && fstatat(dfd, name, &st, AT_SYMLINK_NOFOLLOW) == 0;
}

static int sync_fd(int dfd)
{
    /* As kiln_fsync_dir: some file systems refuse fsync on folders. */
    return fsync(dfd) == 0 || errno == EINVAL || errno == EROFS ? 0 : -1;
}

/* Puts the folder back as it was before a replace was started (every entry's old file in
 * place, no new file), whatever step it was interrupted at, then removes the journal. The
 * steps of an entry are rename(final, backup), then rename(tmp, final); each undo looks at what
 * is there, so running it twice does no harm. */
static void roll_back(int dfd, const struct jentry *e, size_t n, const char *journal)
{
    for (size_t i = n; i-- > 0;) {
        if (e[i].backup[0] && exists_at(dfd, e[i].backup))
            renameat(dfd, e[i].backup, dfd, e[i].final); /* the old file over the new one */
        else if (!e[i].backup[0] && e[i].tmp[0] && !exists_at(dfd, e[i].tmp))
            unlinkat(dfd, e[i].final, 0); /* a new file where there was none */
        if (e[i].tmp[0])
            unlinkat(dfd, e[i].tmp, 0);
    }
    sync_fd(dfd);
    unlinkat(dfd, journal, 0);
    sync_fd(dfd);
}

int kiln_outfile_stage(const char *dir, struct kiln_err *err)
{
    pthread_mutex_lock(&live_mu);
    int rc = KILN_OK;
    if (stage_dir)
        rc = kiln_err_set(err, KILN_EINTERNAL, "%s is staged while %s is", dir, stage_dir);
    else if (!(stage_dir = strdup(dir)))
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot stage %s", dir);
    pthread_mutex_unlock(&live_mu);
    return rc;
}

char *kiln_outfile_staged_path(const char *final_path)
{
    char *p = NULL;
    pthread_mutex_lock(&live_mu);
    for (size_t i = 0; i < nstaged && !p; i++)
        if (strcmp(staged[i].final, final_path) == 0)
            p = strdup(staged[i].tmp);
    pthread_mutex_unlock(&live_mu);
    return p;
}

/* Ends staging, removing the staged files that are still there. Called with live_mu held. */
static void unstage(void)
{
    for (size_t i = 0; i < nstaged; i++) {
        unlink(staged[i].tmp);
        live_drop(staged[i].tmp);
        free(staged[i].final);
        free(staged[i].tmp);
    }
    free(staged);
    staged = NULL;
    nstaged = staged_cap = 0;
    free(stage_dir);
    stage_dir = NULL;
}

void kiln_outfile_discard(void)
{
    pthread_mutex_lock(&live_mu);
    unstage();
    pthread_mutex_unlock(&live_mu);
}

bool kiln_outfile_is_backup_name(const char *name, const char *base, long *pid)
{
    return is_pid_name(name, base, ".old-", pid);
}

/* The entries of a replace: every staged file, and every name of remove that exists and is
 * not staged; each existing final file gets a backup name. Called with live_mu held. */
static int plan_entries(int dfd, const char *const *remove, size_t nremove, struct jentry **out,
                        size_t *n, struct kiln_err *err)
{
    struct jentry *e = kiln_alloc_array(nstaged + nremove + 1, sizeof *e);
    if (!e)
        return kiln_err_set(err, KILN_ENOMEM, "cannot plan the replace of %s", stage_dir);
    size_t k = 0;
    const long pid = (long)getpid();
    for (size_t i = 0; i < nstaged + nremove; i++) {
        const char *final = i < nstaged ? base_of(staged[i].final) : remove[i - nstaged];
        bool dup = false;
        for (size_t j = 0; j < k && !dup; j++)
            dup = strcmp(e[j].final, final) == 0;
        if (dup || (i >= nstaged && !exists_at(dfd, final)))
            continue;
        if (strlen(final) > NAME_MAX_LEN - 40 || strchr(final, '\t') || strchr(final, '\n')) {
            free(e);
            return kiln_err_set(err, KILN_EINTERNAL, "cannot journal the name %s", final);
        }
        memset(&e[k], 0, sizeof e[k]);
        snprintf(e[k].final, sizeof e[k].final, "%s", final);
        if (i < nstaged)
            snprintf(e[k].tmp, sizeof e[k].tmp, "%s", base_of(staged[i].tmp));
        if (exists_at(dfd, final))
            snprintf(e[k].backup, sizeof e[k].backup, ".%s.old-%ld-%u", final, pid,
                     atomic_fetch_add(&tmp_counter, 1u));
        k++;
    }
    *out = e;
    *n = k;
    return KILN_OK;
}

/* Writes the journal (created exclusively, so two runs never replace one folder at once) and
 * makes it durable before anything is renamed. */
static int write_journal(int dfd, const struct jentry *e, size_t n, struct kiln_err *err)
{
    int fd = openat(dfd, KILN_OUTFILE_JOURNAL, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    if (fd < 0) {
        if (errno == EEXIST)
            return kiln_err_set(err, KILN_EWRITE,
                                "cannot replace the files of %s: another kiln run is replacing "
                                "them (%s/%s)",
                                stage_dir, stage_dir, KILN_OUTFILE_JOURNAL);
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s/%s", stage_dir,
                            KILN_OUTFILE_JOURNAL);
    }
    FILE *f = fdopen(fd, "w");
    if (!f) {
        close(fd);
        unlinkat(dfd, KILN_OUTFILE_JOURNAL, 0);
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot write %s/%s", stage_dir,
                            KILN_OUTFILE_JOURNAL);
    }
    fprintf(f, "%s\npid %ld\n", JOURNAL_HEAD, (long)getpid());
    for (size_t i = 0; i < n; i++)
        fprintf(f, "%s\t%s\t%s\n", e[i].final, e[i].tmp[0] ? e[i].tmp : "-",
                e[i].backup[0] ? e[i].backup : "-");
    fputs("end\n", f);
    int rc = fflush(f) != 0 || ferror(f) || fsync(fd) != 0 ? -1 : 0;
    int saved = errno;
    if (fclose(f) != 0 && !rc) {
        rc = -1;
        saved = errno;
    }
    if (!rc && sync_fd(dfd) != 0) {
        rc = -1;
        saved = errno;
    }
    if (rc) {
        unlinkat(dfd, KILN_OUTFILE_JOURNAL, 0);
        return kiln_err_sys(err, KILN_EWRITE, saved, "cannot write %s/%s", stage_dir,
                            KILN_OUTFILE_JOURNAL);
    }
    return KILN_OK;
}

int kiln_outfile_replace(const char *const *remove, size_t nremove, struct kiln_err *err)
{
    pthread_mutex_lock(&live_mu);
    if (!stage_dir) {
        pthread_mutex_unlock(&live_mu);
        return kiln_err_set(err, KILN_EINTERNAL, "no folder is staged");
    }
    int rc = KILN_OK;
    struct jentry *e = NULL;
    size_t n = 0;
    int dfd = open(stage_dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (dfd < 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot open output folder %s", stage_dir);
    if (!rc && (live_closed || atomic_load(&interrupting)))
        rc = kiln_err_set(err, KILN_EWRITE, "cannot replace the files of %s: the run is being "
                                            "interrupted", stage_dir);
    if (!rc)
        rc = plan_entries(dfd, remove, nremove, &e, &n, err);
    if (!rc)
        rc = write_journal(dfd, e, n, err);
    bool journal = !rc;
    for (size_t i = 0; i < n && !rc; i++) {
        if (e[i].backup[0] && renameat(dfd, e[i].final, dfd, e[i].backup) != 0)
            rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot move the old %s/%s aside",
                              stage_dir, e[i].final);
        if (!rc && e[i].tmp[0] && renameat(dfd, e[i].tmp, dfd, e[i].final) != 0)
            rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot rename into %s/%s", stage_dir,
                              e[i].final);
    }
    if (!rc && sync_fd(dfd) != 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot sync folder %s", stage_dir);
    /* A signal that came while the files were renamed: the run did not finish, so the folder
     * goes back to what it was, as after any other failure. */
    if (!rc && atomic_load(&interrupting))
        rc = kiln_err_set(err, KILN_EWRITE, "cannot replace the files of %s: the run is being "
                                            "interrupted", stage_dir);
    /* The journal's removal is the moment the new files become the output. */
    if (!rc && (unlinkat(dfd, KILN_OUTFILE_JOURNAL, 0) != 0 || sync_fd(dfd) != 0))
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot remove %s/%s", stage_dir,
                          KILN_OUTFILE_JOURNAL);
    if (rc && journal)
        roll_back(dfd, e, n, KILN_OUTFILE_JOURNAL);
    for (size_t i = 0; i < n && !rc; i++)
        if (e[i].backup[0])
            unlinkat(dfd, e[i].backup, 0); /* left behind only by a kill: debris then */
    for (size_t i = 0; i < nstaged && !rc; i++)
        live_drop(staged[i].tmp); /* renamed: no longer temporary */
    unstage();
    if (dfd >= 0)
        close(dfd);
    free(e);
    pthread_mutex_unlock(&live_mu);
    return rc;
}

/* Reads a journal line into buf (without its newline); false at the end or on a line too long
 * for a journal kiln writes. */
static bool journal_line(const char **p, char *buf, size_t len)
{
    const char *nl = strchr(*p, '\n');
    if (!nl || (size_t)(nl - *p) >= len)
        return false;
    memcpy(buf, *p, (size_t)(nl - *p));
    buf[nl - *p] = '\0';
    *p = nl + 1;
    return true;
}

/* Parses and checks a journal: every name must be one kiln writes (is_output, and kiln's
 * temporary and backup names for the journal's process). Returns the number of entries, or
 * -1 when it is not a journal kiln wrote; *complete says whether it got to its "end" line. */
static long parse_journal(const char *text, bool (*is_output)(const char *name), long *pid,
                          struct jentry *e, size_t cap, bool *complete)
{
    char line[3 * (NAME_MAX_LEN + 1) + 8];
    const char *p = text;
    *complete = false;
    if (!journal_line(&p, line, sizeof line) || strcmp(line, JOURNAL_HEAD) != 0 ||
        !journal_line(&p, line, sizeof line) || sscanf(line, "pid %ld", pid) != 1 || *pid <= 0)
        return -1;
    size_t n = 0;
    while (journal_line(&p, line, sizeof line)) {
        if (strcmp(line, "end") == 0) {
            *complete = true;
            return (long)n;
        }
        char *tab1 = strchr(line, '\t'), *tab2 = tab1 ? strchr(tab1 + 1, '\t') : NULL;
        if (!tab2 || strchr(tab2 + 1, '\t') || n == cap)
            return -1;
        *tab1 = *tab2 = '\0';
        const char *tmp = strcmp(tab1 + 1, "-") ? tab1 + 1 : "";
        const char *bak = strcmp(tab2 + 1, "-") ? tab2 + 1 : "";
        long p1 = 0, p2 = 0;
        if (!is_output(line) || (tmp[0] && (!kiln_outfile_is_temp_name(tmp, line, &p1) ||
                                            p1 != *pid)) ||
            (bak[0] && (!kiln_outfile_is_backup_name(bak, line, &p2) || p2 != *pid)))
            return -1;
        snprintf(e[n].final, sizeof e[n].final, "%s", line);
        snprintf(e[n].tmp, sizeof e[n].tmp, "%s", tmp);
        snprintf(e[n].backup, sizeof e[n].backup, "%s", bak);
        n++;
    }
    return (long)n; /* cut short: written by a run killed before its renames began */
}

int kiln_outfile_recover(const char *dir, bool (*is_output)(const char *name),
                         struct kiln_recovery *r, struct kiln_err *err)
{
    memset(r, 0, sizeof *r);
    int dfd = open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC);
    if (dfd < 0)
        return errno == ENOENT ? KILN_OK
                               : kiln_err_sys(err, KILN_EIO, errno, "cannot open folder %s", dir);
    int fd = openat(dfd, KILN_OUTFILE_JOURNAL, O_RDONLY | O_CLOEXEC | O_NOFOLLOW);
    if (fd < 0) {
        int e = errno;
        close(dfd);
        return e == ENOENT ? KILN_OK
                           : kiln_err_sys(err, KILN_EIO, e, "cannot read %s/%s", dir,
                                          KILN_OUTFILE_JOURNAL);
    }
    r->journal = true;
    char *text = malloc(JOURNAL_MAX + 1);
    struct jentry *e = kiln_alloc_array(64, sizeof *e);
    ssize_t got = text ? read(fd, text, JOURNAL_MAX) : -1;
    close(fd);
    int rc = KILN_OK;
    if (!text || !e)
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot read %s/%s", dir, KILN_OUTFILE_JOURNAL);
    else if (got < 0)
        rc = kiln_err_sys(err, KILN_EIO, errno, "cannot read %s/%s", dir, KILN_OUTFILE_JOURNAL);
    bool complete = false;
    long n = -1;
    if (!rc) {
        text[got] = '\0';
        n = parse_journal(text, is_output, &r->pid, e, 64, &complete);
        if (n < 0)
            rc = kiln_err_set(err, KILN_EINVAL,
                              "%s/%s is not a journal kiln wrote; kiln leaves the folder alone "
                              "(remove the file if it is not yours)",
                              dir, KILN_OUTFILE_JOURNAL);
    }
    if (!rc && r->pid != (long)getpid() &&
        (kill((pid_t)r->pid, 0) == 0 || errno == EPERM)) {
        r->busy = true; /* a run is replacing the files right now */
    } else if (!rc) {
        /* A journal without its end was cut short before any rename: only its temporary files
         * are there to remove. */
        if (complete) {
            roll_back(dfd, e, (size_t)n, KILN_OUTFILE_JOURNAL);
        } else {
            for (long i = 0; i < n; i++)
                if (e[i].tmp[0])
                    unlinkat(dfd, e[i].tmp, 0);
            unlinkat(dfd, KILN_OUTFILE_JOURNAL, 0);
            sync_fd(dfd);
        }
        r->restored = complete;
    }
    free(text);
    free(e);
    close(dfd);
    return rc;
}
