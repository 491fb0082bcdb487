/* kiln build: scan, split and pack in one run, with the options of all three. */
#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/record_pool.h"
#include "../core/pipeline/stage_pack.h"
#include "../core/pipeline/stage_record.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln build SOURCE... -o OUTDIR --size WxH --seed N [options]\n\n"
           "Runs scan, split and pack in one go and writes everything pack writes into OUTDIR\n"
           "(catalog.csv included).\n\n"
           "scan options:\n%s\nsplit options:\n%s\npack options:\n%s\n"
           "  -o, --output DIR     output folder (created; must be empty or a kiln output)\n"
           "  -j, --jobs N         worker threads (default: online CPUs)\n"
           "  -q, --quiet          print only problems: no progress, no summary\n"
           "  -h, --help           this text\n",
           cli_scan_help, cli_split_help, cli_recipe_help);
}

static const struct option longopts[] = {
    {"output", required_argument, NULL, 'o'},   {"jobs", required_argument, NULL, 'j'},
    {"quiet", no_argument, NULL, 'q'},          {"help", no_argument, NULL, 'h'},
    {"labels", required_argument, NULL, 0},     {"group-regex", required_argument, NULL, 0},
    {"follow-links", no_argument, NULL, 0},     {"max-pixels", required_argument, NULL, 0},
    {"max-side", required_argument, NULL, 0},   {"seed", required_argument, NULL, 0},
    {"ratios", required_argument, NULL, 0},     {"stratify", no_argument, NULL, 0},
    {"mode", required_argument, NULL, 0},       {"size", required_argument, NULL, 0},
    {"merge-near-duplicates", optional_argument, NULL, 0},
    {"keep", required_argument, NULL, 0},       {"keep-conflicts", required_argument, NULL, 0},
    {"fit", required_argument, NULL, 0},        {"filter", required_argument, NULL, 0},
    {"channels", required_argument, NULL, 0},   {"depth", required_argument, NULL, 0},
    {"dtype", required_argument, NULL, 0},      {"layout", required_argument, NULL, 0},
    {"pad-value", required_argument, NULL, 0},  {"background", required_argument, NULL, 0},
    {"no-dct-scale", no_argument, NULL, 0},     {"no-orient", no_argument, NULL, 0},        {"hash-paths", no_argument, NULL, 0},
    {"path-key", required_argument, NULL, 'K'},
    {NULL, 0, NULL, 0},
};

int cmd_build(int argc, char **argv)
{
    struct kiln_scan_opts so;
    kiln_scan_opts_defaults(&so);
    struct kiln_split_params sp;
    cli_split_defaults(&sp);
    struct kiln_pack_opts po;
    memset(&po, 0, sizeof po);
    kiln_recipe_defaults(&po.recipe);
    struct kiln_err err;
    kiln_err_clear(&err);
    bool quiet = false, seeded = false;
    uint8_t *key = NULL;
    unsigned jobs = cli_default_jobs();
    int c, idx, code = -1;
    while (code < 0 && (c = cli_getopt("build", argc, argv, "o:j:qh", longopts, &idx)) != -1) {
        switch (c) {
        case 'o': po.outdir = optarg; break;
        case 'j':
            if (cli_parse_jobs(optarg, &jobs))
                code = cli_usage_error("build", "bad --jobs '%s': use 1 to 1024", optarg);
            break;
        case 'q': quiet = true; break;
        case 'K':
            if ((code = cli_read_path_key(optarg, &key, &po.path_key_len)) == 0)
                code = -1; /* read: go on */
            po.path_key = key;
            break;
        case 'h':
            help();
            code = KILN_EXIT_OK;
            break;
        case 0: {
            const char *name = longopts[idx].name;
            int r = cli_scan_option(&so, name, optarg);
            if (r == 0)
                r = cli_split_option(&sp, name, optarg);
            if (r == 0)
                r = cli_recipe_option(&po.recipe, name, optarg);
            if (r < 0)
                code = KILN_EXIT_USAGE;
            seeded |= strcmp(name, "seed") == 0;
            /* The pixel limits are shared by scan and pack. */
            if (r > 0 && (strcmp(name, "max-pixels") == 0 || strcmp(name, "max-side") == 0))
                cli_recipe_option(&po.recipe, name, optarg);
            break;
        }
        default: code = KILN_EXIT_USAGE; break; /* CLI_OPT_ERROR, reported */
        }
    }
    if (code < 0 && !po.outdir)
        code = cli_usage_error("build", "-o OUTDIR is required");
    if (code < 0 && !seeded)
        code = cli_usage_error("build", "--seed N is required, so the split can be rebuilt");
    if (code < 0 && optind >= argc)
        code = cli_usage_error("build", "name at least one source folder or archive");
    if (code < 0 && kiln_recipe_finish(&po.recipe, &err))
        code = cli_usage_error("build", "%s", err.msg);
    if (code >= 0) {
        free(key);
        return code;
    }
    so.jobs = po.jobs = jobs;
    int nsrc = argc - optind;
    char **sources = cli_sources_new(nsrc, argv + optind);
    if (!sources) {
        cli_error("out of memory");
        free((void *)po.path_key);
        return KILN_EXIT_FAILURE;
    }
    /* One decode per image: scan prepares the records into a pool that pack lays out. */
    struct kiln_record_pool pool;
    int prc = kiln_record_pool_open(&pool, po.outdir, &po.recipe, &err);
    if (prc) {
        cli_error("%s", err.msg);
        cli_sources_free(sources, nsrc);
        free((void *)po.path_key);
        return cli_exit_for(prc);
    }
    cli_report_debris(po.outdir, &pool.debris);
    so.pool = po.pool = &pool;
    so.limits.max_pixels = po.recipe.max_pixels;
    so.limits.max_side = po.recipe.max_side;
    struct cli_progress prog;
    cli_progress_start(&prog, "scan", quiet);
    so.progress = cli_progress_update;
    so.progress_ctx = &prog;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_scan_report srep;
    struct kiln_units units;
    memset(&units, 0, sizeof units);
    struct kiln_split_report sprep;
    json_t *rec = json_object();
    int rc = kiln_stage_scan((const char *const *)sources, (size_t)nsrc, &so, &cat, &srep, &err);
    cli_progress_done(&prog);
    const bool scan_failed = rc != 0;
    if (!rc) {
        json_object_set_new(rec, "scan", kiln_scan_record((const char *const *)sources,
                                                          (size_t)nsrc, &so, &srep, &cat));
        cli_print_scan_summary(stdout, &cat, &srep, so.group_regex, quiet);
    }
    int exit_code = KILN_EXIT_OK;
    if (!rc && (exit_code = cli_split_catalog(&cat, &sp, &units, &sprep)) != 0)
        rc = -1; /* already reported */
    if (!rc) {
        cli_print_split_summary(stdout, &cat, &units, &sp, &sprep, quiet);
        json_object_set_new(rec, "split", kiln_split_record(&sp, &units, &sprep));
        po.catalog_record = rec;
        cli_progress_start(&prog, "pack", quiet);
        po.progress = cli_progress_update;
        po.progress_ctx = &prog;
        struct kiln_pack_report prep;
        rc = kiln_stage_pack(&cat, &po, &prep, &err);
        cli_progress_done(&prog);
        if (!rc)
            cli_print_pack_summary(stdout, po.outdir, &po.recipe, &prep, cli_elapsed(&prog),
                                   quiet);
    }
    if (rc > 0) {
        cli_error("%s", err.msg);
        exit_code = scan_failed ? cli_exit_for_input(rc) : cli_exit_for(rc);
    }
    kiln_record_pool_close(&pool);
    json_decref(rec);
    kiln_units_free(&units);
    kiln_catalog_free(&cat);
    cli_sources_free(sources, nsrc);
    free((void *)po.path_key);
    return exit_code;
}
