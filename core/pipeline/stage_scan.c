/* Scan stage. The reader thread walks every source and pushes file bytes into a bounded queue;
 * workers hash, probe, decode, and add rows under one mutex. Row order is fixed afterwards by
 * sorting, so thread scheduling never shows in the output. */
#include "stage_scan.h"

#include <pthread.h>
#include <regex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../formats/files/csv.h"
#include "../../formats/files/fpstore.h"
#include "../checked.h"
#include "../prepare.h"
#include "record_pool.h"
#include "../convert.h"
#include "../imghash.h"
#include "queue.h"
#include "../nearfp.h"
#include "../sha256.h"

static const char *const label_rule_names[] = {"folder", "none", "csv"};

const char *kiln_label_rule_name(int rule)
{
    return rule >= 0 && rule <= 2 ? label_rule_names[rule] : "unknown";
}

void kiln_scan_opts_defaults(struct kiln_scan_opts *o)
{
    memset(o, 0, sizeof *o);
    o->labels = KILN_LABELS_FOLDER;
    o->walk.max_file_bytes = KILN_DEFAULT_MAX_FILE_BYTES;
    o->limits.max_pixels = 1ull << 28;
    o->limits.max_side = 65535;
    o->jobs = 1;
}

/* ---- label CSV ---------------------------------------------------------------------------- */

struct label_row {
    char *path, *label, *group;
    int used;
};

struct label_table {
    struct label_row *rows;
    size_t n;
};

static int cmp_label_row(const void *a, const void *b)
{
    return strcmp(((const struct label_row *)a)->path, ((const struct label_row *)b)->path);
}

static void label_table_free(struct label_table *t)
{
    for (size_t i = 0; i < t->n; i++) {
        free(t->rows[i].path);
        free(t->rows[i].label);
        free(t->rows[i].group);
    }
    free(t->rows);
    memset(t, 0, sizeof *t);
}

static int label_table_load(struct label_table *t, const char *path, struct kiln_err *err)
{
    memset(t, 0, sizeof *t);
    struct kiln_csv_reader r;
    int rc = kiln_csv_open(&r, path, err);
    if (rc)
        return rc;
    int got = kiln_csv_next(&r, err);
    int cpath = -1, clabel = -1, cgroup = -1;
    if (got == 1)
        for (size_t i = 0; i < r.nfields; i++) {
            if (strcmp(r.fields[i], "path") == 0)
                cpath = (int)i;
            else if (strcmp(r.fields[i], "label") == 0)
                clabel = (int)i;
            else if (strcmp(r.fields[i], "group") == 0)
                cgroup = (int)i;
        }
    if (got < 0) {
        kiln_csv_close(&r);
        return -got;
    }
    if (cpath < 0 || clabel < 0) {
        kiln_csv_close(&r);
        return kiln_err_set(err, KILN_EINVAL,
                            "%s: the first row must name the columns path,label[,group]", path);
    }
    size_t cap = 0;
    char norm[4096]; /* the rules' form of the path column, so "./a/x.png" matches "a/x.png" */
    while ((got = kiln_csv_next(&r, err)) == 1) {
        if (r.nfields == 1 && !r.fields[0][0])
            continue;
        if ((size_t)cpath >= r.nfields || (size_t)clabel >= r.nfields) {
            rc = kiln_err_set(err, KILN_EINVAL, "%s:%zu: row has too few fields", path, r.line);
            break;
        }
        if (!kiln_grow((void **)&t->rows, &cap, t->n + 1, sizeof *t->rows)) {
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot load %s", path);
            break;
        }
        struct label_row *lr = &t->rows[t->n];
        kiln_name_normalise(r.fields[cpath], norm, sizeof norm);
        lr->path = strdup(norm);
        lr->label = strdup(r.fields[clabel]);
        lr->group = strdup(cgroup >= 0 && (size_t)cgroup < r.nfields ? r.fields[cgroup] : "");
        lr->used = 0;
        t->n++;
        if (!lr->path || !lr->label || !lr->group) {
            rc = kiln_err_set(err, KILN_ENOMEM, "cannot load %s", path);
            break;
        }
    }
    kiln_csv_close(&r);
    if (!rc && got < 0)
        rc = -got;
    if (rc) {
        label_table_free(t);
        return rc;
    }
    if (t->n > 1) /* a header-only file leaves rows NULL, which qsort must not get */
        qsort(t->rows, t->n, sizeof *t->rows, cmp_label_row);
    for (size_t i = 1; i < t->n; i++)
        if (strcmp(t->rows[i - 1].path, t->rows[i].path) == 0) {
            rc = kiln_err_set(err, KILN_EINVAL, "%s: path '%s' is listed twice", path,
                              t->rows[i].path);
            label_table_free(t);
            return rc;
        }
    return KILN_OK;
}

int kiln_labels_csv_check(const char *path, size_t *rows, struct kiln_err *err)
{
    struct label_table t;
    int rc = label_table_load(&t, path, err);
    *rows = rc ? 0 : t.n;
    if (!rc)
        label_table_free(&t);
    return rc;
}

/* ---- the pipeline ------------------------------------------------------------------------- */

struct job {
    char *root, *path, *member; /* one allocation, strings packed after the struct */
    int status;
    char reason[256];
    uint8_t *data;
    size_t size;
};

struct scan_run {
    const struct kiln_scan_opts *o;
    struct kiln_catalog *cat;
    struct kiln_scan_report *rep;
    struct kiln_queue q;
    pthread_mutex_t mu; /* guards cat, rep, labels.used, failed, err, progress */
    regex_t re;
    bool have_re;
    struct label_table labels;
    bool failed;
    struct kiln_err err;
    struct kiln_progress prog;
};

static int push_entry(void *ctx, struct kiln_source_entry *e, struct kiln_err *err)
{
    struct scan_run *run = ctx;
    size_t lr = strlen(e->root) + 1, lp = strlen(e->path) + 1, lm = strlen(e->member) + 1, n;
    if (!kiln_add_size(sizeof(struct job), lr, &n) || !kiln_add_size(n, lp, &n) ||
        !kiln_add_size(n, lm, &n)) {
        free(e->data);
        return kiln_err_set(err, KILN_ENOMEM, "name too long");
    }
    struct job *j = malloc(n);
    if (!j) {
        free(e->data);
        return kiln_err_set(err, KILN_ENOMEM, "cannot queue %s", e->path);
    }
    j->root = (char *)(j + 1);
    j->path = j->root + lr;
    j->member = j->path + lp;
    memcpy(j->root, e->root, lr);
    memcpy(j->path, e->path, lp);
    memcpy(j->member, e->member, lm);
    j->status = e->status;
    memcpy(j->reason, e->reason, sizeof j->reason);
    j->data = e->data;
    j->size = e->size;
    if (!kiln_queue_push(&run->q, j, e->size + n)) {
        free(j->data);
        free(j);
        return kiln_err_set(err, KILN_EINTERNAL, "scan stopped");
    }
    return KILN_OK;
}

struct reader_args {
    struct scan_run *run;
    const char *const *sources;
    size_t nsources;
    int rc;
    struct kiln_err err;
};

static void *reader_main(void *arg)
{
    struct reader_args *a = arg;
    a->rc = KILN_OK;
    for (size_t i = 0; i < a->nsources && !a->rc; i++) {
        struct kiln_walk_counts counts;
        memset(&counts, 0, sizeof counts);
        a->rc = kiln_source_walk(a->sources[i], &a->run->o->walk, NULL, push_entry, a->run,
                                 &counts, &a->err);
        struct kiln_scan_report *rep = a->run->rep;
        pthread_mutex_lock(&a->run->mu);
        rep->hidden += counts.hidden;
        rep->junk += counts.junk;
        if (counts.outputs && !rep->outputs)
            snprintf(rep->first_output, sizeof rep->first_output, "%s/%s", a->sources[i],
                     counts.first_output);
        rep->outputs += counts.outputs;
        pthread_mutex_unlock(&a->run->mu);
    }
    kiln_queue_close(&a->run->q);
    return NULL;
}

static int status_for_code(int code)
{
    switch (code) {
    case KILN_ETRUNCATED: return KILN_ST_TRUNCATED;
    case KILN_EUNSUPPORTED: return KILN_ST_UNSUPPORTED;
    case KILN_ETOOLARGE: return KILN_ST_TOO_LARGE;
    default: return KILN_ST_CORRUPT;
    }
}

struct worker {
    struct scan_run *run;
    struct kiln_err err; /* this worker's failure of the run; copied to run->err under mu */
    struct kiln_prep prep; /* build: the record is prepared from the same decode */
    uint8_t *record;
    char notes[96];
    struct kiln_image img, oriented;
};

/* A failure of the run itself (memory, the record pool), named after the file at hand. */
static int run_failure(struct worker *w, const struct job *j, int code, const char *msg)
{
    return kiln_err_set(&w->err, code, "%s/%s%s%s: %s", j->root, j->path,
                        j->member[0] ? ":" : "", j->member, msg);
}

/* Decodes once and fills the header, pixel digest and difference hash; on failure sets the
 * item's status and reason. Returns non-zero only for failures of the run (memory). */
/* A file no decoder takes: unsupported when its format is known, else not an image. */
static void no_decoder(const struct job *j, struct kiln_item *it, char *reason, size_t rlen)
{
    const char *other = kiln_format_sniff_other(j->data, j->size);
    if (other) {
        it->status = KILN_ST_UNSUPPORTED;
        snprintf(reason, rlen, "%s files are not supported", other);
        return;
    }
    it->status = KILN_ST_NOT_IMAGE;
    char hex[3 * 8 + 1] = "";
    size_t used = 0;
    for (size_t i = 0; i < j->size && i < 8; i++)
        used += (size_t)snprintf(hex + used, sizeof hex - used, "%s%02x", i ? " " : "",
                                 j->data[i]);
    snprintf(reason, rlen, "content is not a known image format (starts %s)", hex);
}

/* The header's facts into the row; false (with the row's status and reason) when the picture
 * is empty or beyond the limits. */
static bool header_usable(struct worker *w, const struct kiln_image_info *info,
                          struct kiln_item *it, char *reason, size_t rlen)
{
    const struct kiln_decode_limits *lim = &w->run->o->limits;
    snprintf(w->notes, sizeof w->notes, "%s", info->note);
    it->notes = w->notes;
    it->stored_depth = (uint8_t)info->stored_depth;
    it->orientation = (uint8_t)info->orientation;
    it->pages = (uint16_t)(info->pages > UINT16_MAX ? UINT16_MAX : info->pages);
    it->channels = (uint8_t)info->channels;
    it->depth = (uint8_t)info->depth;
    const int swap = info->orientation >= 5;
    it->width = swap ? info->height : info->width;
    it->height = swap ? info->width : info->height;
    if (info->width == 0 || info->height == 0) {
        it->status = KILN_ST_CORRUPT;
        snprintf(reason, rlen, "image has zero width or height (%ux%u)", info->width,
                 info->height);
        return false;
    }
    if ((uint64_t)info->width * info->height > lim->max_pixels || info->width > lim->max_side ||
        info->height > lim->max_side) {
        it->status = KILN_ST_TOO_LARGE;
        snprintf(reason, rlen, "%ux%u exceeds the limits (%llu pixels, %u per side)",
                 info->width, info->height, (unsigned long long)lim->max_pixels, lim->max_side);
        return false;
    }
    return true;
}

/* From the one decode in w->img: the pixel digest and the near-duplicate fingerprint of the
 * oriented picture, and in kiln build the prepared record, stored in the pool and hashed. */
static int digest_decoded(struct worker *w, const struct job *j,
                          const struct kiln_image_info *info, uint32_t denom,
                          struct kiln_item *it)
{
    const struct kiln_scan_opts *o = w->run->o;
    const struct kiln_recipe *recipe = o->pool ? o->pool->recipe : NULL;
    struct kiln_err e;
    kiln_err_clear(&e);
    int rc;
    const struct kiln_image *shown = &w->img;
    if (info->orientation != 1) {
        rc = kiln_orient(&w->img, info->orientation, &w->oriented, &e);
        if (rc)
            return run_failure(w, j, rc, e.msg);
        shown = &w->oriented;
    }
    rc = kiln_imghash_pixels(shown, it->pixel_sha256, &e);
    if (rc)
        return run_failure(w, j, rc, e.msg);
    it->has_pixels = 1;
    /* The near-duplicate fingerprint from the same decode. A picture beyond its 2^40-pixel
     * bound (never decoded under any usable limit) simply takes no part. */
    struct kiln_nearfp fp;
    rc = kiln_nearfp_compute(shown, &fp, &e);
    if (rc == KILN_ETOOLARGE)
        rc = KILN_OK;
    else if (!rc && w->run->cat->fps)
        rc = kiln_fpstore_put(w->run->cat->fps, &fp, &it->fp_slot, &e);
    if (rc)
        return run_failure(w, j, rc, e.msg);
    if (!recipe)
        return KILN_OK;
    /* The oriented image gives the same record as the stored one and is already at hand;
     * src still describes the stored picture, which fixes the fit and the reduced grid. */
    const bool use_oriented = recipe->orient && info->orientation != 1;
    const struct kiln_prep_source src = {info->width, info->height, denom, info->orientation,
                                         use_oriented};
    rc = kiln_prep_record(&w->prep, recipe, use_oriented ? &w->oriented : &w->img, &src,
                          w->record, &e);
    if (rc)
        return run_failure(w, j, rc, e.msg);
    /* A full disk is a failure of the output, not of the file at hand: not named after it. */
    rc = kiln_record_pool_put(o->pool, w->record, &it->pool_slot, &e);
    if (rc)
        return kiln_err_set(&w->err, rc, "%s", e.msg);
    /* Identical records join one unit before the split (docs/split.md). */
    uint8_t d[KILN_SHA256_LEN];
    rc = kiln_sha256_buf(w->record, o->pool->record_bytes, d, &e);
    if (rc)
        return kiln_err_set(&w->err, rc, "%s", e.msg);
    memcpy(it->record_digest, d, KILN_RECORD_DIGEST_LEN);
    it->has_record = 1;
    return KILN_OK;
}

static int analyse(struct worker *w, const struct job *j, struct kiln_item *it, char *reason,
                   size_t rlen)
{
    const struct kiln_scan_opts *o = w->run->o;
    struct kiln_err e;
    kiln_err_clear(&e);
    const struct kiln_decoder *dec = kiln_decoder_find(j->data, j->size);
    if (!dec) {
        no_decoder(j, it, reason, rlen);
        return KILN_OK;
    }
    it->format = dec->name;
    struct kiln_image_info info;
    int rc = dec->read_info(j->data, j->size, &o->limits, &info, &e);
    if (rc == KILN_ENOMEM)
        return run_failure(w, j, rc, e.msg);
    if (rc) {
        it->status = (uint8_t)status_for_code(rc);
        snprintf(reason, rlen, "%s", e.msg);
        return KILN_OK;
    }
    if (!header_usable(w, &info, it, reason, rlen))
        return KILN_OK;
    /* kiln build decodes once, at the scale pack uses; the digests then describe that decode
     * (pixel_scale). A plain scan decodes at full size. */
    const struct kiln_recipe *recipe = o->pool ? o->pool->recipe : NULL;
    uint32_t denom = recipe ? kiln_prep_choose_denom(recipe, info.width, info.height,
                                                     info.orientation, info.max_scale_denom)
                            : 1;
    it->pixel_scale = (uint8_t)denom;
    rc = kiln_decoded_shape(&info, denom, &w->img, &e);
    if (!rc)
        rc = dec->decode(j->data, j->size, &info, denom, &w->img, &e);
    if (rc == KILN_ENOMEM || rc == KILN_EINTERNAL)
        return run_failure(w, j, rc, e.msg);
    if (rc) {
        it->status = (uint8_t)status_for_code(rc);
        snprintf(reason, rlen, "%s", e.msg);
        return KILN_OK;
    }
    return digest_decoded(w, j, &info, denom, it);
}

static void first_component(const char *s, char *buf, size_t len)
{
    const char *slash = strchr(s, '/');
    size_t n = slash ? (size_t)(slash - s) : 0;
    if (n >= len)
        n = len - 1;
    memcpy(buf, s, n);
    buf[n] = '\0';
}

/* Folder rule on the normalised path and member: the first folder level under the source, or
 * under the archive root when the archive is the source or sits at the top level of the
 * source. */
static void folder_label(const char *path, const char *member, char *buf, size_t len)
{
    if (member[0] && !strchr(path, '/'))
        first_component(member, buf, len);
    else
        first_component(path, buf, len);
}

/* The longest label or group a row keeps (bytes with the terminator). */
#define NAME_FIELD 1024

/* The label rule and the group rule applied to a row's normalised names (label and group hold
 * NAME_FIELD bytes each). Returns the labels-CSV row used, if any; *matched: the group rule
 * matched. */
static struct label_row *label_and_group(struct scan_run *run, const char *path,
                                         const char *member, char *rel, char *label,
                                         char *group, bool *matched)
{
    const struct kiln_scan_opts *o = run->o;
    struct label_row *lr = NULL;
    if (o->labels == KILN_LABELS_FOLDER) {
        folder_label(path, member, label, NAME_FIELD);
    } else if (o->labels == KILN_LABELS_CSV) {
        struct label_row key = {.path = rel};
        lr = run->labels.n ? bsearch(&key, run->labels.rows, run->labels.n, sizeof key,
                                     cmp_label_row)
                           : NULL;
        if (lr) {
            snprintf(label, NAME_FIELD, "%s", lr->label);
            snprintf(group, NAME_FIELD, "%s", lr->group);
        }
    }
    *matched = false;
    if (run->have_re) {
        regmatch_t m[2];
        if (regexec(&run->re, rel, 2, m, 0) == 0 && m[1].rm_so >= 0) {
            size_t n = (size_t)(m[1].rm_eo - m[1].rm_so);
            if (n >= NAME_FIELD)
                n = NAME_FIELD - 1;
            memcpy(group, rel + m[1].rm_so, n);
            group[n] = '\0';
            *matched = n > 0;
        }
    }
    return lr;
}

static int process(struct worker *w, struct job *j)
{
    struct scan_run *run = w->run;
    const struct kiln_scan_opts *o = run->o;
    struct kiln_item it;
    memset(&it, 0, sizeof it);
    it.source = j->root;
    it.path = j->path;
    it.member = j->member;
    it.class_index = -1;
    it.split = KILN_SPLIT_NONE;
    it.pool_slot = KILN_NO_SLOT;
    it.fp_slot = KILN_FP_NONE;
    it.size = j->size;
    it.status = (uint8_t)j->status;
    char reason[256];
    snprintf(reason, sizeof reason, "%s", j->reason);
    int rc = KILN_OK;
    struct kiln_err e;
    if (j->data) {
        rc = kiln_sha256_buf(j->data, j->size, it.sha256, &e);
        if (rc)
            return run_failure(w, j, rc, e.msg);
        it.has_sha = 1;
    }
    if (it.status == KILN_ST_OK) {
        if (j->size == 0) {
            it.status = KILN_ST_EMPTY;
            snprintf(reason, sizeof reason, "file is empty (0 bytes)");
        } else {
            rc = analyse(w, j, &it, reason, sizeof reason);
            if (rc)
                return rc;
        }
    }
    /* The rules see normalised names ("./class/x.png" in a tarball made with `tar -C dir .`
     * is "class/x.png"); the row keeps the raw ones, which is how pack finds the member. */
    char path[4096], member[4096], rel[4096], label[NAME_FIELD] = "", group[NAME_FIELD] = "";
    kiln_name_normalise(j->path, path, sizeof path);
    kiln_name_normalise(j->member, member, sizeof member);
    kiln_catalog_relname(path, member, rel, sizeof rel);
    bool matched;
    struct label_row *lr = label_and_group(run, path, member, rel, label, group, &matched);
    if (it.status == KILN_ST_OK && o->labels != KILN_LABELS_NONE && !label[0]) {
        it.status = KILN_ST_UNLABELLED;
        snprintf(reason, sizeof reason, "%s",
                 o->labels == KILN_LABELS_FOLDER ? "file is not inside a class folder"
                                                 : "no row for this file in the labels CSV");
    }
    it.label = label;
    it.group = group;
    it.reason = it.status == KILN_ST_OK ? "" : reason;
    pthread_mutex_lock(&run->mu);
    if (lr)
        lr->used = 1;
    if (run->have_re && it.status == KILN_ST_OK) {
        if (matched) {
            run->rep->group_matched++;
        } else {
            /* The smallest name, not the first seen: workers finish in any order. */
            if (!run->rep->group_unmatched++ || strcmp(rel, run->rep->first_unmatched) < 0)
                snprintf(run->rep->first_unmatched, sizeof run->rep->first_unmatched, "%s", rel);
        }
    }
    rc = kiln_catalog_add(run->cat, &it, &w->err);
    run->rep->bytes += j->size;
    run->prog.items++;
    run->prog.bytes += j->size;
    if (o->progress)
        o->progress(o->progress_ctx, &run->prog);
    pthread_mutex_unlock(&run->mu);
    return rc;
}

static void *worker_main(void *arg)
{
    struct worker *w = arg;
    struct scan_run *run = w->run;
    struct job *j;
    while ((j = kiln_queue_pop(&run->q)) != NULL) {
        int rc = KILN_OK;
        pthread_mutex_lock(&run->mu);
        bool failed = run->failed;
        pthread_mutex_unlock(&run->mu);
        if (!failed)
            rc = process(w, j);
        free(j->data);
        free(j);
        if (rc) {
            /* The first failure is the one reported; run->err is only touched under mu. */
            pthread_mutex_lock(&run->mu);
            if (!run->failed)
                run->err = w->err;
            run->failed = true;
            pthread_mutex_unlock(&run->mu);
            kiln_queue_close(&run->q); /* stops the reader; the rest drains unprocessed */
        }
    }
    return NULL;
}

static int cmp_str_ptr(const void *a, const void *b)
{
    return strcmp(*(const char *const *)a, *(const char *const *)b);
}

/* Distinct group keys of usable rows, and how many hold two files or more: a group rule that
 * matches but keeps nothing together is as likely a mistake as one that matches nothing. */
static int count_groups(const struct kiln_catalog *cat, struct kiln_scan_report *rep,
                        struct kiln_err *err)
{
    const char **keys = kiln_alloc_array(cat->n ? cat->n : 1, sizeof *keys);
    if (!keys)
        return kiln_err_set(err, KILN_ENOMEM, "cannot count the groups of %zu rows", cat->n);
    size_t n = 0;
    for (size_t i = 0; i < cat->n; i++)
        if (cat->items[i].status == KILN_ST_OK && cat->items[i].group[0])
            keys[n++] = cat->items[i].group;
    if (n > 1)
        qsort(keys, n, sizeof *keys, cmp_str_ptr);
    for (size_t i = 0, j; i < n; i = j) {
        for (j = i + 1; j < n && strcmp(keys[j], keys[i]) == 0;)
            j++;
        rep->groups++;
        rep->groups_shared += j - i > 1;
    }
    free(keys);
    return KILN_OK;
}

/* --group-regex compiled into run->re; it must have a capture group. */
static int compile_group_rule(struct scan_run *run, struct kiln_err *err)
{
    const char *rule = run->o->group_regex;
    if (!rule)
        return KILN_OK;
    int e = regcomp(&run->re, rule, REG_EXTENDED);
    if (e) {
        char msg[200];
        regerror(e, &run->re, msg, sizeof msg);
        return kiln_err_set(err, KILN_EINVAL, "bad --group-regex '%s': %s", rule, msg);
    }
    if (run->re.re_nsub < 1) {
        regfree(&run->re);
        return kiln_err_set(err, KILN_EINVAL,
                            "--group-regex '%s' needs a capture group, e.g. '^([^_]+)_'", rule);
    }
    run->have_re = true;
    return KILN_OK;
}

/* After the last row: unused labels-CSV rows counted, rows in location order, classes indexed,
 * statuses and groups counted. */
static int finish_scan(struct scan_run *run, struct kiln_err *err)
{
    struct kiln_scan_report *rep = run->rep;
    for (size_t i = 0; i < run->labels.n; i++)
        if (!run->labels.rows[i].used) {
            if (!rep->csv_rows_unused)
                snprintf(rep->first_unused_csv_row, sizeof rep->first_unused_csv_row, "%s",
                         run->labels.rows[i].path);
            rep->csv_rows_unused++;
        }
    rep->csv_rows = run->labels.n;
    kiln_catalog_sort(run->cat);
    int rc = kiln_catalog_index_classes(run->cat, err);
    kiln_catalog_count_status(run->cat, rep->status);
    if (!rc)
        rc = count_groups(run->cat, rep, err);
    return rc;
}

int kiln_stage_scan(const char *const *sources, size_t nsources, const struct kiln_scan_opts *o,
                    struct kiln_catalog *cat, struct kiln_scan_report *rep, struct kiln_err *err)
{
    memset(rep, 0, sizeof *rep);
    struct scan_run run;
    memset(&run, 0, sizeof run);
    run.o = o;
    run.cat = cat;
    run.rep = rep;
    int rc = compile_group_rule(&run, err);
    if (rc)
        return rc;
    if (o->labels == KILN_LABELS_CSV) {
        rc = label_table_load(&run.labels, o->labels_csv, err);
        if (rc) {
            if (run.have_re)
                regfree(&run.re);
            return rc;
        }
    }
    unsigned jobs = o->jobs ? o->jobs : 1;
    rc = kiln_queue_init(&run.q, 4096,
                         o->queue_bytes ? o->queue_bytes : kiln_queue_bytes_for(jobs), err);
    if (rc) {
        label_table_free(&run.labels);
        if (run.have_re)
            regfree(&run.re);
        return rc;
    }
    pthread_mutex_init(&run.mu, NULL);
    struct worker *workers = calloc(jobs, sizeof *workers);
    pthread_t *tids = calloc(jobs, sizeof *tids);
    struct reader_args ra = {&run, sources, nsources, KILN_OK, {0, ""}};
    pthread_t reader;
    unsigned started = 0;
    bool reader_started = false;
    if (!workers || !tids) {
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot allocate %u workers", jobs);
        goto out;
    }
    for (; started < jobs; started++) {
        workers[started].run = &run;
        kiln_prep_init(&workers[started].prep);
        if (o->pool && !(workers[started].record = malloc(o->pool->record_bytes)))
            break;
        if (pthread_create(&tids[started], NULL, worker_main, &workers[started]) != 0)
            break;
    }
    if (started == 0 || pthread_create(&reader, NULL, reader_main, &ra) != 0) {
        kiln_queue_close(&run.q);
        rc = kiln_err_set(err, KILN_ENOMEM, "cannot start scan threads");
    } else {
        reader_started = true;
    }
out:
    if (reader_started)
        pthread_join(reader, NULL);
    for (unsigned i = 0; i < started; i++)
        pthread_join(tids[i], NULL);
    if (workers)
        for (unsigned i = 0; i < jobs; i++) {
            kiln_image_free(&workers[i].img);
            kiln_image_free(&workers[i].oriented);
            kiln_prep_free(&workers[i].prep);
            free(workers[i].record);
        }
    free(workers);
    free(tids);
    if (!rc && run.failed)
        rc = kiln_err_set(err, run.err.code ? run.err.code : KILN_EINTERNAL, "%s", run.err.msg);
    if (!rc && ra.rc)
        rc = kiln_err_set(err, ra.rc, "%s", ra.err.msg);
    if (!rc)
        rc = finish_scan(&run, err);
    pthread_mutex_destroy(&run.mu);
    kiln_queue_destroy(&run.q);
    label_table_free(&run.labels);
    if (run.have_re)
        regfree(&run.re);
    return rc;
}
