/* Helpers every stage shares: paths, and preparing pack's and build's output folder
 * (the files kiln owns there are named in formats/files/manifest.h). */
#include "pipeline.h"

#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../formats/files/manifest.h"
#include "../../formats/files/outfile.h"
#include "../../formats/files/owner.h"

char *kiln_pipeline_path(const char *dir, const char *name)
{
    size_t n = strlen(dir) + strlen(name) + 2;
    char *s = malloc(n);
    if (s)
        snprintf(s, n, "%s/%s", dir, name);
    return s;
}

/* ---- output folder ------------------------------------------------------------------------ */

static int make_dirs(const char *path, struct kiln_err *err)
{
    char *p = strdup(path);
    if (!p)
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (char *s = p + 1; *s; s++) {
        if (*s != '/')
            continue;
        *s = '\0';
        if (mkdir(p, 0755) != 0 && errno != EEXIST) {
            int e = errno;
            free(p);
            return kiln_err_sys(err, KILN_EWRITE, e, "cannot create folder %s", path);
        }
        *s = '/';
    }
    int rc = KILN_OK;
    if (mkdir(p, 0755) != 0 && errno != EEXIST)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot create folder %s", path);
    free(p);
    return rc;
}

/* Final names whose temporary and backup files (".<name>.tmp-<pid>-<n>", ".<name>.old-<pid>-<n>",
 * formats/files/outfile.c) pack and build create in an output folder: the outputs and the
 * scratch record pool. */
static const char *const temp_bases[] = {
    KILN_FILE_MANIFEST, KILN_FILE_SUMS, KILN_FILE_ITEMS, KILN_FILE_CATALOG,
    KILN_FILE_TRAIN,    KILN_FILE_VAL,  KILN_FILE_TEST,  KILN_FILE_POOL};

static bool is_kiln_temp(const char *name, long *pid)
{
    for (size_t i = 0; i < sizeof temp_bases / sizeof temp_bases[0]; i++)
        if (kiln_outfile_is_temp_name(name, temp_bases[i], pid) ||
            kiln_outfile_is_backup_name(name, temp_bases[i], pid))
            return true;
    return false;
}

static bool process_alive(long pid)
{
    return pid == (long)getpid() || kill((pid_t)pid, 0) == 0 || errno == EPERM;
}

/* Removes what an interrupted run left: only regular files (never a link) whose names kiln's
 * temporary- and backup-name patterns give for one of its own outputs, and only when the
 * process that made them is gone (a run still writing into the folder keeps its files; they
 * are counted). Backups are left only by a run killed after its replace was done. */
static int sweep_debris(DIR *d, const char *dir, struct kiln_debris *debris, struct kiln_err *err)
{
    const int fd = dirfd(d);
    rewinddir(d);
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        long pid;
        struct stat st;
        if (de->d_name[0] != '.' || !is_kiln_temp(de->d_name, &pid) ||
            fstatat(fd, de->d_name, &st, AT_SYMLINK_NOFOLLOW) != 0 || !S_ISREG(st.st_mode))
            continue;
        if (process_alive(pid)) {
            debris->kept++;
            continue;
        }
        if (unlinkat(fd, de->d_name, 0) != 0 && errno != ENOENT)
            return kiln_err_sys(err, KILN_EWRITE, errno,
                                "cannot remove %s/%s, left by an interrupted run", dir,
                                de->d_name);
        debris->removed++;
        debris->bytes += (uint64_t)st.st_size;
    }
    return KILN_OK;
}

/* What a folder that is not a kiln output holds besides hidden files: its first visible entry in
 * byte order and how many there are, or count 0. */
static void visible_entries(DIR *d, char *first, size_t len, size_t *count)
{
    rewinddir(d);
    *count = 0;
    first[0] = '\0';
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        if (de->d_name[0] == '.')
            continue; /* hidden: never kiln's to judge or touch, except its own debris */
        if (!(*count)++ || strcmp(de->d_name, first) < 0)
            snprintf(first, len, "%s", de->d_name);
    }
}

/* A kiln name in a kiln output that its SHA256SUMS does not list: someone else's file. */
static const char *unlisted_kiln_name(DIR *d, unsigned files)
{
    rewinddir(d);
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        int i = kiln_owner_name_index(de->d_name);
        if (i >= 0 && !(files & 1u << i))
            return kiln_owner_names[i];
    }
    return NULL;
}

int kiln_pipeline_prepare_outdir(const char *dir, struct kiln_debris *debris,
                                 struct kiln_err *err)
{
    memset(debris, 0, sizeof *debris);
    int rc = make_dirs(dir, err);
    if (rc)
        return rc;
    /* A run killed while it put its files in place left a journal: the old files go back
     * first, so the folder is judged as the output it was. */
    struct kiln_recovery rec;
    rc = kiln_outfile_recover(dir, kiln_owner_is_output_name, &rec, err);
    if (rc == KILN_EINVAL) { /* a journal kiln did not write: the folder is not for writing */
        kiln_err_prefix(err, "cannot write into %s", dir);
        err->code = KILN_EWRITE;
        return KILN_EWRITE;
    }
    if (rc)
        return rc;
    if (rec.busy)
        return kiln_err_set(err, KILN_EWRITE,
                            "cannot write into %s: kiln process %ld is replacing its files now "
                            "(%s/%s); wait for it to end or use another folder",
                            dir, rec.pid, dir, KILN_OUTFILE_JOURNAL);
    debris->restored = rec.restored;
    debris->restored_pid = rec.pid;
    struct kiln_owner owner;
    rc = kiln_owner_of(dir, &owner, err);
    if (rc)
        return rc;
    if (owner.kind == KILN_OWNER_OTHER)
        return kiln_err_set(err, KILN_EWRITE,
                            "cannot write into %s: its %s is not a kiln manifest (%s); kiln "
                            "writes only into an empty folder or one it wrote, and never "
                            "replaces anyone else's files: use another folder",
                            dir, KILN_FILE_MANIFEST, owner.found);
    DIR *d = opendir(dir);
    if (!d)
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot open output folder %s", dir);
    char first[256];
    size_t count;
    visible_entries(d, first, sizeof first, &count);
    const char *unlisted = owner.kind == KILN_OWNER_KILN ? unlisted_kiln_name(d, owner.files)
                                                         : NULL;
    if (owner.kind == KILN_OWNER_NONE && count) {
        closedir(d);
        return kiln_err_set(err, KILN_EWRITE,
                            "cannot write into %s: it holds '%s'%s and no kiln manifest; kiln "
                            "writes only into an empty folder or one it wrote, and never "
                            "replaces anyone else's files: use an empty or new folder",
                            dir, first, count == 1 ? "" : count == 2 ? " and 1 more entry"
                                                                     : " and more entries");
    }
    if (unlisted) {
        closedir(d);
        return kiln_err_set(err, KILN_EWRITE,
                            "cannot write into %s: it holds %s, which its %s does not list as "
                            "kiln's, so it is someone else's file; move it away or use "
                            "another folder",
                            dir, unlisted, KILN_FILE_SUMS);
    }
    rc = sweep_debris(d, dir, debris, err);
    closedir(d);
    return rc;
}

int kiln_pipeline_stage_outputs(const char *dir, struct kiln_err *err)
{
    return kiln_outfile_stage(dir, err);
}

void kiln_pipeline_discard_outputs(void)
{
    kiln_outfile_discard();
}

int kiln_pipeline_replace_outputs(const char *dir, const char *const *written, size_t nwritten,
                                  struct kiln_err *err)
{
    /* Judged again now: the folder must still be what it was when the run began. */
    struct kiln_owner owner;
    int rc = kiln_owner_of(dir, &owner, err);
    if (!rc && owner.kind == KILN_OWNER_OTHER)
        rc = kiln_err_set(err, KILN_EWRITE,
                          "cannot write into %s: its %s was replaced during the run by one that "
                          "is not kiln's (%s)",
                          dir, KILN_FILE_MANIFEST, owner.found);
    const char *remove[KILN_OWNER_NNAMES];
    size_t nremove = 0;
    for (int i = 0; !rc && i < KILN_OWNER_NNAMES; i++) {
        bool new = false;
        for (size_t k = 0; k < nwritten && !new; k++)
            new = strcmp(written[k], kiln_owner_names[i]) == 0;
        const bool kilns = owner.kind == KILN_OWNER_KILN && owner.files & 1u << i;
        char *p = kiln_pipeline_path(dir, kiln_owner_names[i]);
        struct stat st;
        const bool there = p && lstat(p, &st) == 0;
        free(p);
        if (new && there && !kilns)
            rc = kiln_err_set(err, KILN_EWRITE,
                              "cannot write %s/%s: a file of that name appeared during the run, "
                              "and it is not kiln's",
                              dir, kiln_owner_names[i]);
        else if (!new && kilns)
            remove[nremove++] = kiln_owner_names[i]; /* the earlier output's, not rewritten */
    }
    if (rc) {
        kiln_outfile_discard();
        return rc;
    }
    return kiln_outfile_replace(remove, nremove, err);
}
