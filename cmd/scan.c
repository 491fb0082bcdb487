/* kiln scan: catalogue every candidate file of the sources into catalog.csv (and the record of
 * how, catalog.json beside it). */
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_record.h"
#include "../core/pipeline/stage_catalog.h"
#include "../core/pipeline/stage_near.h"
#include "cmd.h"

static int set_strict(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    *(bool *)a->own = true;
    return 0;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"output", 'o', CLI_VALUE, "FILE", "catalogue to write (required); FILE.json gets the record",
     cli_set_output, "-o catalog.csv is required"},
    CLI_INCLUDE(cli_scan_group),
    CLI_INCLUDE(cli_limit_group),
    {"strict", 0, CLI_SWITCH, NULL, "exit with status 3 if any row is not ok", set_strict},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_scan(int argc, char **argv);

const struct cli_command cli_scan = {
    .name = "scan",
    .summary = "catalogue the images in folders and archives (catalog.csv)",
    .usage = "scan SOURCE... -o catalog.csv [options]",
    .about = "Walks folders (recursively) and archives (zip, tar, tar.gz/bz2/xz/zst, 7z, ...; read\n"
             "in place) and writes one row per candidate file: location, size, SHA-256, format,\n"
             "size in pixels, channels, depth, orientation, label, group, status and reason, and\n"
             "the pixel digest and difference hash used to find duplicates. Files that cannot be\n"
             "used are rows with a status, never dropped. Hidden and system files are counted.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = -1,
    .args_error = "name at least one source folder or archive",
    .main = cmd_scan,
};

/* Everything after option parsing; returns the exit status. */
static int scan(struct cli_args *a, struct kiln_scan_opts *o, const struct kiln_recipe *limits,
                bool strict)
{
    const char *output = a->output;
    const bool quiet = a->quiet;
    int code = cli_check_output_file(output); /* before the scan, not after it */
    if (code)
        return code;
    o->jobs = a->jobs;
    o->limits.max_pixels = limits->max_pixels;
    o->limits.max_side = limits->max_side;
    const int nsrc = a->argc;
    char **sources = cli_sources_new(nsrc, a->argv);
    if (!sources) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    struct cli_progress prog;
    cli_progress_start(&prog, "scan", quiet);
    o->progress = cli_progress_update;
    o->progress_ctx = &prog;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_scan_report rep;
    struct kiln_err err;
    kiln_err_clear(&err);
    /* Fingerprints wait in a scratch file beside the catalogue until it is written. */
    int rc = kiln_near_attach_store_beside(&cat, output, &err);
    const bool store_failed = rc != 0;
    if (!rc)
        rc = kiln_stage_scan((const char *const *)sources, (size_t)nsrc, o, &cat, &rep, &err);
    cli_progress_done(&prog);
    int exit_code = KILN_EXIT_OK;
    if (store_failed) {
        cli_error("%s", err.msg);
        exit_code = KILN_EXIT_FAILURE;
    } else if (rc) {
        cli_error("%s", err.msg);
        exit_code = cli_exit_for_input(rc); /* a source or labels file that cannot be read */
    } else {
        struct kiln_scan_record srec;
        rc = kiln_record_scan(&srec, (const char *const *)sources, (size_t)nsrc, o, &rep, &cat,
                              &err);
        struct kiln_catalog_record crec = {.scan = &srec};
        if (!rc)
            rc = kiln_stage_catalog_save(output, &cat, &crec, &err);
        kiln_scan_record_free(&srec);
        if (rc) {
            cli_error("%s", err.msg);
            exit_code = cli_exit_for(rc) == KILN_EXIT_INPUT ? KILN_EXIT_FAILURE : cli_exit_for(rc);
        } else {
            cli_print_scan_summary(stdout, &cat, &rep, o->group_regex, quiet);
            if (!quiet)
                printf("catalogue written to %s in %.2f s\n", output, cli_elapsed(&prog));
            if (strict && rep.status[KILN_ST_OK] != cat.n) {
                cli_error("%zu of %zu rows are not ok (--strict)", cat.n - rep.status[KILN_ST_OK],
                          cat.n);
                exit_code = KILN_EXIT_INPUT;
            }
        }
    }
    kiln_catalog_free(&cat);
    cli_sources_free(sources, nsrc);
    return exit_code;
}

static int cmd_scan(int argc, char **argv)
{
    struct kiln_scan_opts o;
    kiln_scan_opts_defaults(&o);
    struct kiln_recipe limits; /* only the pixel limits are used */
    kiln_recipe_defaults(&limits);
    bool strict = false;
    struct cli_args a = {.scan = &o, .recipe = &limits, .own = &strict};
    int code = cli_parse(&cli_scan, argc, argv, &a);
    if (code == CLI_GO)
        code = scan(&a, &o, &limits, strict);
    cli_args_free(&a);
    return code;
}
