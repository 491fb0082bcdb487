/* Helpers for the harnesses (fuzz.h): acceptance flag, memory files, a temporary folder. */
#include "fuzz.h"

#include <dirent.h>
#include <errno.h>
#include <limits.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

static int accepted;

void fuzz_accept(void)
{
    accepted = 1;
}

int fuzz_accepted(void)
{
    int a = accepted;
    accepted = 0;
    return a;
}

static int write_all(int fd, const uint8_t *data, size_t size)
{
    while (size) {
        ssize_t w = write(fd, data, size);
        if (w < 0) {
            if (errno == EINTR)
                continue;
            return -1;
        }
        data += w;
        size -= (size_t)w;
    }
    return 0;
}

int fuzz_file_open(struct fuzz_file *f, const uint8_t *data, size_t size)
{
    f->fd = memfd_create("kiln-fuzz", MFD_CLOEXEC);
    if (f->fd < 0)
        return -1;
    if (write_all(f->fd, data, size) != 0) {
        close(f->fd);
        f->fd = -1;
        return -1;
    }
    snprintf(f->path, sizeof f->path, "/proc/self/fd/%d", f->fd);
    return 0;
}

void fuzz_file_close(struct fuzz_file *f)
{
    if (f->fd >= 0)
        close(f->fd);
    f->fd = -1;
}

size_t fuzz_split(const uint8_t *data, size_t size, const uint8_t **part, size_t *len, size_t max)
{
    const size_t seplen = sizeof FUZZ_SEP - 1;
    size_t n = 0;
    while (n + 1 < max) {
        const uint8_t *cut = memmem(data, size, FUZZ_SEP, seplen);
        if (!cut)
            break;
        part[n] = data;
        len[n++] = (size_t)(cut - data);
        size -= (size_t)(cut - data) + seplen;
        data = cut + seplen;
    }
    part[n] = data;
    len[n++] = size;
    return n;
}

int fuzz_write_file(const char *path, const uint8_t *data, size_t size)
{
    FILE *fp = fopen(path, "wb");
    if (!fp)
        return -1;
    int bad = size && fwrite(data, 1, size, fp) != size;
    bad |= fclose(fp) != 0;
    return bad ? -1 : 0;
}

static char tmpdir[PATH_MAX];

static void tmpdir_remove(void)
{
    DIR *d = opendir(tmpdir);
    if (d) {
        struct dirent *e;
        char p[PATH_MAX + 256];
        while ((e = readdir(d)) != NULL) {
            if (strcmp(e->d_name, ".") == 0 || strcmp(e->d_name, "..") == 0)
                continue;
            snprintf(p, sizeof p, "%s/%s", tmpdir, e->d_name);
            unlink(p);
        }
        closedir(d);
    }
    rmdir(tmpdir);
}

const char *fuzz_tmpdir(void)
{
    if (tmpdir[0])
        return tmpdir;
    const char *base = getenv("TMPDIR");
    snprintf(tmpdir, sizeof tmpdir, "%s/kiln-fuzz-XXXXXX", base && base[0] ? base : "/tmp");
    if (!mkdtemp(tmpdir)) {
        perror("kiln fuzz: cannot create a temporary folder");
        abort();
    }
    atexit(tmpdir_remove);
    return tmpdir;
}

void fuzz_tmp_file(const char *name, const uint8_t *data, size_t size, char *path)
{
    snprintf(path, PATH_MAX, "%s/%s", fuzz_tmpdir(), name);
    if (data)
        FUZZ_CHECK(fuzz_write_file(path, data, size) == 0);
    else
        unlink(path);
}
