/* The conventions every command shares: messages, exit codes, progress, the output file check,
 * sources as named, the split run, and the summaries of pack and audit. */
#include <errno.h>
#include <stdarg.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "../core/audit.h"
#include "../core/pipeline/stage_pack.h"
#include "../core/pipeline/stage_split.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

const char *cli_cmd_name = "kiln";

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
        cli_usage_error(cli_cmd_name, "'%s' names a folder; name the file to write", path);
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
        cli_usage_error(cli_cmd_name, "'%s' is a folder; name the file to write", path);
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
    case KILN_ELEAK: return KILN_EXIT_LEAK;
    default: return KILN_EXIT_FAILURE;
    }
}

int cli_exit_for_input(int code)
{
    return code == KILN_ENOMEM || code == KILN_EINTERNAL || code == KILN_EWRITE ? KILN_EXIT_FAILURE
                                                                               : KILN_EXIT_INPUT;
}

unsigned cli_default_jobs(void)
{
    long n = sysconf(_SC_NPROCESSORS_ONLN);
    return n > 0 ? (unsigned)n : 1u;
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

int cli_split_catalog(struct kiln_catalog *cat, struct kiln_split_params *p, unsigned jobs,
                      struct kiln_nearlinks *near, struct kiln_units *units,
                      struct kiln_split_report *rep)
{
    struct kiln_err err;
    kiln_err_clear(&err);
    int8_t *old = NULL;
    int rc = kiln_stage_split(cat, p, jobs, near, units, rep, &old, &err);
    if (rc) {
        cli_error("%s", err.msg);
        return cli_exit_for_input(rc);
    }
    if (old && rep->moved_items) {
        cli_warn("%zu items move from their old split (--keep-conflicts test):",
                 rep->moved_items);
        for (size_t i = 0; i < cat->n; i++)
            if (old[i] >= 0 && old[i] != cat->items[i].split)
                fprintf(stderr, "  %s/%s%s%s: %s -> %s\n", cat->items[i].source,
                        cat->items[i].path, cat->items[i].member[0] ? ":" : "",
                        cat->items[i].member, kiln_split_name(old[i]),
                        kiln_split_name(cat->items[i].split));
    }
    free(old);
    return KILN_EXIT_OK;
}

void cli_report_restored(const char *outdir, long pid)
{
    cli_warn("put the earlier output in %s back in place: kiln process %ld was killed while it "
             "replaced its files",
             outdir, pid);
}

void cli_report_debris(const char *outdir, const struct kiln_debris *d)
{
    if (d->restored)
        cli_report_restored(outdir, d->restored_pid);
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

void cli_print_pack_summary(FILE *f, const char *outdir, const struct kiln_recipe *r,
                            const struct kiln_pack_report *rep, double seconds, bool quiet)
{
    /* Warnings are not part of the summary: they are printed with or without --quiet. */
    const size_t facts = rep->leaks - rep->near_leaks;
    if (facts)
        cli_warn("the audit found %zu %s spanning splits (manifest.json \"audit\"; kiln "
                 "audit %s lists them)",
                 facts, facts == 1 ? "group or duplicate" : "groups or duplicates", outdir);
    if (rep->near_leaks)
        cli_warn("the audit found %zu possible near %s in different splits (manifest.json "
                 "\"audit\"; kiln audit %s shows the evidence)",
                 rep->near_leaks, rep->near_leaks == 1 ? "duplicate" : "duplicates", outdir);
    if (rep->missing_classes)
        cli_warn("%zu %s missing from a split (manifest.json \"audit\")", rep->missing_classes,
                 rep->missing_classes == 1 ? "class is" : "classes are");
    if (quiet)
        return;
    size_t total = 0;
    for (int s = 0; s < KILN_NSPLITS; s++)
        if (rep->present[s]) {
            fprintf(f, "  %-5s %zu %s -> %s/%s\n", kiln_split_name(s), rep->records[s],
                    rep->records[s] == 1 ? "record" : "records", outdir, kiln_manifest_split_files[s]);
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

void cli_print_link_evidence(FILE *f, const struct kiln_nearlink *l)
{
    static const char *const searches[] = {"full", "centre", "turned", "coarse", "coarse centre"};
    fprintf(f, "hash distance %u (centre %u), similarity %.3f, detail %.3f%s", l->c.distance,
            l->c.centre_distance, kiln_nearmatch_global(&l->m) / 1048576.0,
            kiln_nearmatch_local(&l->m) / 1048576.0, l->m.trimmed ? " (label-sized part left out)" : "");
    if (l->m.hue < (1 << 20))
        fprintf(f, ", hue %.3f", l->m.hue / 1048576.0);
    if (l->c.orientation != 1)
        fprintf(f, ", turned (orientation %u)", l->c.orientation);
    if (l->m.warp) {
        unsigned sx, ox, sy, oy, mb;
        kiln_nearfp_warp(l->m.warp, &sx, &ox, &sy, &oy, &mb);
        fprintf(f, ", cropped (%s %u%% x %u%% of the other)", mb ? "second is" : "first is",
                sx * 100 / 40, sy * 100 / 40);
    }
    fputs(", found by", f);
    for (int b = 0, n = 0; b < 5; b++)
        if (l->c.sources >> b & 1)
            fprintf(f, "%s %s", n++ ? "," : "", searches[b]);
    fprintf(f, "; unit rule: %s", kiln_nearlink_verdict_name(l->verdict));
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
        if (lk->kind == KILN_LEAK_NEAR) {
            /* A checked link is strong evidence, not a fact: it is not called a leak. */
            fprintf(f, "possible near duplicate (distance %u, similarity %.3f):\n",
                    lk->near.c.distance, kiln_nearmatch_global(&lk->near.m) / 1048576.0);
        } else {
            fprintf(f, "LEAK %s", kiln_leak_kind_name(lk->kind));
            if (lk->kind == KILN_LEAK_GROUP)
                fprintf(f, " '%s'", first->group);
            fputs(":\n", f);
        }
        for (size_t k = 0; k < lk->count; k++) {
            if (k == limit) {
                fprintf(f, "  ... and %zu more items\n", lk->count - limit);
                break;
            }
            const struct kiln_item *it = &cat->items[a->items[lk->first + k]];
            char rel[4096];
            kiln_catalog_relname(it->path, it->member, rel, sizeof rel);
            fprintf(f, "  %-5s %s/%s\n", kiln_split_name(it->split), it->source, rel);
        }
        if (lk->kind == KILN_LEAK_NEAR) {
            fputs("  evidence: ", f);
            cli_print_link_evidence(f, &lk->near);
            fputc('\n', f);
        }
    }
    if (!quiet) {
        if (a->nleaks)
            fprintf(f, "%zu findings span two splits: %zu groups, %zu identical files, %zu identical "
                       "pictures, %zu identical records, %zu possible near duplicates\n",
                    a->nleaks, a->per_kind[KILN_LEAK_GROUP], a->per_kind[KILN_LEAK_BYTES],
                    a->per_kind[KILN_LEAK_PIXELS], a->per_kind[KILN_LEAK_RECORD],
                    a->per_kind[KILN_LEAK_NEAR]);
        else
            fprintf(f, "audit: nothing spans two splits (groups, identical files, pictures and "
                       "records%s)\n",
                    a->near_checked ? ", checked near duplicates" : "; near duplicates not checked");
    }
}
