/* kiln's entry point: the command table, global options, and the conventions every command
 * shares (messages, exit codes, progress, option groups). */
#include <errno.h>
#include <getopt.h>
#include <regex.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/recipe.h"
#include "../core/audit.h"
#include "../core/checked.h"
#include "../core/pipeline/stage_pack.h"
#include "../formats/decoders/decoder.h"
#include "../formats/files/keep.h"
#include "../formats/files/manifest.h"
#include "../formats/sources/source.h"
#include "../core/version.h"
#include "cmd.h"

static const struct {
    const char *name;
    int (*fn)(int, char **);
    const char *summary;
} commands[] = {
    {"scan", cmd_scan, "catalogue the images in folders and archives (catalog.csv)"},
    {"split", cmd_split, "assign train/validation/test splits to a catalogue"},
    {"pack", cmd_pack, "decode, resize and write tensor files, statistics and a manifest"},
    {"build", cmd_build, "scan, split and pack in one run"},
    {"audit", cmd_audit, "report groups, duplicates and near duplicates that span splits"},
    {"verify", cmd_verify, "re-check every checksum of a packed output folder"},
    {"reproduce", cmd_reproduce, "rebuild a recorded output from today's sources and compare"},
    {"inspect", cmd_inspect, "show the header, arrays and statistics of a .kten file"},
};

#define NCOMMANDS (sizeof commands / sizeof commands[0])

const char *cli_command = "kiln";

static void usage(FILE *f)
{
    fprintf(f, "usage: kiln <command> [options]\n\n"
               "Turns folders and archives of lab images into reproducible, leakage-free tensor\n"
               "data sets.\n\ncommands:\n");
    for (size_t i = 0; i < NCOMMANDS; i++)
        fprintf(f, "  %-9s %s\n", commands[i].name, commands[i].summary);
    fprintf(f, "\nRun 'kiln <command> --help' for a command's options; 'kiln --version' for the "
               "version\nand the libraries in use.\n");
}

int main(int argc, char **argv)
{
    if (argc < 2) {
        usage(stderr);
        return KILN_EXIT_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        usage(stdout);
        return KILN_EXIT_OK;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("kiln %s\n", KILN_VERSION);
        struct kiln_library_version v[KILN_MAX_LIBRARIES];
        size_t n = kiln_library_versions(v, KILN_MAX_LIBRARIES);
        for (size_t i = 0; i < n; i++)
            printf("%s %s\n", v[i].library, v[i].version);
        return fflush(stdout) == 0 ? KILN_EXIT_OK : KILN_EXIT_FAILURE;
    }
    for (size_t i = 0; i < NCOMMANDS; i++)
        if (strcmp(argv[1], commands[i].name) == 0) {
            cli_command = commands[i].name;
            int rc = commands[i].fn(argc - 1, argv + 1);
            /* A full disk must not end in a silent success. */
            if (fflush(stdout) != 0 || ferror(stdout)) {
                cli_error("cannot write to standard output: %s", strerror(errno));
                return KILN_EXIT_FAILURE;
            }
            return rc;
        }
    cli_error("'%s' is not a kiln command", argv[1]);
    usage(stderr);
    return KILN_EXIT_USAGE;
}

/* ---- messages and exit codes -------------------------------------------------------------- */

void cli_error(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("kiln: error: ", stderr);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
}

void cli_warn(const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("kiln: warning: ", stderr);
    vfprintf(stderr, fmt, ap);
    fputc('\n', stderr);
    va_end(ap);
}

int cli_usage_error(const char *cmd, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    fputs("kiln: error: ", stderr);
    vfprintf(stderr, fmt, ap);
    fprintf(stderr, "\n(see 'kiln %s --help')\n", cmd);
    va_end(ap);
    return KILN_EXIT_USAGE;
}

int cli_check_output_file(const char *path)
{
    const char *slash = strrchr(path, '/');
    char dir[4096];
    if (!slash)
        snprintf(dir, sizeof dir, ".");
    else
        snprintf(dir, sizeof dir, "%.*s", slash == path ? 1 : (int)(slash - path), path);
    struct stat st;
    if (!path[0] || (slash && !slash[1])) {
        cli_usage_error(cli_command, "'%s' names a folder; name the file to write", path);
        return KILN_EXIT_USAGE;
    }
    if (stat(dir, &st) != 0) {
        cli_error("cannot write %s: the folder %s does not exist", path, dir);
        return KILN_EXIT_FAILURE;
    }
    if (!S_ISDIR(st.st_mode)) {
        cli_error("cannot write %s: %s is not a folder", path, dir);
        return KILN_EXIT_FAILURE;
    }
    if (access(dir, W_OK | X_OK) != 0) {
        cli_error("cannot write %s: %s", path, strerror(errno));
        return KILN_EXIT_FAILURE;
    }
    if (stat(path, &st) == 0 && S_ISDIR(st.st_mode)) {
        cli_usage_error(cli_command, "'%s' is a folder; name the file to write", path);
        return KILN_EXIT_USAGE;
    }
    return KILN_EXIT_OK;
}

int cli_exit_for(int code)
{
    switch (code) {
    case KILN_OK: return KILN_EXIT_OK;
    case KILN_EINVAL:
    case KILN_ECORRUPT:
    case KILN_ETRUNCATED:
    case KILN_EUNSUPPORTED:
    case KILN_ETOOLARGE: return KILN_EXIT_INPUT;
    case KILN_EMISMATCH: return KILN_EXIT_DRIFT;
    default: return KILN_EXIT_FAILURE;
    }
}

int cli_exit_for_input(int code)
{
    return code == KILN_ENOMEM || code == KILN_EINTERNAL ? KILN_EXIT_FAILURE : KILN_EXIT_INPUT;
}

unsigned cli_default_jobs(void)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (unsigned)n : 1u;
}

int cli_parse_jobs(const char *text, unsigned *jobs)
{
    char *end;
    errno = 0;
    long v = strtol(text, &end, 10);
    if (*end || errno || v < 1 || v > 1024)
        return -1;
    *jobs = (unsigned)v;
    return 0;
}

/* ---- progress ----------------------------------------------------------------------------- */

static double since(const struct timespec *a, const struct timespec *b)
{
    return (double)(b->tv_sec - a->tv_sec) + (double)(b->tv_nsec - a->tv_nsec) / 1e9;
}

void cli_progress_start(struct cli_progress *p, const char *what, bool quiet)
{
    p->what = what;
    p->on = !quiet && isatty(STDERR_FILENO);
    clock_gettime(CLOCK_MONOTONIC, &p->start);
    p->last = p->start;
}

double cli_elapsed(const struct cli_progress *p)
{
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    return since(&p->start, &now);
}

void cli_progress_update(void *ctx, const struct kiln_progress *pr)
{
    struct cli_progress *p = ctx;
    if (!p->on)
        return;
    struct timespec now;
    clock_gettime(CLOCK_MONOTONIC, &now);
    if (since(&p->last, &now) < 0.2 && pr->items != pr->total_items)
        return;
    p->last = now;
    double t = since(&p->start, &now);
    double rate = t > 0 ? (double)pr->items / t : 0, mbs = t > 0 ? (double)pr->bytes / t / 1e6 : 0;
    if (pr->total_items && rate > 0)
        fprintf(stderr, "\r%s: %zu/%zu items, %.0f items/s, %.1f MB/s, about %.0f s left   ",
                p->what, pr->items, pr->total_items, rate, mbs,
                (double)(pr->total_items - pr->items) / rate);
    else
        fprintf(stderr, "\r%s: %zu items, %.0f items/s, %.1f MB/s   ", p->what, pr->items, rate,
                mbs);
}

void cli_progress_done(struct cli_progress *p)
{
    if (p->on)
        fputs("\r\033[K", stderr);
}

/* ---- option groups ------------------------------------------------------------------------ */

const char cli_scan_help[] =
    "  --labels RULE        folder (default: first folder level), none, or csv:FILE with\n"
    "                       columns path,label[,group]\n"
    "  --group-regex ERE    group key = first capture group of ERE on the relative path;\n"
    "                       items of one group always share a split\n"
    "  --follow-links       follow symbolic links (loops are detected and reported)\n"
    "  --max-pixels N       reject images with more pixels (default 268435456 = 2^28)\n"
    "  --max-side N         reject images with a longer side (default 65535)\n";

const char cli_split_help[] =
    "  --seed N             seed of the split (required)\n"
    "  --ratios A:B[:C]     train:test or train:val:test shares, e.g. 80:10:10, 0.7:0.3\n"
    "                       (default 80:10:10)\n"
    "  --stratify           keep class proportions in every split\n"
    "  --mode MODE          exact (default: sizes as close to the ratios as whole units\n"
    "                       allow) or stable (a unit's split depends on its own key only)\n"
    "  --merge-near-duplicates[=BITS]\n"
    "                       also keep together images whose difference hashes differ in at\n"
    "                       most BITS bits (default 6, at most 16)\n"
    "  --keep MANIFEST      items packed in that earlier output keep their split; new items\n"
    "                       are dealt by the mode\n"
    "  --keep-conflicts test\n"
    "                       a unit joining two old splits goes to the later one (train <\n"
    "                       val < test) instead of stopping with an error\n";

const char cli_recipe_help[] =
    "  --size WxH | S       output image size (required)\n"
    "  --fit MODE           stretch (default), pad (letterbox) or crop (centre crop)\n"
    "  --filter NAME        nearest, box, bilinear (default), bicubic or lanczos3\n"
    "  --channels 1|3|4     grey (BT.601 luma), RGB (default) or RGBA\n"
    "  --depth 8|16         bits per sample of the records (default 8)\n"
    "  --dtype u8|u16|f32   output type; f32 is normalised with the training statistics\n"
    "  --layout nhwc|nchw   array layout (default nhwc)\n"
    "  --pad-value V[,..]   letterbox fill, 0-255 per channel (default 0)\n"
    "  --background R,G,B   colour alpha is composited over (default 255,255,255)\n"
    "  --no-dct-scale       decode JPEG at full size even when the target is small\n"
    "  --no-orient          ignore EXIF orientation\n"
    "  --hash-paths         write file, folder and group names as keyed hashes in every\n"
    "                       output (personal data in names; docs/formats.md)\n"
    "  --path-key FILE      secret key for --hash-paths (without it the key is public and\n"
    "                       a guessed name can be confirmed)\n";

int cli_scan_option(struct kiln_scan_opts *o, const char *name, const char *arg)
{
    if (strcmp(name, "labels") == 0) {
        if (strcmp(arg, "folder") == 0)
            o->labels = KILN_LABELS_FOLDER;
        else if (strcmp(arg, "none") == 0)
            o->labels = KILN_LABELS_NONE;
        else if (strncmp(arg, "csv:", 4) == 0 && arg[4]) {
            o->labels = KILN_LABELS_CSV;
            o->labels_csv = arg + 4;
        } else {
            cli_usage_error(cli_command, "bad --labels '%s': use folder, none or csv:FILE", arg);
            return -1;
        }
        return 1;
    }
    if (strcmp(name, "group-regex") == 0) {
        /* Compiled here once to check it, so a typo is a bad option value before any work. */
        regex_t re;
        int rc = regcomp(&re, arg, REG_EXTENDED);
        if (rc) {
            char why[256];
            regerror(rc, &re, why, sizeof why);
            cli_usage_error(cli_command, "bad --group-regex '%s': %s", arg, why);
            return -1;
        }
        const size_t groups = re.re_nsub;
        regfree(&re);
        if (groups < 1) {
            cli_usage_error(cli_command,
                            "bad --group-regex '%s': it has no capture group ( ) for the group "
                            "key",
                            arg);
            return -1;
        }
        o->group_regex = arg;
        return 1;
    }
    if (strcmp(name, "follow-links") == 0) {
        o->walk.follow_links = true;
        return 1;
    }
    if (strcmp(name, "max-pixels") == 0 || strcmp(name, "max-side") == 0) {
        struct kiln_recipe tmp;
        struct kiln_err e;
        kiln_recipe_defaults(&tmp);
        if (kiln_recipe_set(&tmp, name, arg, &e)) {
            cli_usage_error(cli_command, "%s", e.msg);
            return -1;
        }
        if (name[4] == 'p')
            o->limits.max_pixels = tmp.max_pixels;
        else
            o->limits.max_side = tmp.max_side;
        return 1;
    }
    return 0;
}

int cli_split_option(struct kiln_split_params *p, const char *name, const char *arg)
{
    struct kiln_err e;
    if (strcmp(name, "seed") == 0) {
        char *end;
        errno = 0;
        unsigned long long v = strtoull(arg, &end, 10);
        if (!*arg || *end || errno || arg[0] == '-') {
            cli_usage_error(cli_command, "bad --seed '%s': use a whole number from 0 to 2^64-1", arg);
            return -1;
        }
        p->seed = v;
        return 1;
    }
    if (strcmp(name, "ratios") == 0) {
        bool note;
        if (kiln_split_parse_ratios(arg, p, &note, &e)) {
            cli_usage_error(cli_command, "%s", e.msg);
            return -1;
        }
        if (note)
            cli_warn("--ratios %s does not sum to 100; the parts are used as weights", arg);
        return 1;
    }
    if (strcmp(name, "stratify") == 0) {
        p->stratify = true;
        return 1;
    }
    if (strcmp(name, "merge-near-duplicates") == 0) {
        char *end;
        long v = arg ? strtol(arg, &end, 10) : 6;
        if (arg && (!*arg || *end || v < 0 || v > 16)) {
            cli_usage_error(cli_command, "bad --merge-near-duplicates '%s': use a number of bits from 0 to 16", arg);
            return -1;
        }
        p->near_bits = (int)v;
        return 1;
    }
    if (strcmp(name, "keep") == 0) {
        p->keep_manifest = arg;
        return 1;
    }
    if (strcmp(name, "keep-conflicts") == 0) {
        if (strcmp(arg, "test") != 0 && strcmp(arg, "error") != 0) {
            cli_usage_error(cli_command, "bad --keep-conflicts '%s': use test (or error, the default)", arg);
            return -1;
        }
        p->keep_to_test = strcmp(arg, "test") == 0;
        return 1;
    }
    if (strcmp(name, "mode") == 0) {
        int m = kiln_split_mode_parse(arg);
        if (m < 0) {
            cli_usage_error(cli_command, "bad --mode '%s': use exact or stable", arg);
            return -1;
        }
        p->mode = m;
        return 1;
    }
    return 0;
}

int cli_recipe_option(struct kiln_recipe *r, const char *name, const char *arg)
{
    static const char *const keys[] = {"size", "fit", "filter", "channels", "depth", "dtype",
                                       "layout", "pad-value", "background", "max-pixels",
                                       "max-side"};
    struct kiln_err e;
    if (strcmp(name, "no-dct-scale") == 0) {
        r->dct_scale = false;
        return 1;
    }
    if (strcmp(name, "no-orient") == 0) {
        r->orient = false;
        return 1;
    }
    if (strcmp(name, "hash-paths") == 0) {
        r->hash_paths = true;
        return 1;
    }
    for (size_t i = 0; i < sizeof keys / sizeof keys[0]; i++)
        if (strcmp(name, keys[i]) == 0) {
            if (kiln_recipe_set(r, name, arg, &e)) {
                cli_usage_error(cli_command, "%s", e.msg);
                return -1;
            }
            return 1;
        }
    return 0;
}

char **cli_sources_new(int n, char **argv)
{
    char **s = calloc((size_t)n + 1, sizeof *s);
    for (int i = 0; s && i < n; i++) {
        s[i] = strdup(argv[i]);
        if (!s[i]) {
            cli_sources_free(s, i);
            return NULL;
        }
        size_t len = strlen(s[i]);
        while (len > 1 && s[i][len - 1] == '/')
            s[i][--len] = '\0';
    }
    return s;
}

void cli_sources_free(char **sources, int n)
{
    for (int i = 0; sources && i < n; i++)
        free(sources[i]);
    free(sources);
}

int cli_read_path_key(const char *file, uint8_t **key, size_t *len)
{
    free(*key);
    *key = NULL;
    *len = 0;
    struct kiln_err e;
    int rc = kiln_source_read_file(file, 1u << 20, key, len, &e);
    if (rc == KILN_ETOOLARGE)
        cli_error("cannot use %s as a path key: it is larger than 1 MiB", file);
    else if (rc)
        cli_error("cannot read the path key %s (%s)", file, e.msg);
    else if (*len == 0)
        cli_error("cannot use %s as a path key: the file is empty", file);
    if (!rc && *len)
        return KILN_EXIT_OK;
    free(*key);
    *key = NULL;
    return rc == KILN_ENOMEM ? KILN_EXIT_FAILURE : KILN_EXIT_INPUT;
}

void cli_split_defaults(struct kiln_split_params *p)
{
    struct kiln_err e;
    bool note;
    memset(p, 0, sizeof *p);
    p->near_bits = -1;
    kiln_split_parse_ratios("80:10:10", p, &note, &e);
}

int cli_split_catalog(struct kiln_catalog *cat, struct kiln_split_params *p,
                      struct kiln_units *units, struct kiln_split_report *rep)
{
    struct kiln_err err;
    kiln_err_clear(&err);
    struct kiln_keep keep = {0};
    int8_t *old = NULL;
    int rc = KILN_OK;
    if (p->keep_manifest) {
        rc = kiln_keep_load(p->keep_manifest, &keep, &err);
        old = rc ? NULL : kiln_alloc_array(cat->n ? cat->n : 1, 1);
        if (!rc && !old)
            rc = kiln_err_set(&err, KILN_ENOMEM, "out of memory");
        if (!rc) {
            kiln_keep_map(&keep, cat, old);
            memcpy(p->keep_sha256, keep.manifest_sha256, sizeof p->keep_sha256);
            p->old_split = old;
        }
        kiln_keep_free(&keep);
    }
    if (!rc)
        rc = kiln_split_run(cat, p, units, rep, &err);
    if (!rc && old && rep->moved_items) {
        cli_warn("%zu items move from their old split (--keep-conflicts test):",
                 rep->moved_items);
        for (size_t i = 0; i < cat->n; i++)
            if (old[i] >= 0 && old[i] != cat->items[i].split)
                fprintf(stderr, "  %s/%s%s%s: %s -> %s\n", cat->items[i].source,
                        cat->items[i].path, cat->items[i].member[0] ? ":" : "",
                        cat->items[i].member, kiln_split_name(old[i]),
                        kiln_split_name(cat->items[i].split));
    }
    p->old_split = NULL; /* freed below; the record needs only keep_manifest and its digest */
    free(old);
    if (rc) {
        cli_error("%s", err.msg);
        return cli_exit_for_input(rc);
    }
    return KILN_EXIT_OK;
}

void cli_report_debris(const char *outdir, const struct kiln_debris *d)
{
    if (d->removed)
        cli_warn("removed %zu temporary %s (%.1f MB, %llu bytes) that an interrupted run left in "
                 "%s",
                 d->removed, d->removed == 1 ? "file" : "files", (double)d->bytes / 1e6,
                 (unsigned long long)d->bytes, outdir);
    if (d->kept)
        cli_warn("%s holds %zu temporary %s of another kiln process that is still running; they "
                 "were left alone",
                 outdir, d->kept, d->kept == 1 ? "file" : "files");
}

char *cli_catalog_record_path(const char *csv)
{
    size_t n = strlen(csv);
    char *s = malloc(n + 6);
    if (!s)
        return NULL;
    memcpy(s, csv, n + 1);
    if (n >= 4 && strcmp(s + n - 4, ".csv") == 0)
        s[n - 4] = '\0';
    strcat(s, ".json");
    return s;
}

void cli_print_pack_summary(FILE *f, const char *outdir, const struct kiln_recipe *r,
                            const struct kiln_pack_report *rep, double seconds, bool quiet)
{
    /* Warnings are not part of the summary: they are printed with or without --quiet. */
    if (rep->leaks)
        cli_warn("the audit found %zu %s spanning splits (manifest.json \"audit\"; kiln "
                 "audit %s lists them)",
                 rep->leaks, rep->leaks == 1 ? "group or duplicate" : "groups or duplicates",
                 outdir);
    if (rep->missing_classes)
        cli_warn("%zu %s missing from a split (manifest.json \"audit\")", rep->missing_classes,
                 rep->missing_classes == 1 ? "class is" : "classes are");
    if (quiet)
        return;
    size_t total = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (rep->present[s]) {
            fprintf(f, "  %-5s %zu %s -> %s/%s\n", kiln_split_name(s), rep->records[s],
                    rep->records[s] == 1 ? "record" : "records", outdir, kiln_split_files[s]);
            total += rep->records[s];
        }
    const double maxv = r->depth == 16 ? 65535.0 : 255.0;
    if (rep->records[KILN_SPLIT_TRAIN] == 0)
        fprintf(f, "training statistics: none, the training split is empty\n");
    else
        fprintf(f, "training statistics, [0,1] scale (population std):\n");
    for (unsigned c = 0; c < r->channels && rep->records[KILN_SPLIT_TRAIN]; c++) {
        struct kiln_stats_summary u;
        struct kiln_err e;
        if (kiln_stats_summarize(&rep->stats[KILN_SPLIT_TRAIN].ch[c], maxv, &u, &e) == 0)
            fprintf(f, "  channel %u: mean %.6f  std %.6f\n", c, u.mean, u.std_pop);
    }
    if (rep->skipped)
        fprintf(f, "%zu catalogue %s not packed (see manifest.json \"skipped\")\n", rep->skipped,
                rep->skipped == 1 ? "row" : "rows");
    fprintf(f, "%zu %s in %.2f s (%.0f images/s); manifest: %s/manifest.json\n", total,
            total == 1 ? "record" : "records", seconds, seconds > 0 ? (double)total / seconds : 0.0,
            outdir);
}

void cli_print_audit(FILE *f, const struct kiln_audit *a, const struct kiln_catalog *cat,
                     bool quiet, size_t limit, const char *rerun)
{
    for (size_t l = 0; l < a->nleaks; l++) {
        if (l == limit) {
            fprintf(f, "... and %zu more findings (kiln audit %s lists them all)\n",
                    a->nleaks - limit, rerun);
            break;
        }
        const struct kiln_leak *lk = &a->leaks[l];
        const struct kiln_item *first = &cat->items[a->items[lk->first]];
        fprintf(f, "LEAK %s", kiln_leak_kind_name(lk->kind));
        if (lk->kind == KILN_LEAK_GROUP)
            fprintf(f, " '%s'", first->group);
        fputs(":\n", f);
        for (size_t k = 0; k < lk->count; k++) {
            if (k == limit) {
                fprintf(f, "  ... and %zu more items\n", lk->count - limit);
                break;
            }
            const struct kiln_item *it = &cat->items[a->items[lk->first + k]];
            char rel[4096];
            kiln_item_relname(it->path, it->member, rel, sizeof rel);
            fprintf(f, "  %-5s %s/%s\n", kiln_split_name(it->split), it->source, rel);
        }
    }
    if (!quiet) {
        char near[64] = "";
        if (a->near_bits >= 0)
            snprintf(near, sizeof near, ", near duplicates within %d bits", a->near_bits);
        if (a->nleaks)
            fprintf(f, "%zu findings span two splits: %zu groups, %zu identical files, %zu identical "
                       "pictures, %zu near-duplicate clusters\n",
                    a->nleaks, a->per_kind[KILN_LEAK_GROUP], a->per_kind[KILN_LEAK_BYTES],
                    a->per_kind[KILN_LEAK_PIXELS], a->per_kind[KILN_LEAK_NEAR]);
        else
            fprintf(f, "audit: nothing spans two splits (groups, identical files and pictures%s)\n",
                    near);
    }
}
