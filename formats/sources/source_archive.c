/* Archive walker on libarchive: zip, tar (plain, gzip, bzip2, xz, zstd, ...), 7z, cpio and
 * whatever else libarchive reads, streamed member by member and never extracted to disk.
 * Member names are reported as the archive stores them and never used to open anything. */
#include <archive.h>
#include <archive_entry.h>
#include <locale.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/catalog.h"
#include "source.h"
#include "walker.h"

#define ARCHIVE_BLOCK (256u * 1024u)

bool kiln_archive_sniff(const uint8_t *h, size_t n)
{
    if (n >= 4 && h[0] == 'P' && h[1] == 'K' &&
        ((h[2] == 3 && h[3] == 4) || (h[2] == 5 && h[3] == 6) || (h[2] == 7 && h[3] == 8)))
        return true; /* zip (local header, empty archive, spanned) */
    if (n >= 2 && h[0] == 0x1f && h[1] == 0x8b)
        return true; /* gzip */
    if (n >= 3 && memcmp(h, "BZh", 3) == 0)
        return true;
    if (n >= 6 && memcmp(h, "\xfd" "7zXZ\0", 6) == 0)
        return true;
    if (n >= 4 && memcmp(h, "\x28\xb5\x2f\xfd", 4) == 0)
        return true; /* zstd */
    if (n >= 6 && memcmp(h, "7z\xbc\xaf\x27\x1c", 6) == 0)
        return true;
    if (n >= 6 && (memcmp(h, "070701", 6) == 0 || memcmp(h, "070707", 6) == 0))
        return true; /* cpio */
    if (n >= 262 && memcmp(h + 257, "ustar", 5) == 0)
        return true; /* POSIX or GNU tar */
    return false;
}

const char *kiln_archive_library_version(void)
{
    return archive_version_string();
}

/* "hidden" or "junk" if any component of a member path is (e.g. "__MACOSX/", "._x.png"). */
static const char *member_skip_kind(const char *name)
{
    char part[256];
    const char *p = name;
    while (*p) {
        while (*p == '/')
            p++;
        size_t len = strcspn(p, "/");
        if (len == 0)
            break;
        if (len < sizeof part) {
            memcpy(part, p, len);
            part[len] = '\0';
            /* ".." and "." are path steps, not hidden names: such members are recorded as
             * they are (and never used to open anything). */
            const char *k = strcmp(part, "..") && strcmp(part, ".") ? kiln_source_skip_kind(part)
                                                                     : NULL;
            if (k)
                return k;
        }
        p += len;
    }
    return NULL;
}

/* libarchive converts names the archive declares as Unicode (zip's UTF-8 flag, pax path
 * records, 7z) into the calling thread's character set, and in kiln's "C" locale every
 * non-ASCII name fails to convert and comes back NULL. Reading under a UTF-8 LC_CTYPE makes
 * that conversion the identity (plus libarchive's composition to NFC) whatever the user's
 * locale, while names stored as plain bytes (ustar and GNU tar, zip without the flag) are
 * still copied unchanged. The locale is set for this thread only and restored afterwards. */
static locale_t utf8_locale_new(void)
{
    static const char *const names[] = {"C.UTF-8", "C.utf8", "en_US.UTF-8"};
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++) {
        locale_t l = newlocale(LC_CTYPE_MASK, names[i], (locale_t)0);
        if (l != (locale_t)0)
            return l;
    }
    return (locale_t)0; /* no UTF-8 locale installed: declared-Unicode names get a status */
}

static int emit(kiln_entry_fn fn, void *ctx, const char *root, const char *path,
                const char *member, int status, const char *reason, struct kiln_err *err)
{
    struct kiln_source_entry e = {.root = root, .path = path, .member = member, .status = status};
    snprintf(e.reason, sizeof e.reason, "%s", reason);
    return fn(ctx, &e, err);
}

/* Reads the current member's data; returns KILN_OK with a buffer, or a status for the row. */
static int read_member(struct archive *a, struct archive_entry *ae, uint64_t max_bytes,
                       uint8_t **data, size_t *size, int *status, char *reason, size_t rlen)
{
    *data = NULL;
    *size = 0;
    la_int64_t declared = archive_entry_size_is_set(ae) ? archive_entry_size(ae) : -1;
    if (max_bytes && declared > 0 && (uint64_t)declared > max_bytes) {
        *status = KILN_ST_TOO_LARGE;
        snprintf(reason, rlen, "member of %lld bytes exceeds the %llu-byte limit",
                 (long long)declared, (unsigned long long)max_bytes);
        return -1;
    }
    size_t cap = declared > 0 ? (size_t)declared : 65536, n = 0;
    uint8_t *buf = malloc(cap + 1);
    if (!buf) {
        *status = KILN_ST_UNREADABLE;
        snprintf(reason, rlen, "cannot allocate %zu bytes", cap + 1);
        return -1;
    }
    for (;;) {
        if (n == cap + 1) {
            if (max_bytes && n > max_bytes) {
                free(buf);
                *status = KILN_ST_TOO_LARGE;
                snprintf(reason, rlen, "member exceeds the %llu-byte limit",
                         (unsigned long long)max_bytes);
                return -1;
            }
            size_t ncap = cap * 2;
            uint8_t *p = ncap > cap ? realloc(buf, ncap + 1) : NULL;
            if (!p) {
                free(buf);
                *status = KILN_ST_UNREADABLE;
                snprintf(reason, rlen, "cannot allocate %zu bytes", cap * 2);
                return -1;
            }
            buf = p;
            cap = ncap;
        }
        la_ssize_t r = archive_read_data(a, buf + n, cap + 1 - n);
        if (r == 0)
            break;
        if (r < 0) {
            const char *msg = archive_error_string(a);
            free(buf);
            *status = archive_entry_is_encrypted(ae) ? KILN_ST_ENCRYPTED : KILN_ST_CORRUPT;
            snprintf(reason, rlen, "%s after %zu bytes", msg ? msg : "archive member unreadable",
                     n);
            return -1;
        }
        n += (size_t)r;
    }
    if (declared >= 0 && (uint64_t)declared != n) {
        free(buf);
        *status = KILN_ST_TRUNCATED;
        snprintf(reason, rlen, "archive member holds %zu of its %lld bytes", n, (long long)declared);
        return -1;
    }
    *data = buf;
    *size = n;
    return 0;
}

static int walk_members(const char *fs_path, const char *root, const char *path,
                        const struct kiln_walk_opts *opts, kiln_want_fn want, kiln_entry_fn fn,
                        void *ctx, struct kiln_walk_counts *counts, struct kiln_err *err);

int kiln_archive_walk(const char *fs_path, const char *root, const char *path,
                      const struct kiln_walk_opts *opts, kiln_want_fn want, kiln_entry_fn fn,
                      void *ctx, struct kiln_walk_counts *counts, struct kiln_err *err)
{
    locale_t utf8 = utf8_locale_new();
    locale_t prev = utf8 != (locale_t)0 ? uselocale(utf8) : (locale_t)0;
    int rc = walk_members(fs_path, root, path, opts, want, fn, ctx, counts, err);
    if (utf8 != (locale_t)0) {
        uselocale(prev);
        freelocale(utf8);
    }
    return rc;
}

static int walk_members(const char *fs_path, const char *root, const char *path,
                        const struct kiln_walk_opts *opts, kiln_want_fn want, kiln_entry_fn fn,
                        void *ctx, struct kiln_walk_counts *counts, struct kiln_err *err)
{
    struct archive *a = archive_read_new();
    if (!a)
        return kiln_err_set(err, KILN_ENOMEM, "cannot create an archive reader");
    archive_read_support_filter_all(a);
    archive_read_support_format_all(a);
    int rc = KILN_OK;
    if (archive_read_open_filename(a, fs_path, ARCHIVE_BLOCK) != ARCHIVE_OK) {
        char reason[256];
        snprintf(reason, sizeof reason, "cannot open as an archive: %s",
                 archive_error_string(a) ? archive_error_string(a) : "unknown format");
        archive_read_free(a);
        /* A source that is not an archive is the user's mistake; an archive in a folder that
         * turns out unreadable is a row. */
        if (!path[0])
            return kiln_err_set(err, KILN_EINVAL, "source %s: %s", root, reason);
        if (want && !want(ctx, path, ""))
            return KILN_OK;
        return emit(fn, ctx, root, path, "", KILN_ST_CORRUPT, reason, err);
    }
    size_t members = 0;
    for (;;) {
        struct archive_entry *ae;
        int r = archive_read_next_header(a, &ae);
        if (r == ARCHIVE_EOF)
            break;
        if (r == ARCHIVE_FATAL) {
            char reason[256];
            snprintf(reason, sizeof reason, "archive unreadable after %zu members: %s", members,
                     archive_error_string(a) ? archive_error_string(a) : "unknown error");
            if (!want || want(ctx, path, ""))
                rc = emit(fn, ctx, root, path, "", KILN_ST_CORRUPT, reason, err);
            break;
        }
        if (r == ARCHIVE_RETRY)
            continue;
        members++;
        mode_t type = archive_entry_filetype(ae);
        if (type == AE_IFDIR)
            continue;
        const char *name = archive_entry_pathname(ae);
        /* NULL when a name declared as UTF-8 (or UTF-16) is not valid in it. The member is
         * still a row, under a placeholder that names its position, so nothing is dropped. */
        char unnamed[64];
        if (!name) {
            snprintf(unnamed, sizeof unnamed, "<member %zu: name unreadable>", members);
            name = unnamed;
        }
        const char *skip = name == unnamed ? NULL : member_skip_kind(name);
        if (skip) {
            if (counts) {
                if (skip[0] == 'h')
                    counts->hidden++;
                else
                    counts->junk++;
            }
            continue;
        }
        if (want && !want(ctx, path, name))
            continue;
        if (archive_entry_hardlink(ae) || type == AE_IFLNK) {
            rc = emit(fn, ctx, root, path, name, KILN_ST_ARCHIVE_LINK,
                      type == AE_IFLNK ? "symbolic link stored in the archive"
                                       : "hard link stored in the archive",
                      err);
        } else if (type != AE_IFREG) {
            rc = emit(fn, ctx, root, path, name, KILN_ST_SPECIAL,
                      "archive member is not a regular file", err);
        } else if (archive_entry_is_encrypted(ae)) {
            rc = emit(fn, ctx, root, path, name, KILN_ST_ENCRYPTED,
                      "archive member is encrypted", err);
        } else {
            struct kiln_source_entry e = {.root = root, .path = path, .member = name,
                                          .status = KILN_ST_OK};
            if (read_member(a, ae, opts->max_file_bytes, &e.data, &e.size, &e.status, e.reason,
                            sizeof e.reason) == 0) {
                /* The bytes stay with the entry so the row still gets a size and SHA-256. */
                if (name == unnamed) {
                    e.status = KILN_ST_CORRUPT;
                    snprintf(e.reason, sizeof e.reason,
                             "member name cannot be read: it is not valid in the character set "
                             "the archive declares for it");
                } else if (kiln_archive_sniff(e.data, e.size)) {
                    e.status = KILN_ST_NESTED_ARCHIVE;
                    snprintf(e.reason, sizeof e.reason, "archive inside an archive is not opened");
                }
            }
            rc = fn(ctx, &e, err);
        }
        if (rc)
            break;
    }
    archive_read_free(a);
    return rc;
}

/* An archive named as the source itself: its members' paths are "" (source.h). */
static int archive_source_walk(const char *root, const struct kiln_walk_opts *opts,
                               kiln_want_fn want, kiln_entry_fn fn, void *ctx,
                               struct kiln_walk_counts *counts, struct kiln_err *err)
{
    return kiln_archive_walk(root, root, "", opts, want, fn, ctx, counts, err);
}

static bool takes_file(const struct stat *st)
{
    return S_ISREG(st->st_mode);
}

const struct kiln_walker kiln_walker_archive = {
    .name = "archive",
    .takes = takes_file,
    .walk = archive_source_walk,
};
