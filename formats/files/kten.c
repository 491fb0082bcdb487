/* .kten writer and reader. All integers are little-endian regardless of the host. */
#include "kten.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../../core/checked.h"

static const char *const dtype_names[] = {NULL, "u8", "u16", "i32", "u32", "f32"};
static const size_t dtype_sizes[] = {0, 1, 2, 4, 4, 4};

const char *kiln_dtype_name(int dtype)
{
    return dtype >= KILN_DT_U8 && dtype <= KILN_DT_F32 ? dtype_names[dtype] : "unknown";
}

int kiln_dtype_parse(const char *name)
{
    for (int i = KILN_DT_U8; i <= KILN_DT_F32; i++)
        if (strcmp(name, dtype_names[i]) == 0)
            return i;
    return -1;
}

size_t kiln_dtype_size(int dtype)
{
    return dtype >= KILN_DT_U8 && dtype <= KILN_DT_F32 ? dtype_sizes[dtype] : 0;
}

static void put32(uint8_t *p, uint32_t v)
{
    for (int i = 0; i < 4; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

static void put64(uint8_t *p, uint64_t v)
{
    for (int i = 0; i < 8; i++)
        p[i] = (uint8_t)(v >> (8 * i));
}

static uint32_t get32(const uint8_t *p)
{
    return (uint32_t)p[0] | (uint32_t)p[1] << 8 | (uint32_t)p[2] << 16 | (uint32_t)p[3] << 24;
}

static uint64_t get64(const uint8_t *p)
{
    return (uint64_t)get32(p) | (uint64_t)get32(p + 4) << 32;
}

static int align_up(uint64_t v, uint64_t *out)
{
    if (v > UINT64_MAX - (KILN_KTEN_ALIGN - 1))
        return -1;
    *out = (v + KILN_KTEN_ALIGN - 1) / KILN_KTEN_ALIGN * KILN_KTEN_ALIGN;
    return 0;
}

static int array_length(const struct kiln_kten_array *a, uint64_t *len)
{
    uint64_t n = kiln_dtype_size(a->dtype);
    if (!n || a->rank < 1 || a->rank > KILN_KTEN_MAX_RANK)
        return -1;
    for (unsigned d = 0; d < a->rank; d++)
        if (!kiln_mul_u64(n, a->dims[d], &n))
            return -1;
    *len = n;
    return 0;
}

/* Lays the arrays out (lengths and offsets into out, which may be NULL) and gives the end of
 * the data, where the metadata block starts. */
static int plan_layout(const struct kiln_kten_array *arrays, size_t narrays,
                       struct kiln_kten_array *out, uint64_t *data_end, struct kiln_err *err)
{
    if (narrays > KILN_KTEN_MAX_ARRAYS)
        return kiln_err_set(err, KILN_EINVAL, "too many arrays (%zu) for a .kten file", narrays);
    uint64_t off = KILN_KTEN_HEADER;
    for (size_t i = 0; i < narrays; i++) {
        struct kiln_kten_array a = arrays[i];
        if (strlen(a.name) > KILN_KTEN_NAME || array_length(&a, &a.length) != 0)
            return kiln_err_set(err, KILN_ENOMEM, "array '%s' is too large or malformed",
                                a.name);
        a.offset = off;
        if (off > UINT64_MAX - a.length || align_up(off + a.length, &off) != 0)
            return kiln_err_set(err, KILN_ENOMEM, "tensor file would exceed 2^64 bytes");
        if (out)
            out[i] = a;
    }
    if (off > (uint64_t)INT64_MAX)
        return kiln_err_set(err, KILN_ENOMEM, "tensor file would exceed the file size limit");
    *data_end = off;
    return KILN_OK;
}

int kiln_kten_plan_bytes(const struct kiln_kten_array *arrays, size_t narrays, uint64_t *bytes,
                         struct kiln_err *err)
{
    return plan_layout(arrays, narrays, NULL, bytes, err);
}

int kiln_kten_create(struct kiln_kten_writer *w, const char *path,
                     const struct kiln_kten_array *arrays, size_t narrays, struct kiln_err *err)
{
    memset(w, 0, sizeof *w);
    w->out.fd = -1;
    uint64_t off;
    int rc = plan_layout(arrays, narrays, w->arrays, &off, err);
    if (rc)
        return rc;
    w->narrays = narrays;
    w->data_end = off;
    rc = kiln_outfile_open(&w->out, path, err);
    if (rc)
        return rc;
    /* Reserve the whole data area now: a full disk fails here, not after hours of work. */
    int e = posix_fallocate(w->out.fd, 0, (off_t)off);
    if (e != 0 && e != EOPNOTSUPP && e != EINVAL) {
        kiln_err_sys(err, KILN_EWRITE, e, "cannot reserve %llu bytes for %s",
                     (unsigned long long)off, path);
        kiln_outfile_abort(&w->out);
        return KILN_EWRITE;
    }
    return KILN_OK;
}

int kiln_kten_write(struct kiln_kten_writer *w, size_t a, uint64_t off, const void *data,
                    size_t len, struct kiln_err *err)
{
    const struct kiln_kten_array *ar = &w->arrays[a];
    if (a >= w->narrays || off > ar->length || len > ar->length - off)
        return kiln_err_set(err, KILN_EINTERNAL, "write outside array %zu", a);
    return kiln_outfile_write_at(&w->out, data, len, ar->offset + off, err);
}

int kiln_kten_write_le32(struct kiln_kten_writer *w, size_t a, const uint32_t *values, size_t n,
                         struct kiln_err *err)
{
    uint8_t *bytes = kiln_alloc_array(n ? n : 1, 4);
    if (!bytes)
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate %zu values", n);
    for (size_t i = 0; i < n; i++)
        for (int b = 0; b < 4; b++) /* little-endian on every host (docs/format.md) */
            bytes[4 * i + (size_t)b] = (uint8_t)(values[i] >> (8 * b));
    int rc = n ? kiln_kten_write(w, a, 0, bytes, n * 4, err) : KILN_OK;
    free(bytes);
    return rc;
}

static int pread_all(int fd, void *buf, size_t len, uint64_t off, struct kiln_err *err)
{
    char *p = buf;
    while (len) {
        ssize_t r = pread(fd, p, len, (off_t)off);
        if (r < 0 && errno == EINTR)
            continue;
        if (r < 0)
            return kiln_err_sys(err, KILN_EIO, errno, "cannot read at offset %llu",
                                (unsigned long long)off);
        if (r == 0)
            return kiln_err_set(err, KILN_ETRUNCATED, "file ends at offset %llu",
                                (unsigned long long)off);
        p += r;
        len -= (size_t)r;
        off += (uint64_t)r;
    }
    return KILN_OK;
}

int kiln_kten_read(struct kiln_kten_writer *w, size_t a, uint64_t off, void *data, size_t len,
                   struct kiln_err *err)
{
    const struct kiln_kten_array *ar = &w->arrays[a];
    if (a >= w->narrays || off > ar->length || len > ar->length - off)
        return kiln_err_set(err, KILN_EINTERNAL, "read outside array %zu", a);
    return pread_all(w->out.fd, data, len, ar->offset + off, err);
}

#define HASH_CHUNK (1u << 20)

static int hash_range(int fd, uint64_t off, uint64_t len, uint8_t *buf,
                      uint8_t out[KILN_SHA256_LEN], struct kiln_err *err)
{
    struct kiln_sha256 ctx;
    int rc = kiln_sha256_init(&ctx, err);
    if (rc)
        return rc;
    while (len) {
        size_t n = len < HASH_CHUNK ? (size_t)len : HASH_CHUNK;
        rc = pread_all(fd, buf, n, off, err);
        if (rc) {
            kiln_sha256_free(&ctx);
            return rc;
        }
        kiln_sha256_update(&ctx, buf, n);
        off += n;
        len -= n;
    }
    rc = kiln_sha256_final(&ctx, out, err);
    kiln_sha256_free(&ctx);
    return rc;
}

static void encode_header(uint8_t *h, const struct kiln_kten_array *arrays, size_t narrays,
                          uint64_t meta_off, uint64_t meta_len,
                          const uint8_t meta_sha[KILN_SHA256_LEN])
{
    memset(h, 0, KILN_KTEN_HEADER);
    memcpy(h, KILN_KTEN_MAGIC, 8);
    put32(h + 8, KILN_KTEN_VERSION);
    put32(h + 12, KILN_KTEN_HEADER);
    put32(h + 16, (uint32_t)narrays);
    put32(h + 20, KILN_KTEN_ENTRY);
    put64(h + 24, meta_off);
    put64(h + 32, meta_len);
    memcpy(h + 40, meta_sha, KILN_SHA256_LEN);
    put64(h + 72, meta_off + meta_len);
    put32(h + 80, KILN_KTEN_ALIGN);
    for (size_t i = 0; i < narrays; i++) {
        uint8_t *e = h + KILN_KTEN_TABLE_OFFSET + i * KILN_KTEN_ENTRY;
        const struct kiln_kten_array *a = &arrays[i];
        memcpy(e, a->name, strlen(a->name));
        e[16] = (uint8_t)a->dtype;
        e[17] = (uint8_t)a->rank;
        for (unsigned d = 0; d < KILN_KTEN_MAX_RANK; d++)
            put64(e + 24 + 8 * d, d < a->rank ? a->dims[d] : 0);
        put64(e + 56, a->offset);
        put64(e + 64, a->length);
        memcpy(e + 72, a->sha256, KILN_SHA256_LEN);
    }
}

int kiln_kten_finish(struct kiln_kten_writer *w, const char *metadata, size_t metalen,
                     struct kiln_err *err)
{
    uint8_t *buf = malloc(HASH_CHUNK > KILN_KTEN_HEADER ? HASH_CHUNK : KILN_KTEN_HEADER);
    if (!buf) {
        kiln_kten_abort(w);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a hashing buffer");
    }
    int rc = KILN_OK;
    for (size_t i = 0; i < w->narrays && !rc; i++)
        rc = hash_range(w->out.fd, w->arrays[i].offset, w->arrays[i].length, buf,
                        w->arrays[i].sha256, err);
    uint8_t msha[KILN_SHA256_LEN];
    if (!rc)
        rc = kiln_sha256_buf(metadata, metalen, msha, err);
    if (!rc)
        rc = kiln_outfile_write_at(&w->out, metadata, metalen, w->data_end, err);
    if (!rc) {
        encode_header(buf, w->arrays, w->narrays, w->data_end, metalen, msha);
        rc = kiln_outfile_write_at(&w->out, buf, KILN_KTEN_HEADER, 0, err);
    }
    free(buf);
    /* fallocate may have reserved past the metadata's end when it is shorter than the padding;
     * the file must end exactly where the header says. */
    if (!rc && ftruncate(w->out.fd, (off_t)(w->data_end + metalen)) != 0)
        rc = kiln_err_sys(err, KILN_EWRITE, errno, "cannot set the size of %s",
                          w->out.final_path);
    if (rc) {
        kiln_outfile_abort(&w->out);
        return rc;
    }
    return kiln_outfile_commit(&w->out, err);
}

void kiln_kten_abort(struct kiln_kten_writer *w)
{
    kiln_outfile_abort(&w->out);
}

void kiln_kten_info_free(struct kiln_kten_info *info)
{
    free(info->metadata);
    info->metadata = NULL;
}

int kiln_kten_find(const struct kiln_kten_info *info, const char *name)
{
    for (size_t i = 0; i < info->narrays; i++)
        if (strcmp(info->arrays[i].name, name) == 0)
            return (int)i;
    return -1;
}

#define MAX_METADATA (64u << 20)

int kiln_kten_open(const char *path, struct kiln_kten_info *info, struct kiln_err *err)
{
    memset(info, 0, sizeof *info);
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path);
    struct stat st;
    uint8_t *h = malloc(KILN_KTEN_HEADER);
    int rc = KILN_OK;
    if (!h) {
        close(fd);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a header buffer");
    }
    if (fstat(fd, &st) != 0) {
        rc = kiln_err_sys(err, KILN_EIO, errno, "cannot stat %s", path);
        goto done;
    }
    if (!S_ISREG(st.st_mode)) {
        rc = kiln_err_set(err, KILN_EINVAL, "%s is %s, not a .kten file", path,
                          S_ISDIR(st.st_mode) ? "a folder" : "not a regular file");
        goto done;
    }
    if ((uint64_t)st.st_size < KILN_KTEN_HEADER) {
        rc = kiln_err_set(err, KILN_ECORRUPT, "%s: %lld bytes is shorter than a .kten header",
                          path, (long long)st.st_size);
        goto done;
    }
    rc = pread_all(fd, h, KILN_KTEN_HEADER, 0, err);
    if (rc) {
        kiln_err_prefix(err, "%s", path);
        goto done;
    }
    if (memcmp(h, KILN_KTEN_MAGIC, 8) != 0) {
        rc = kiln_err_set(err, KILN_ECORRUPT, "%s is not a .kten file (bad magic)", path);
        goto done;
    }
    info->version = get32(h + 8);
    if (info->version != KILN_KTEN_VERSION) {
        rc = kiln_err_set(err, KILN_EUNSUPPORTED, "%s: .kten version %u is not supported", path,
                          info->version);
        goto done;
    }
    uint32_t hsize = get32(h + 12), n = get32(h + 16), esize = get32(h + 20);
    info->meta_offset = get64(h + 24);
    info->meta_length = get64(h + 32);
    memcpy(info->meta_sha256, h + 40, KILN_SHA256_LEN);
    info->file_size = get64(h + 72);
    if (hsize != KILN_KTEN_HEADER || esize != KILN_KTEN_ENTRY || n > KILN_KTEN_MAX_ARRAYS ||
        get32(h + 80) != KILN_KTEN_ALIGN) {
        rc = kiln_err_set(err, KILN_ECORRUPT, "%s: malformed .kten header", path);
        goto done;
    }
    if (info->file_size != (uint64_t)st.st_size) {
        rc = kiln_err_set(err, KILN_ECORRUPT, "%s: header says %llu bytes, file has %lld", path,
                          (unsigned long long)info->file_size, (long long)st.st_size);
        goto done;
    }
    if (info->meta_offset < KILN_KTEN_HEADER || info->meta_offset > info->file_size ||
        info->meta_length != info->file_size - info->meta_offset ||
        info->meta_length > MAX_METADATA) {
        rc = kiln_err_set(err, KILN_ECORRUPT, "%s: metadata block out of bounds", path);
        goto done;
    }
    info->narrays = n;
    for (uint32_t i = 0; i < n; i++) {
        const uint8_t *e = h + KILN_KTEN_TABLE_OFFSET + (size_t)i * KILN_KTEN_ENTRY;
        struct kiln_kten_array *a = &info->arrays[i];
        memcpy(a->name, e, KILN_KTEN_NAME);
        a->name[KILN_KTEN_NAME] = '\0';
        a->dtype = e[16];
        a->rank = e[17];
        for (unsigned d = 0; d < KILN_KTEN_MAX_RANK; d++)
            a->dims[d] = get64(e + 24 + 8 * d);
        a->offset = get64(e + 56);
        a->length = get64(e + 64);
        memcpy(a->sha256, e + 72, KILN_SHA256_LEN);
        uint64_t want;
        if (array_length(a, &want) != 0 || want != a->length) {
            rc = kiln_err_set(err, KILN_ECORRUPT,
                              "%s: array '%s' length does not match its shape", path, a->name);
            goto done;
        }
        if (a->offset % KILN_KTEN_ALIGN || a->offset < KILN_KTEN_HEADER ||
            a->offset > info->meta_offset || a->length > info->meta_offset - a->offset) {
            rc = kiln_err_set(err, KILN_ECORRUPT, "%s: array '%s' lies outside the data area",
                              path, a->name);
            goto done;
        }
    }
    info->metadata = malloc((size_t)info->meta_length + 1);
    if (!info->metadata) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate the metadata block");
        goto done;
    }
    rc = pread_all(fd, info->metadata, (size_t)info->meta_length, info->meta_offset, err);
    if (!rc)
        info->metadata[info->meta_length] = '\0';
done:
    free(h);
    close(fd);
    if (rc)
        kiln_kten_info_free(info);
    return rc;
}

int kiln_kten_check(const char *path, const struct kiln_kten_info *info, uint32_t *bad_mask,
                    struct kiln_err *err)
{
    *bad_mask = 0;
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    if (fd < 0)
        return kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path);
    uint8_t *buf = malloc(HASH_CHUNK);
    if (!buf) {
        close(fd);
        return kiln_err_set(err, KILN_ENOMEM, "cannot allocate a hashing buffer");
    }
    int rc = KILN_OK;
    const char *first_bad = NULL;
    uint8_t d[KILN_SHA256_LEN];
    for (size_t i = 0; i < info->narrays && !rc; i++) {
        rc = hash_range(fd, info->arrays[i].offset, info->arrays[i].length, buf, d, err);
        if (!rc && memcmp(d, info->arrays[i].sha256, KILN_SHA256_LEN) != 0) {
            *bad_mask |= 1u << i;
            if (!first_bad)
                first_bad = info->arrays[i].name;
        }
    }
    if (!rc) {
        rc = hash_range(fd, info->meta_offset, info->meta_length, buf, d, err);
        if (!rc && memcmp(d, info->meta_sha256, KILN_SHA256_LEN) != 0) {
            *bad_mask |= 1u << 31;
            if (!first_bad)
                first_bad = "metadata";
        }
    }
    free(buf);
    close(fd);
    if (!rc && first_bad)
        return kiln_err_set(err, KILN_EMISMATCH, "%s: SHA-256 of %s '%s' does not match its header",
                            path, strcmp(first_bad, "metadata") ? "array" : "block", first_bad);
    return rc;
}
