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

/* The files an earlier output may hold; the first two are removed before a run writes. */
static const char *const owned_names[] = {
    KILN_FILE_MANIFEST, KILN_FILE_SUMS,  KILN_FILE_ITEMS, KILN_FILE_CATALOG,
    KILN_FILE_TRAIN,    KILN_FILE_VAL,   KILN_FILE_TEST,  KILN_FILE_LOG};

/* Final names whose temporary files (".<name>.tmp-<pid>-<n>", formats/files/outfile.c) pack
 * and build create in an output folder: the outputs and the scratch record pool. */
static const char *const temp_bases[] = {
    KILN_FILE_MANIFEST, KILN_FILE_SUMS, KILN_FILE_ITEMS, KILN_FILE_CATALOG,
    KILN_FILE_TRAIN,    KILN_FILE_VAL,  KILN_FILE_TEST,  KILN_FILE_POOL};

static bool is_kiln_temp(const char *name, long *pid)
{
    for (size_t i = 0; i < sizeof temp_bases / sizeof temp_bases[0]; i++)
        if (kiln_outfile_is_temp_name(name, temp_bases[i], pid))
            return true;
    return false;
}

static bool process_alive(long pid)
{
    return pid == (long)getpid() || kill((pid_t)pid, 0) == 0 || errno == EPERM;
}

/* Removes what an interrupted run left: only regular files (never a link) whose names kiln's
 * temporary-name pattern gives for one of its own outputs, and only when the process that made
 * them is gone (a run still writing into the folder keeps its files; they are counted). */
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

static bool is_owned(const char *name)
{
    for (size_t i = 0; i < sizeof owned_names / sizeof owned_names[0]; i++)
        if (strcmp(name, owned_names[i]) == 0)
            return true;
    return false;
}

int kiln_pipeline_prepare_outdir(const char *dir, struct kiln_debris *debris,
                                 struct kiln_err *err)
{
    memset(debris, 0, sizeof *debris);
    int rc = make_dirs(dir, err);
    if (rc)
        return rc;
    DIR *d = opendir(dir);
    if (!d)
        return kiln_err_sys(err, KILN_EWRITE, errno, "cannot open output folder %s", dir);
    bool has_manifest = false, foreign = false;
    char foreign_name[256] = "";
    struct dirent *de;
    while ((de = readdir(d)) != NULL) {
        if (de->d_name[0] == '.')
            continue; /* temporary files of this or an interrupted run */
        if (strcmp(de->d_name, KILN_FILE_MANIFEST) == 0)
            has_manifest = true;
        else if (!is_owned(de->d_name) && !foreign) {
            foreign = true;
            snprintf(foreign_name, sizeof foreign_name, "%s", de->d_name);
        }
    }
    if (foreign && !has_manifest) {
        closedir(d);
        return kiln_err_set(err, KILN_EINVAL,
                            "output folder %s holds '%s' and no kiln manifest; use an empty or "
                            "new folder",
                            dir, foreign_name);
    }
    rc = sweep_debris(d, dir, debris, err);
    closedir(d);
    if (rc)
        return rc;
    for (int k = 0; k < 2; k++) {
        char *p = kiln_pipeline_path(dir, owned_names[k]);
        if (!p)
            return kiln_err_set(err, KILN_ENOMEM, "out of memory");
        if (unlink(p) != 0 && errno != ENOENT) {
            rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot remove the old %s", p);
            free(p);
            return rc;
        }
        free(p);
    }
    return kiln_fsync_dir(dir, err);
}
