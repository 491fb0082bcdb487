/* kiln reproduce: rebuild a recorded output from today's sources and say whether every file is
 * byte-identical to the recorded one. */
#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_reproduce.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln reproduce OLD/manifest.json --source DIR... -o NEWDIR [options]\n\n"
           "Finds every item recorded in the old output (its catalog.csv, checked against the\n"
           "manifest) in the sources by its content hash, wherever it now is, reruns the\n"
           "recorded split and recipe, and compares every rebuilt file with the recorded\n"
           "SHA-256. The rebuilt files record the original names, so a reorganised but\n"
           "unchanged source tree rebuilds to identical bytes.\n\n"
           "Exit status: 0 every output identical, 7 something differs, 5 recorded items are\n"
           "missing (nothing rebuilt), 3 the old record is unreadable or damaged.\n\n"
           "options:\n"
           "  -s, --source DIR     a folder or archive to search (repeatable, required)\n"
           "  -o, --output DIR     where to rebuild (required; empty or an earlier output)\n"
           "  --allow-missing      rebuild without the items that cannot be found\n"
           "  --path-key FILE      the key of a --hash-paths output, to tell items in place\n"
           "                       from moved ones (not needed with the public key)\n"
           "  -j, --jobs N         worker threads (default: online CPUs)\n"
           "  -q, --quiet          print only problems: no progress, no summary\n"
           "  -h, --help           this text\n");
}

struct notes {
    bool quiet;
    size_t moved_shown;
};

static void on_note(void *ctx, int kind, const char *msg)
{
    struct notes *n = ctx;
    switch (kind) {
    case KILN_REPRO_LIBRARY: cli_warn("library version differs: %s", msg); break;
    case KILN_REPRO_MISSING: printf("MISSING: %s\n", msg); break;
    case KILN_REPRO_SPLIT: printf("SPLIT DIFFERS: %s\n", msg); break;
    case KILN_REPRO_MOVED:
        if (!n->quiet && n->moved_shown++ < 10)
            printf("moved: %s\n", msg);
        break;
    default: break;
    }
}

/* Everything after option parsing; returns the exit status. */
static int reproduce(struct kiln_reproduce_opts *o, bool quiet)
{
    struct cli_progress prog;
    cli_progress_start(&prog, "reproduce", quiet);
    o->progress = cli_progress_update;
    o->progress_ctx = &prog;
    struct notes n = {quiet, 0};
    struct kiln_reproduce_report rep;
    struct kiln_err err;
    kiln_err_clear(&err);
    int rc = kiln_stage_reproduce(o, on_note, &n, &rep, &err);
    cli_progress_done(&prog);
    cli_report_debris(o->outdir, &rep.debris);
    if (n.moved_shown > 10)
        printf("moved: ... and %zu more\n", n.moved_shown - 10);
    if (rep.places_unknown)
        cli_warn("%s hashes names with a key that was not given (--path-key): items found by "
                 "content cannot be told to be in place or moved",
                 o->manifest);
    if (rc) {
        cli_error("%s", err.msg);
        if (rep.missing && !o->allow_missing)
            return KILN_EXIT_DRIFT;
        return cli_exit_for_input(rc);
    }
    if (!quiet)
        printf("%zu recorded items: %zu found (%zu at a new location), %zu missing\n", rep.items,
               rep.found, rep.moved, rep.missing);
    /* With --quiet only what differs is shown; the exit status gives the verdict. */
    bool header = false;
    for (size_t i = 0; i < rep.noutputs; i++) {
        if (quiet && rep.out[i].identical)
            continue;
        if (!header)
            printf("%-14s %-10s %-16s %-16s\n", "output", "verdict", "recorded", "rebuilt");
        header = true;
        printf("%-14s %-10s %.16s %.16s\n", rep.out[i].name,
               rep.out[i].identical ? "identical" : "DIFFERENT", rep.out[i].recorded,
               rep.out[i].rebuilt);
    }
    if (rep.all_identical) {
        if (!quiet)
            printf("every output is byte-identical to the recorded one (%s)\n", o->outdir);
        return KILN_EXIT_OK;
    }
    if (rep.split_differs)
        printf("%zu items got another split than recorded\n", rep.split_differs);
    if (rep.missing)
        printf("%zu records are missing, so the record indices after them differ\n", rep.missing);
    if (rep.library_differs)
        printf("decoding libraries differ from the recorded ones (see the warnings above)\n");
    printf("not every output is identical (rebuilt in %s)\n", o->outdir);
    return KILN_EXIT_DIFFERS;
}

int cmd_reproduce(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"source", required_argument, NULL, 's'},  {"output", required_argument, NULL, 'o'},
        {"allow-missing", no_argument, NULL, 'A'}, {"jobs", required_argument, NULL, 'j'},
        {"path-key", required_argument, NULL, 'K'}, {"quiet", no_argument, NULL, 'q'},
        {"help", no_argument, NULL, 'h'},          {NULL, 0, NULL, 0}};
    struct kiln_reproduce_opts o;
    memset(&o, 0, sizeof o);
    o.jobs = cli_default_jobs();
    const char **sources = calloc((size_t)argc + 1, sizeof *sources);
    if (!sources) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    uint8_t *key = NULL;
    bool quiet = false;
    int c, code = -1;
    while (code < 0 &&
           (c = cli_getopt("reproduce", argc, argv, "s:o:j:qh", longopts, NULL)) != -1) {
        switch (c) {
        case 's': sources[o.nsources++] = optarg; break;
        case 'o': o.outdir = optarg; break;
        case 'A': o.allow_missing = true; break;
        case 'j':
            if (cli_parse_jobs(optarg, &o.jobs))
                code = cli_usage_error("reproduce", "bad --jobs '%s': use 1 to 1024", optarg);
            break;
        case 'K':
            if ((code = cli_read_path_key(optarg, &key, &o.path_key_len)) == 0)
                code = -1; /* read: go on */
            break;
        case 'q': quiet = true; break;
        case 'h':
            help();
            code = KILN_EXIT_OK;
            break;
        default: code = KILN_EXIT_USAGE; break; /* CLI_OPT_ERROR, reported */
        }
    }
    if (code < 0 && (optind + 1 != argc || !o.nsources || !o.outdir))
        code = cli_usage_error("reproduce", "name the old manifest.json, --source and -o");
    if (code < 0) {
        o.manifest = argv[optind];
        o.sources = sources;
        o.path_key = key;
        code = reproduce(&o, quiet);
    }
    free(key);
    free(sources);
    return code;
}
