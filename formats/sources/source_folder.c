/* Folder walker: recursive, sorted per folder, symbolic links reported (or followed with loop
 * detection), unreadable files and folders reported as entries rather than aborting. Archives
 * found inside the folder are handed to the archive walker. */
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../core/catalog.h"
#include "../../core/checked.h"
#include "../files/owner.h"
#include "source.h"
#include "walker.h"

struct dir_id {
    dev_t dev;
    ino_t ino;
};

struct folder_walk {
    const char *root;
    const struct kiln_walk_opts *opts;
    kiln_want_fn want;
    kiln_entry_fn fn;
    void *ctx;
    struct kiln_walk_counts *counts;
    struct dir_id *stack; /* folders being walked, for loop detection */
    size_t depth, stack_cap;
};

static int emit_status(struct folder_walk *w, const char *rel, int status, const char *reason,
                       struct kiln_err *err)
{
    if (w->want && !w->want(w->ctx, rel, ""))
        return KILN_OK;
    struct kiln_source_entry e = {.root = w->root, .path = rel, .member = "", .status = status};
    snprintf(e.reason, sizeof e.reason, "%s", reason);
    return w->fn(w->ctx, &e, err);
}

static int cmp_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

/* Joins root and rel into a new string ("root/rel", or root alone for rel ""). */
static char *join(const char *a, const char *b)
{
    size_t la = strlen(a), lb = strlen(b), n;
    if (!kiln_add_size(la, lb, &n) || !kiln_add_size(n, 2, &n))
        return NULL;
    char *s = malloc(n);
    if (!s)
        return NULL;
    memcpy(s, a, la);
    size_t k = la;
    if (lb) {
        if (la && a[la - 1] != '/')
            s[k++] = '/';
        memcpy(s + k, b, lb);
        k += lb;
    }
    s[k] = '\0';
    return s;
}

static int walk_file(struct folder_walk *w, const char *rel, const char *full,
                     struct kiln_err *err)
{
    /* Look at the first bytes to see whether this is an archive to descend into. */
    uint8_t head[512];
    size_t nhead = 0;
    int fd = open(full, O_RDONLY | O_CLOEXEC);
    if (fd < 0) {
        char reason[256];
        snprintf(reason, sizeof reason, "cannot open: %s", strerror(errno));
        return emit_status(w, rel, KILN_ST_UNREADABLE, reason, err);
    }
    for (;;) {
        ssize_t r = read(fd, head + nhead, sizeof head - nhead);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0) {
            char reason[256];
            snprintf(reason, sizeof reason, "cannot read: %s", strerror(errno));
            close(fd);
            return emit_status(w, rel, KILN_ST_UNREADABLE, reason, err);
        }
        nhead += (size_t)r;
        if (r == 0 || nhead == sizeof head)
            break;
    }
    close(fd);
    if (kiln_archive_sniff(head, nhead))
        return kiln_archive_walk(full, w->root, rel, w->opts, w->want, w->fn, w->ctx, w->counts,
                                 err);
    if (w->want && !w->want(w->ctx, rel, ""))
        return KILN_OK;
    struct kiln_source_entry e = {.root = w->root, .path = rel, .member = "", .status = KILN_ST_OK};
    struct kiln_err rerr;
    int rc = kiln_source_read_file(full, w->opts->max_file_bytes, &e.data, &e.size, &rerr);
    if (rc) {
        e.status = rc == KILN_ETOOLARGE ? KILN_ST_TOO_LARGE : KILN_ST_UNREADABLE;
        snprintf(e.reason, sizeof e.reason, "%s", rerr.msg);
    }
    return w->fn(w->ctx, &e, err);
}

static int walk_dir(struct folder_walk *w, const char *rel, struct kiln_err *err);

/* A folder kiln wrote (its manifest.json says so): skipped, so that an output written inside
 * a source is not catalogued by the next run. A manifest that cannot be read is not kiln's. */
static bool is_kiln_output(const char *full)
{
    struct kiln_owner o;
    return kiln_owner_of(full, &o, NULL) == KILN_OK && o.kind == KILN_OWNER_KILN;
}

static int walk_one(struct folder_walk *w, const char *rel, struct kiln_err *err)
{
    char *full = join(w->root, rel);
    if (!full)
        return kiln_err_set(err, KILN_ENOMEM, "path too long under %s", w->root);
    struct stat st;
    int rc = KILN_OK;
    if (lstat(full, &st) != 0) {
        char reason[256];
        snprintf(reason, sizeof reason, "cannot stat: %s", strerror(errno));
        rc = emit_status(w, rel, KILN_ST_UNREADABLE, reason, err);
        free(full);
        return rc;
    }
    if (S_ISLNK(st.st_mode)) {
        if (!w->opts->follow_links) {
            rc = emit_status(w, rel, KILN_ST_SYMLINK, "symbolic link not followed (--follow-links)",
                             err);
            free(full);
            return rc;
        }
        if (stat(full, &st) != 0) {
            char reason[256];
            snprintf(reason, sizeof reason, "broken symbolic link: %s", strerror(errno));
            rc = emit_status(w, rel, KILN_ST_UNREADABLE, reason, err);
            free(full);
            return rc;
        }
    }
    if (S_ISDIR(st.st_mode) && rel[0] && is_kiln_output(full)) {
        if (w->counts && (!w->counts->outputs++ || strcmp(rel, w->counts->first_output) < 0))
            snprintf(w->counts->first_output, sizeof w->counts->first_output, "%s", rel);
    } else if (S_ISDIR(st.st_mode)) {
        for (size_t i = 0; i < w->depth; i++)
            if (w->stack[i].dev == st.st_dev && w->stack[i].ino == st.st_ino) {
                rc = emit_status(w, rel, KILN_ST_LINK_LOOP,
                                 "link leads back to a folder already being walked", err);
                free(full);
                return rc;
            }
        if (!kiln_grow((void **)&w->stack, &w->stack_cap, w->depth + 1, sizeof *w->stack)) {
            free(full);
            return kiln_err_set(err, KILN_ENOMEM, "folder nesting too deep at %s", rel);
        }
        w->stack[w->depth++] = (struct dir_id){st.st_dev, st.st_ino};
        rc = walk_dir(w, rel, err);
        w->depth--;
    } else if (S_ISREG(st.st_mode)) {
        rc = walk_file(w, rel, full, err);
    } else {
        rc = emit_status(w, rel, KILN_ST_SPECIAL, "not a regular file (device, FIFO or socket)",
                         err);
    }
    free(full);
    return rc;
}

static int walk_dir(struct folder_walk *w, const char *rel, struct kiln_err *err)
{
    char *full = join(w->root, rel);
    if (!full)
        return kiln_err_set(err, KILN_ENOMEM, "path too long under %s", w->root);
    DIR *d = opendir(full);
    free(full);
    if (!d) {
        char reason[256];
        snprintf(reason, sizeof reason, "cannot open folder: %s", strerror(errno));
        /* The root itself failing is an error of the run, a sub-folder is a row. */
        if (!rel[0])
            return kiln_err_set(err, KILN_EIO, "cannot open source %s: %s", w->root, reason);
        return emit_status(w, rel, KILN_ST_UNREADABLE, reason, err);
    }
    char **names = NULL;
    size_t n = 0, cap = 0;
    int rc = KILN_OK;
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        if (strcmp(de->d_name, ".") == 0 || strcmp(de->d_name, "..") == 0)
            continue;
        const char *kind = kiln_source_skip_kind(de->d_name);
        if (kind) {
            if (w->counts) {
                if (kind[0] == 'h')
                    w->counts->hidden++;
                else
                    w->counts->junk++;
            }
            continue;
        }
        char *copy = strdup(de->d_name);
        if (!copy || !kiln_grow((void **)&names, &cap, n + 1, sizeof *names)) {
            free(copy);
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot list folder %s", rel);
            break;
        }
        names[n++] = copy;
    }
    closedir(d);
    if (!rc && n > 1)
        qsort(names, n, sizeof *names, cmp_name);
    for (size_t i = 0; i < n && !rc; i++) {
        char *child = rel[0] ? join(rel, names[i]) : strdup(names[i]);
        if (!child) {
            rc = kiln_err_set(err, KILN_ENOMEM, "path too long in %s", rel);
            break;
        }
        rc = walk_one(w, child, err);
        free(child);
    }
    for (size_t i = 0; i < n; i++)
        free(names[i]);
    free(names);
    return rc;
}

static int folder_walk(const char *root, const struct kiln_walk_opts *opts, kiln_want_fn want,
                       kiln_entry_fn fn, void *ctx, struct kiln_walk_counts *counts,
                       struct kiln_err *err)
{
    struct folder_walk w = {root, opts, want, fn, ctx, counts, NULL, 0, 0};
    struct stat st;
    if (stat(root, &st) != 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open source %s", root);
    if (!kiln_grow((void **)&w.stack, &w.stack_cap, 1, sizeof *w.stack))
        return kiln_err_set(err, KILN_ENOMEM, "cannot start walking %s", root);
    w.stack[w.depth++] = (struct dir_id){st.st_dev, st.st_ino};
    int rc = walk_dir(&w, "", err);
    free(w.stack);
    return rc;
}

static bool takes_folder(const struct stat *st)
{
    return S_ISDIR(st->st_mode);
}

const struct kiln_walker kiln_walker_folder = {
    .name = "folder",
    .takes = takes_folder,
    .walk = folder_walk,
};
