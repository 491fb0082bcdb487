/* Record digests of an output folder: items.csv gives each packed row's split and index, the
 * .kten file's "images" array the record, read with pread and hashed. */
#include "stage_outrecords.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/csv.h"
#include "../../formats/files/kten.h"
#include "../../formats/files/manifest.h"
#include "../checked.h"
#include "../sha256.h"
#include "../textesc.h"
#include "pipeline.h"

static int cmp_location(const void *x, const void *y, void *ctx)
{
    const struct kiln_catalog *cat = ctx;
    return kiln_item_location_cmp(&cat->items[*(const uint32_t *)x],
                                  &cat->items[*(const uint32_t *)y]);
}

/* The catalogue row at a location, or -1; by is the rows sorted by location (the rows of an
 * output's catalogue are in the order of the names before --hash-paths hashed them). */
static long find_row(const struct kiln_catalog *cat, const uint32_t *by, const struct kiln_item *key)
{
    size_t lo = 0, hi = cat->n;
    while (lo < hi) {
        size_t mid = lo + (hi - lo) / 2;
        int c = kiln_item_location_cmp(&cat->items[by[mid]], key);
        if (c == 0)
            return (long)by[mid];
        if (c < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return -1;
}

/* The split and record index of every packed row, from items.csv. */
static int read_items(const char *outdir, const struct kiln_catalog *cat, int8_t *split,
                      uint64_t *index, struct kiln_err *err)
{
    char *path = kiln_pipeline_path(outdir, KILN_FILE_ITEMS);
    uint32_t *by = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *by);
    if (!path || !by) {
        free(path);
        free(by);
        return kiln_err_set(err, KILN_ENOMEM, "out of memory");
    }
    for (size_t i = 0; i < cat->n; i++)
        by[i] = (uint32_t)i;
    if (cat->n > 1)
        qsort_r(by, cat->n, sizeof *by, cmp_location, (void *)cat);
    struct kiln_csv_reader r;
    int rc = kiln_csv_open(&r, path, err);
    if (rc) {
        free(path);
        free(by);
        return rc;
    }
    enum { SOURCE, PATH, MEMBER, SPLIT, INDEX, NCOL };
    static const char *const names[NCOL] = {"source", "path", "member", "split", "index"};
    int col[NCOL] = {-1, -1, -1, -1, -1}, got = kiln_csv_next(&r, err);
    for (size_t i = 0; got == 1 && i < r.nfields; i++)
        for (int c = 0; c < NCOL; c++)
            if (strcmp(r.fields[i], names[c]) == 0)
                col[c] = (int)i;
    for (int c = 0; got == 1 && c < NCOL; c++)
        if (col[c] < 0)
            got = -kiln_err_set(err, KILN_ECORRUPT, "%s has no '%s' column", path, names[c]);
    while (got == 1 && (got = kiln_csv_next(&r, err)) == 1) {
        const char *v[NCOL];
        for (int c = 0; c < NCOL; c++)
            v[c] = (size_t)col[c] < r.nfields ? r.fields[col[c]] : "";
        int s = kiln_split_parse(v[SPLIT]);
        if (s < 0)
            continue; /* a row that was not packed */
        char *raw[3] = {NULL, NULL, NULL};
        int bad = 0;
        for (int c = 0; c < 3; c++)
            bad |= kiln_text_unescape(v[c], &raw[c], NULL) != 0;
        struct kiln_item key = {.source = raw[0], .path = raw[1], .member = raw[2]};
        long row = bad ? -1 : find_row(cat, by, &key);
        char *end;
        errno = 0;
        unsigned long long k = strtoull(v[INDEX], &end, 10);
        if (row < 0 || !*v[INDEX] || *end || errno || cat->items[row].split != s)
            got = -kiln_err_set(err, KILN_ECORRUPT, "%s:%zu: the row does not match the "
                                "catalogue beside it", path, r.line);
        else {
            split[row] = (int8_t)s;
            index[row] = k;
        }
        for (int c = 0; c < 3; c++)
            free(raw[c]);
    }
    kiln_csv_close(&r);
    free(path);
    free(by);
    return got < 0 ? -got : KILN_OK;
}

int kiln_output_record_digests(const char *outdir, const struct kiln_catalog *cat,
                               uint8_t (*digest)[KILN_RECORD_DIGEST_LEN], struct kiln_err *err)
{
    int8_t *split = kiln_alloc_array(cat->n ? cat->n : 1, 1);
    uint64_t *index = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *index);
    int rc = split && index ? KILN_OK : kiln_err_set(err, KILN_ENOMEM, "out of memory");
    for (size_t i = 0; !rc && i < cat->n; i++) {
        split[i] = KILN_SPLIT_NONE;
        memset(digest[i], 0, KILN_RECORD_DIGEST_LEN);
    }
    if (!rc)
        rc = read_items(outdir, cat, split, index, err);
    for (size_t i = 0; !rc && i < cat->n; i++)
        if (cat->items[i].split != KILN_SPLIT_NONE && split[i] == KILN_SPLIT_NONE)
            rc = kiln_err_set(err, KILN_ECORRUPT, "%s/items.csv does not list %s%s%s, which the "
                              "catalogue puts in %s", outdir, cat->items[i].path,
                              cat->items[i].member[0] ? "/" : "", cat->items[i].member,
                              kiln_split_name(cat->items[i].split));
    for (int s = 0; !rc && s < KILN_NSPLITS; s++) {
        size_t have = 0;
        for (size_t i = 0; i < cat->n; i++)
            have += split[i] == s;
        if (!have)
            continue;
        char *path = kiln_pipeline_path(outdir, kiln_manifest_split_files[s]);
        struct kiln_kten_info info;
        memset(&info, 0, sizeof info);
        rc = path ? kiln_kten_open(path, &info, err) : kiln_err_set(err, KILN_ENOMEM, "oom");
        int a = rc ? -1 : kiln_kten_find(&info, "images");
        const struct kiln_kten_array *arr = a >= 0 ? &info.arrays[a] : NULL;
        if (!rc && (!arr || arr->rank < 1 || arr->dims[0] == 0))
            rc = kiln_err_set(err, KILN_ECORRUPT, "%s has no images array", path);
        const uint64_t nrec = rc ? 0 : arr->dims[0], size = rc ? 0 : arr->length / nrec;
        uint8_t *buf = rc ? NULL : malloc(size ? size : 1);
        int fd = rc ? -1 : open(path, O_RDONLY | O_CLOEXEC);
        if (!rc && (!buf || fd < 0))
            rc = buf ? kiln_err_sys(err, KILN_EIO, errno, "cannot open %s", path)
                     : kiln_err_set(err, KILN_ENOMEM, "cannot allocate a record");
        for (size_t i = 0; !rc && i < cat->n; i++) {
            if (split[i] != s)
                continue;
            if (index[i] >= nrec) {
                rc = kiln_err_set(err, KILN_ECORRUPT, "%s has no record %llu", path,
                                  (unsigned long long)index[i]);
                break;
            }
            uint64_t off = arr->offset + index[i] * size, left = size;
            uint8_t *d = buf;
            while (!rc && left) {
                ssize_t got = pread(fd, d, left, (off_t)off);
                if (got < 0 && errno == EINTR)
                    continue;
                if (got <= 0)
                    rc = kiln_err_sys(err, KILN_EIO, got < 0 ? errno : EIO, "cannot read %s",
                                      path);
                else {
                    d += got;
                    left -= (uint64_t)got;
                    off += (uint64_t)got;
                }
            }
            uint8_t sha[KILN_SHA256_LEN];
            if (!rc)
                rc = kiln_sha256_buf(buf, size, sha, err);
            if (!rc)
                memcpy(digest[i], sha, KILN_RECORD_DIGEST_LEN);
        }
        if (fd >= 0)
            close(fd);
        free(buf);
        kiln_kten_info_free(&info);
        free(path);
    }
    free(split);
    free(index);
    return rc;
}
