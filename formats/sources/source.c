/* What every walker shares: the skip list and whole file reading (the walkers themselves are
 * in source_folder.c and source_archive.c, chosen by registry.c). */
#include "source.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* Skipped without a row. Hidden names cover macOS ".DS_Store", "._*" resource forks,
 * ".Spotlight-V100", ".Trashes" and version-control folders; the rest are folder-metadata
 * files and folders other systems write into shared folders and archives. */
static const char *const junk_names[] = {
    "Thumbs.db", "ehthumbs.db", "desktop.ini", "Desktop.ini", "__MACOSX",
    "$RECYCLE.BIN", "System Volume Information", "Icon\r",
};

const char *kiln_source_skip_kind(const char *name)
{
    if (name[0] == '.')
        return "hidden";
    for (size_t i = 0; i < sizeof junk_names / sizeof junk_names[0]; i++)
        if (strcmp(name, junk_names[i]) == 0)
            return "junk";
    return NULL;
}

int kiln_source_read_file(const char *fs_path, uint64_t max_bytes, uint8_t **data, size_t *size,
                          struct kiln_err *err)
{
    *data = NULL;
    *size = 0;
    int fd = open(fs_path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open");
    struct stat st;
    if (fstat(fd, &st) != 0) {
        int e = errno;
        close(fd);
        return kiln_err_sys(err, KILN_EIO, e, "cannot stat");
    }
    if (max_bytes && (uint64_t)st.st_size > max_bytes) {
        close(fd);
        return kiln_err_set(err, KILN_ETOOLARGE, "file of %lld bytes exceeds the %llu-byte limit",
                            (long long)st.st_size, (unsigned long long)max_bytes);
    }
    size_t cap = st.st_size > 0 ? (size_t)st.st_size : 0, n = 0;
    uint8_t *buf = malloc(cap + 1); /* +1 so a file that grew while reading is noticed */
    if (!buf) {
        close(fd);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu bytes", cap + 1);
    }
    for (;;) {
        ssize_t r = read(fd, buf + n, cap + 1 - n);
        if (r < 0) {
            if (errno == EINTR)
                continue;
            int e = errno;
            free(buf);
            close(fd);
            return kiln_err_sys(err, KILN_EIO, e, "cannot read");
        }
        if (r == 0)
            break;
        n += (size_t)r;
        if (n == cap + 1) {
            /* The file grew since fstat; keep reading in bigger steps up to the limit. */
            if (max_bytes && n > max_bytes) {
                free(buf);
                close(fd);
                return kiln_err_set(err, KILN_ETOOLARGE, "file grew past the %llu-byte limit",
                                    (unsigned long long)max_bytes);
            }
            size_t ncap = cap ? cap * 2 : 65536;
            uint8_t *p = realloc(buf, ncap + 1);
            if (!p) {
                free(buf);
                close(fd);
                return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu bytes", ncap + 1);
            }
            buf = p;
            cap = ncap;
        }
    }
    close(fd);
    *data = buf;
    *size = n;
    return KILN_OK;
}
