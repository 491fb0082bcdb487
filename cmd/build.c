/* kiln build: scan, split and pack in one run, with the options of all three. */
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/record_pool.h"
#include "../core/pipeline/stage_near.h"
#include "../core/pipeline/stage_pack.h"
#include "../core/pipeline/stage_record.h"
#include "../core/pipeline/stage_split.h"
#include "cmd.h"

static const struct cli_opt opts[] = {
    CLI_HEADING("scan options:"),
    CLI_INCLUDE(cli_scan_group),
    CLI_INCLUDE(cli_limit_group),
    CLI_HEADING("split options:"),
    CLI_INCLUDE(cli_split_group),
    CLI_HEADING("pack options:"),
    CLI_INCLUDE(cli_recipe_group),
    CLI_HEADING(""),
    {"output", 'o', CLI_VALUE, "DIR", "output folder (created; must be empty or a kiln output)",
     cli_set_output, "-o OUTDIR is required"},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_build(int argc, char **argv);

const struct cli_command cli_build = {
    .name = "build",
    .summary = "scan, split and pack in one run",
    .usage = "build SOURCE... -o OUTDIR --size WxH --seed N [options]",
    .about = "Runs scan, split and pack in one go and writes everything pack writes into OUTDIR\n"
             "(catalog.csv included).\n",
    .opts = opts,
    .min_args = 1,
    .max_args = -1,
    .args_error = "name at least one source folder or archive",
    .main = cmd_build,
};

/* Everything after option parsing; returns the exit status. */
static int build(const struct cli_args *a, struct kiln_scan_opts *so,
                 struct kiln_split_params *sp, struct kiln_pack_opts *po)
{
    struct kiln_err err;
    kiln_err_clear(&err);
    const bool quiet = a->quiet;
    if (kiln_recipe_finish(&po->recipe, &err))
        return cli_usage_error("build", "%s", err.msg);
    po->outdir = a->output;
    po->path_key = a->path_key;
    po->path_key_len = a->path_key_len;
    so->jobs = po->jobs = a->jobs;
    const int nsrc = a->argc;
    char **sources = cli_sources_new(nsrc, a->argv);
    if (!sources) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    /* One decode per image: scan prepares the records into a pool that pack lays out. */
    struct kiln_record_pool pool;
    int prc = kiln_record_pool_open(&pool, po->outdir, &po->recipe, &err);
    if (prc) {
        cli_error("%s", err.msg);
        cli_sources_free(sources, nsrc);
        return cli_exit_for(prc);
    }
    cli_report_debris(po->outdir, &pool.debris);
    so->pool = po->pool = &pool;
    so->limits.max_pixels = po->recipe.max_pixels;
    so->limits.max_side = po->recipe.max_side;
    struct cli_progress prog;
    cli_progress_start(&prog, "scan", quiet);
    so->progress = cli_progress_update;
    so->progress_ctx = &prog;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_scan_report srep;
    struct kiln_units units;
    memset(&units, 0, sizeof units);
    struct kiln_split_report sprep;
    struct kiln_scan_record scan_rec;
    struct kiln_split_record split_rec;
    memset(&scan_rec, 0, sizeof scan_rec);
    memset(&split_rec, 0, sizeof split_rec);
    struct kiln_nearlinks near;
    memset(&near, 0, sizeof near);
    const struct kiln_nearlinks *links = sp->near ? &near : NULL;
    int exit_code = KILN_EXIT_OK;
    /* The fingerprints wait in a scratch file in the output folder, not in memory. */
    int rc = kiln_near_attach_store(&cat, po->outdir, &err);
    if (rc) {
        cli_error("%s", err.msg);
        exit_code = KILN_EXIT_FAILURE;
        rc = -1; /* reported */
    }
    if (!rc)
        rc = kiln_stage_scan((const char *const *)sources, (size_t)nsrc, so, &cat, &srep, &err);
    cli_progress_done(&prog);
    const bool scan_failed = rc != 0;
    if (!rc)
        cli_print_scan_summary(stdout, &cat, &srep, so->group_regex, quiet);
    if (!rc)
        rc = kiln_record_scan(&scan_rec, (const char *const *)sources, (size_t)nsrc, so, &srep,
                              &cat, &err);
    if (!rc && (exit_code = cli_split_catalog(&cat, sp, a->jobs, &near, &units, &sprep)) != 0)
        rc = -1; /* already reported */
    if (!rc) {
        cli_print_split_summary(stdout, &cat, &units, sp, &sprep, links, quiet);
        rc = kiln_record_split(&split_rec, sp, &units, &sprep, links, &cat, &err);
        po->scan = &scan_rec;
        po->split = &split_rec;
        po->near = links; /* the audit reuses the split's checked links */
        po->near_params = sp->near_params;
    }
    if (!rc) {
        cli_progress_start(&prog, "pack", quiet);
        po->progress = cli_progress_update;
        po->progress_ctx = &prog;
        struct kiln_pack_report prep;
        rc = kiln_stage_pack(&cat, po, &prep, &err);
        cli_progress_done(&prog);
        if (!rc)
            cli_print_pack_summary(stdout, po->outdir, &po->recipe, &prep, cli_elapsed(&prog),
                                   quiet);
    }
    if (rc > 0) {
        cli_error("%s", err.msg);
        exit_code = scan_failed ? cli_exit_for_input(rc) : cli_exit_for(rc);
    }
    kiln_record_pool_close(&pool);
    kiln_scan_record_free(&scan_rec);
    kiln_split_record_free(&split_rec);
    kiln_nearlinks_free(&near);
    kiln_units_free(&units);
    kiln_catalog_free(&cat);
    cli_sources_free(sources, nsrc);
    return exit_code;
}

static int cmd_build(int argc, char **argv)
{
    struct kiln_scan_opts so;
    kiln_scan_opts_defaults(&so);
    struct kiln_split_params sp;
    kiln_stage_split_defaults(&sp);
    struct kiln_pack_opts po;
    memset(&po, 0, sizeof po);
    kiln_recipe_defaults(&po.recipe);
    struct cli_args a = {.scan = &so, .split = &sp, .recipe = &po.recipe};
    int code = cli_parse(&cli_build, argc, argv, &a);
    if (code == CLI_GO)
        code = build(&a, &so, &sp, &po);
    cli_args_free(&a);
    return code;
}
