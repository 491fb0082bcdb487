/* kiln pack: turn a split catalogue into tensor files, statistics and a manifest. */
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_near.h"
#include "../core/pipeline/stage_pack.h"
#include "../core/pipeline/stage_catalog.h"
#include "../core/pipeline/stage_record.h"
#include "cmd.h"

static int set_allow_outside_paths(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    ((struct kiln_pack_opts *)a->own)->allow_outside_paths = true;
    return 0;
}

static int set_allow_identical(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    ((struct kiln_pack_opts *)a->own)->allow_identical = true;
    return 0;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"output", 'o', CLI_VALUE, "DIR", "output folder (created; must be empty or a kiln output)",
     cli_set_output, "-o OUTDIR is required"},
    CLI_INCLUDE(cli_recipe_group),
    CLI_INCLUDE(cli_limit_group),
    {"allow-outside-paths", 0, CLI_SWITCH, NULL,
     "read catalogue rows whose path leaves its source (absolute,\n"
     "or with ..); scan never writes them, so they are refused",
     set_allow_outside_paths},
    {"allow-identical-records", 0, CLI_SWITCH, NULL,
     "pack even when records in two splits are identical (copies\n"
     "the split did not keep together); the audit lists them.\n"
     "Without it such a pack stops (exit 6) naming two of them",
     set_allow_identical},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_pack(int argc, char **argv);

const struct cli_command cli_pack = {
    .name = "pack",
    .summary = "decode, resize and write tensor files, statistics and a manifest",
    .usage = "pack catalog.csv -o OUTDIR --size WxH [options]",
    .about = "Decodes every item that has a split, orients it, converts channels and depth,\n"
             "resizes it, and writes train.kten, val.kten and test.kten (fixed-size records),\n"
             "per-channel statistics of the training split, items.csv, catalog.csv,\n"
             "manifest.json and SHA256SUMS into OUTDIR. Files appear only when complete.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name exactly one catalogue",
    .main = cmd_pack,
};

/* Everything after option parsing; returns the exit status. */
static int pack(const char *input, struct kiln_pack_opts *o, bool quiet)
{
    struct kiln_err err;
    kiln_err_clear(&err);
    if (kiln_recipe_finish(&o->recipe, &err))
        return cli_usage_error("pack", "%s", err.msg);
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    bool has_split;
    /* The fingerprints wait in a scratch file beside the catalogue, not in memory. */
    int rc = kiln_near_attach_store_beside(&cat, input, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return KILN_EXIT_FAILURE;
    }
    rc = kiln_stage_catalog_load(input, true, "column values", &cat, &has_split, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return cli_exit_for_input(rc);
    }
    struct kiln_scan_record *scan = NULL;
    struct kiln_split_record *split = NULL;
    struct kiln_err lerr;
    if (kiln_stage_catalog_load_record(input, &scan, &split, &lerr) != 0)
        cli_warn("no record beside %s (%s); the manifest will lack scan and split details", input,
                 lerr.msg);
    o->scan = scan;
    o->split = split;
    /* The audit checks near duplicates with the split's settings (the defaults when it had
     * none, or the check was off). */
    bool near_on;
    kiln_near_params_from_record(split, &near_on, &o->near_params);
    struct cli_progress prog;
    cli_progress_start(&prog, "pack", quiet);
    o->progress = cli_progress_update;
    o->progress_ctx = &prog;
    struct kiln_pack_report rep;
    rc = kiln_stage_pack(&cat, o, &rep, &err);
    cli_progress_done(&prog);
    cli_report_debris(o->outdir, &rep.debris);
    int exit_code = KILN_EXIT_OK;
    if (rc) {
        cli_error("%s", err.msg);
        exit_code = cli_exit_for(rc);
    } else {
        cli_print_pack_summary(stdout, o->outdir, &o->recipe, &rep, cli_elapsed(&prog), quiet);
        if (!quiet)
            cli_print_class_table(stdout, &cat, NULL, rep.present[KILN_SPLIT_VAL]);
    }
    kiln_scan_record_free(scan);
    kiln_split_record_free(split);
    free(scan);
    free(split);
    kiln_catalog_free(&cat);
    return exit_code;
}

static int cmd_pack(int argc, char **argv)
{
    struct kiln_pack_opts o;
    memset(&o, 0, sizeof o);
    kiln_recipe_defaults(&o.recipe);
    struct cli_args a = {.recipe = &o.recipe, .own = &o};
    int code = cli_parse(&cli_pack, argc, argv, &a);
    if (code == CLI_GO) {
        o.outdir = a.output;
        o.jobs = a.jobs;
        o.path_key = a.path_key;
        o.path_key_len = a.path_key_len;
        code = pack(a.argv[0], &o, a.quiet);
    }
    cli_args_free(&a);
    return code;
}
