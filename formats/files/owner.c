/* Telling kiln's output folders from anyone else's by content: the first member of
 * manifest.json, and the list of files in SHA256SUMS. */
#include "owner.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "manifest.h"

#define PREFIX_BYTES 4096
#define SUMS_MAX (64u << 10)

const char *const kiln_owner_names[KILN_OWNER_NNAMES] = {
    KILN_FILE_TRAIN, KILN_FILE_VAL,      KILN_FILE_TEST, KILN_FILE_ITEMS,
    KILN_FILE_CATALOG, KILN_FILE_MANIFEST, KILN_FILE_SUMS};

int kiln_owner_name_index(const char *name)
{
    for (int i = 0; i < KILN_OWNER_NNAMES; i++)
        if (strcmp(name, kiln_owner_names[i]) == 0)
            return i;
    return -1;
}

bool kiln_owner_is_output_name(const char *name)
{
    return kiln_owner_name_index(name) >= 0;
}

/* A cursor over the first bytes of a JSON text, enough to read the first members of an object
 * whose keys and string values hold no escapes (as kiln writes them). */
struct cursor {
    const char *p, *end;
};

static void skip_ws(struct cursor *c)
{
    while (c->p < c->end && (*c->p == ' ' || *c->p == '\t' || *c->p == '\n' || *c->p == '\r'))
        c->p++;
}

static bool take(struct cursor *c, char ch)
{
    skip_ws(c);
    if (c->p < c->end && *c->p == ch) {
        c->p++;
        return true;
    }
    return false;
}

/* A string without escapes into buf; false otherwise. */
static bool take_string(struct cursor *c, char *buf, size_t len)
{
    if (!take(c, '"'))
        return false;
    size_t n = 0;
    while (c->p < c->end && *c->p != '"') {
        if (*c->p == '\\' || (unsigned char)*c->p < 0x20 || n + 1 >= len)
            return false;
        buf[n++] = *c->p++;
    }
    buf[n] = '\0';
    return c->p < c->end && *c->p++ == '"';
}

/* The text of the value that starts here, for a message (up to 40 bytes, printable ASCII). */
static void show_value(struct cursor *c, char *buf, size_t len)
{
    skip_ws(c);
    size_t n = 0;
    for (const char *p = c->p; p < c->end && n + 1 < len && n < 40; p++) {
        if (*p == ',' || *p == '\n' || *p == '}')
            break;
        buf[n++] = *p >= 0x20 && *p < 0x7f ? *p : '?';
    }
    buf[n] = '\0';
}

bool kiln_owner_manifest_prefix(const char *text, size_t len, char *found, size_t found_len)
{
    struct cursor c = {text, text + len};
    char key[64], value[64], shown[48];
    char scratch[2];
    if (!found) {
        found = scratch;
        found_len = sizeof scratch;
    }
    if (!take(&c, '{')) {
        struct cursor v = {text, text + len};
        show_value(&v, shown, sizeof shown);
        snprintf(found, found_len, "it is not a JSON object (it begins '%s')", shown);
        return false;
    }
    if (!take_string(&c, key, sizeof key) || !take(&c, ':')) {
        snprintf(found, found_len, "its first member is not a plain key");
        return false;
    }
    struct cursor v = c;
    show_value(&v, shown, sizeof shown);
    if (strcmp(key, KILN_MANIFEST_FORMAT_KEY) == 0) {
        if (take_string(&c, value, sizeof value) && strcmp(value, KILN_MANIFEST_FORMAT) == 0)
            return true;
        snprintf(found, found_len, "its \"%s\" is %s, not \"%s\"", KILN_MANIFEST_FORMAT_KEY,
                 shown, KILN_MANIFEST_FORMAT);
        return false;
    }
    /* kiln 0.1.0 wrote no identifier; its manifests begin "manifest_version": 1,
     * "kiln_version": "...". */
    if (strcmp(key, "manifest_version") == 0) {
        skip_ws(&c);
        if (c.p < c.end && *c.p == '1') {
            c.p++;
            if (take(&c, ',') && take_string(&c, key, sizeof key) &&
                strcmp(key, "kiln_version") == 0 && take(&c, ':') &&
                take_string(&c, value, sizeof value))
                return true;
        }
    }
    snprintf(found, found_len, "its first member is \"%s\": %s, not \"%s\": \"%s\"", key, shown,
             KILN_MANIFEST_FORMAT_KEY, KILN_MANIFEST_FORMAT);
    return false;
}

/* Reads up to len bytes of dir/name (a regular file, not followed if a link): the count, -1
 * with errno when it cannot be read, -2 when it is there but not a regular file. */
static ssize_t read_head(const char *dir, const char *name, char *buf, size_t len)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, name);
    int fd = open(path, O_RDONLY | O_CLOEXEC | O_NOFOLLOW | O_NONBLOCK);
    if (fd < 0)
        return errno == ELOOP ? -2 : -1;
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        close(fd);
        return -2;
    }
    size_t n = 0;
    while (n < len) {
        ssize_t r = read(fd, buf + n, len - n);
        if (r < 0 && errno == EINTR)
            continue;
        if (r <= 0)
            break;
        n += (size_t)r;
    }
    close(fd);
    return (ssize_t)n;
}

/* The kiln files SHA256SUMS lists ("<64 hex digits>  <name>" lines). */
static unsigned listed_files(const char *dir)
{
    char buf[SUMS_MAX + 1];
    ssize_t n = read_head(dir, KILN_FILE_SUMS, buf, SUMS_MAX);
    if (n < 0)
        return 0;
    buf[n] = '\0';
    unsigned files = 0;
    for (char *line = buf; *line;) {
        char *nl = strchr(line, '\n');
        if (nl)
            *nl = '\0';
        if (strlen(line) > 66 && line[64] == ' ' && line[65] == ' ') {
            int i = kiln_owner_name_index(line + 66);
            if (i >= 0)
                files |= 1u << i;
        }
        if (!nl)
            break;
        line = nl + 1;
    }
    return files;
}

int kiln_owner_of(const char *dir, struct kiln_owner *o, struct kiln_err *err)
{
    memset(o, 0, sizeof *o);
    char head[PREFIX_BYTES];
    ssize_t n = read_head(dir, KILN_FILE_MANIFEST, head, sizeof head);
    if (n == -1 && errno == ENOENT)
        return KILN_OK;
    if (n == -1)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot read %s/%s", dir, KILN_FILE_MANIFEST);
    if (n == -2) {
        o->kind = KILN_OWNER_OTHER;
        snprintf(o->found, sizeof o->found, "it is not a regular file");
        return KILN_OK;
    }
    if (!kiln_owner_manifest_prefix(head, (size_t)n, o->found, sizeof o->found)) {
        o->kind = KILN_OWNER_OTHER;
        return KILN_OK;
    }
    o->kind = KILN_OWNER_KILN;
    o->files = listed_files(dir) | 1u << kiln_owner_name_index(KILN_FILE_MANIFEST);
    struct stat st;
    char path[4096];
    snprintf(path, sizeof path, "%s/%s", dir, KILN_FILE_SUMS);
    if (lstat(path, &st) == 0 && S_ISREG(st.st_mode))
        o->files |= 1u << kiln_owner_name_index(KILN_FILE_SUMS);
    return KILN_OK;
}
