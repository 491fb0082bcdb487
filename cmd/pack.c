/* kiln pack: turn a split catalogue into tensor files, statistics and a manifest. */
#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_pack.h"
#include "../formats/files/catalog_csv.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln pack catalog.csv -o OUTDIR --size WxH [options]\n\n"
           "Decodes every item that has a split, orients it, converts channels and depth,\n"
           "resizes it, and writes train.kten, val.kten and test.kten (fixed-size records),\n"
           "per-channel statistics of the training split, items.csv, catalog.csv,\n"
           "manifest.json and SHA256SUMS into OUTDIR. Files appear only when complete.\n\n"
           "options:\n"
           "  -o, --output DIR     output folder (created; must be empty or a kiln output)\n"
           "%s"
           "  -j, --jobs N         worker threads (default: online CPUs)\n"
           "  -q, --quiet          print only problems: no progress, no summary\n"
           "  -h, --help           this text\n",
           cli_recipe_help);
}

static const struct option longopts[] = {
    {"output", required_argument, NULL, 'o'},   {"jobs", required_argument, NULL, 'j'},
    {"quiet", no_argument, NULL, 'q'},          {"help", no_argument, NULL, 'h'},
    {"size", required_argument, NULL, 0},       {"fit", required_argument, NULL, 0},
    {"filter", required_argument, NULL, 0},     {"channels", required_argument, NULL, 0},
    {"depth", required_argument, NULL, 0},      {"dtype", required_argument, NULL, 0},
    {"layout", required_argument, NULL, 0},     {"pad-value", required_argument, NULL, 0},
    {"background", required_argument, NULL, 0}, {"no-dct-scale", no_argument, NULL, 0},
    {"no-orient", no_argument, NULL, 0},        {"hash-paths", no_argument, NULL, 0},
    {"path-key", required_argument, NULL, 'K'},        {"max-pixels", required_argument, NULL, 0},
    {"max-side", required_argument, NULL, 0},   {NULL, 0, NULL, 0},
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
    int rc = kiln_catalog_csv_load(input, &cat, &has_split, &err);
    if (!rc)
        rc = kiln_catalog_index_classes(&cat, &err);
    if (!rc && !has_split)
        rc = kiln_err_set(&err, KILN_EINVAL, "%s has no split column values; run kiln split",
                          input);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return cli_exit_for_input(rc);
    }
    char *rec_path = cli_catalog_record_path(input);
    json_t *rec = NULL;
    struct kiln_err lerr;
    if (!rec_path || kiln_json_load(rec_path, &rec, &lerr) != 0) {
        cli_warn("no record beside %s; the manifest will lack scan and split details", input);
        rec = NULL;
    }
    o->catalog_record = rec;
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
    }
    json_decref(rec);
    free(rec_path);
    kiln_catalog_free(&cat);
    return exit_code;
}

int cmd_pack(int argc, char **argv)
{
    struct kiln_pack_opts o;
    memset(&o, 0, sizeof o);
    kiln_recipe_defaults(&o.recipe);
    o.jobs = cli_default_jobs();
    bool quiet = false;
    uint8_t *key = NULL;
    int c, idx, code = -1;
    while (code < 0 && (c = cli_getopt("pack", argc, argv, "o:j:qh", longopts, &idx)) != -1) {
        switch (c) {
        case 'o': o.outdir = optarg; break;
        case 'j':
            if (cli_parse_jobs(optarg, &o.jobs))
                code = cli_usage_error("pack", "bad --jobs '%s': use 1 to 1024", optarg);
            break;
        case 'q': quiet = true; break;
        case 'K':
            if ((code = cli_read_path_key(optarg, &key, &o.path_key_len)) == 0)
                code = -1; /* read: go on */
            break;
        case 'h':
            help();
            code = KILN_EXIT_OK;
            break;
        case 0:
            if (cli_recipe_option(&o.recipe, longopts[idx].name, optarg) < 0)
                code = KILN_EXIT_USAGE;
            break;
        default: code = KILN_EXIT_USAGE; break; /* CLI_OPT_ERROR, reported */
        }
    }
    if (code < 0 && optind + 1 != argc)
        code = cli_usage_error("pack", "name exactly one catalogue");
    if (code < 0 && !o.outdir)
        code = cli_usage_error("pack", "-o OUTDIR is required");
    if (code < 0) {
        o.path_key = key;
        code = pack(argv[optind], &o, quiet);
    }
    free(key);
    return code;
}
