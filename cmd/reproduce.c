/* kiln reproduce: rebuild a recorded output from today's sources and say whether every file is
 * byte-identical to the recorded one. */
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_reproduce.h"
#include "cmd.h"

static int set_allow_missing(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    ((struct kiln_reproduce_opts *)a->own)->allow_missing = true;
    return 0;
}

static const char args_error[] = "name the old manifest.json, --source and -o";

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"source", 's', CLI_VALUE, "DIR", "a folder or archive to search (repeatable, required)",
     cli_set_source, args_error},
    {"output", 'o', CLI_VALUE, "DIR", "where to rebuild (required; empty or an earlier output)",
     cli_set_output, args_error},
    {"allow-missing", 0, CLI_SWITCH, NULL, "rebuild without the items that cannot be found",
     set_allow_missing},
    {"path-key", 0, CLI_VALUE, "FILE",
     "the key of a --hash-paths output, to tell items in place\n"
     "from moved ones (not needed with the public key)",
     cli_set_path_key},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_reproduce(int argc, char **argv);

const struct cli_command cli_reproduce = {
    .name = "reproduce",
    .summary = "rebuild a recorded output from today's sources and compare",
    .usage = "reproduce OLD/manifest.json --source DIR... -o NEWDIR [options]",
    .about = "Finds every item recorded in the old output (its catalog.csv, checked against the\n"
             "manifest) in the sources by its content hash, wherever it now is, reruns the\n"
             "recorded split and recipe, and compares every rebuilt file with the recorded\n"
             "SHA-256. The rebuilt files record the original names, so a reorganised but\n"
             "unchanged source tree rebuilds to identical bytes.\n\n"
             "Exit status: 0 every output identical, 7 something differs, 5 recorded items are\n"
             "missing (nothing rebuilt), 3 the old record is unreadable or damaged.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = args_error,
    .main = cmd_reproduce,
};

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

static int cmd_reproduce(int argc, char **argv)
{
    struct kiln_reproduce_opts o;
    memset(&o, 0, sizeof o);
    struct cli_args a = {.own = &o};
    int code = cli_parse(&cli_reproduce, argc, argv, &a);
    if (code == CLI_GO) {
        o.manifest = a.argv[0];
        o.sources = a.sources;
        o.nsources = a.nsources;
        o.outdir = a.output;
        o.jobs = a.jobs;
        o.path_key = a.path_key;
        o.path_key_len = a.path_key_len;
        code = reproduce(&o, a.quiet);
    }
    cli_args_free(&a);
    return code;
}
