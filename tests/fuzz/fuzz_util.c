/* Helpers for the harnesses (fuzz.h): acceptance flag, memory files, a temporary folder. */
#include "fuzz.h"

#include <dirent.h>
#include <errno.h>
#include <limits.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

static int accepted;

/* libFuzzer reads this section as extra coverage counters (Linux; compiler-rt's
 * FuzzerExtraCounters.cpp). */
#define OUTCOMES 8192
static uint8_t outcomes[OUTCOMES] __attribute__((section("__libfuzzer_extra_counters"), used));

static uint64_t fnv1a(uint64_t h, const void *data, size_t len)
{
    const uint8_t *p = data;
    for (size_t i = 0; i < len; i++)
        h = (h ^ p[i]) * 0x100000001b3ull;
    return h;
}

static void count(uint64_t h)
{
    uint8_t *c = &outcomes[h % OUTCOMES];
    if (*c < 255)
        (*c)++;
}

void fuzz_outcome(int code, const char *what)
{
    uint64_t h = fnv1a(0xcbf29ce484222325ull, &code, sizeof code);
    /* Numbers, digests and quoted names vary with every input; they would make every input
     * look new. What is left is the kind of outcome. */
    for (const char *p = what ? what : ""; *p && *p != '\'' && *p != '"'; p++) {
        size_t hex = strspn(p, "0123456789abcdefABCDEF");
        if (hex >= 6)
            p += hex - 1;
        else if (*p < '0' || *p > '9')
            h = fnv1a(h, p, 1);
    }
    count(h);
}

void fuzz_outcome_bytes(const void *data, size_t len)
{
    count(fnv1a(0x84222325cbf29ce4ull, data, len));
}

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
