/* kiln scan: catalogue every candidate file of the sources into catalog.csv (and the record of
 * how, catalog.json beside it). */
#include <getopt.h>
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_record.h"
#include "../formats/files/catalog_csv.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln scan SOURCE... -o catalog.csv [options]\n\n"
           "Walks folders (recursively) and archives (zip, tar, tar.gz/bz2/xz/zst, 7z, ...; read\n"
           "in place) and writes one row per candidate file: location, size, SHA-256, format,\n"
           "size in pixels, channels, depth, orientation, label, group, status and reason, and\n"
           "the pixel digest and difference hash used to find duplicates. Files that cannot be\n"
           "used are rows with a status, never dropped. Hidden and system files are counted.\n\n"
           "options:\n"
           "  -o, --output FILE    catalogue to write (required); FILE.json gets the record\n"
           "%s"
           "  --strict             exit with status 3 if any row is not ok\n"
           "  -j, --jobs N         worker threads (default: online CPUs)\n"
           "  -q, --quiet          print only problems: no progress, no summary\n"
           "  -h, --help           this text\n",
           cli_scan_help);
}

static const struct option longopts[] = {
    {"output", required_argument, NULL, 'o'},  {"jobs", required_argument, NULL, 'j'},
    {"quiet", no_argument, NULL, 'q'},         {"help", no_argument, NULL, 'h'},
    {"strict", no_argument, NULL, 's'},        {"labels", required_argument, NULL, 0},
    {"group-regex", required_argument, NULL, 0}, {"follow-links", no_argument, NULL, 0},
    {"max-pixels", required_argument, NULL, 0}, {"max-side", required_argument, NULL, 0},
    {NULL, 0, NULL, 0},
};

int cmd_scan(int argc, char **argv)
{
    struct kiln_scan_opts o;
    kiln_scan_opts_defaults(&o);
    o.jobs = cli_default_jobs();
    const char *output = NULL;
    bool quiet = false, strict = false;
    int c, idx;
    while ((c = cli_getopt("scan", argc, argv, "o:j:qh", longopts, &idx)) != -1) {
        switch (c) {
        case 'o': output = optarg; break;
        case 'j':
            if (cli_parse_jobs(optarg, &o.jobs))
                return cli_usage_error("scan", "bad --jobs '%s': use 1 to 1024", optarg);
            break;
        case 'q': quiet = true; break;
        case 's': strict = true; break;
        case 'h': help(); return KILN_EXIT_OK;
        case 0:
            if (cli_scan_option(&o, longopts[idx].name, optarg) < 0)
                return KILN_EXIT_USAGE;
            break;
        default: return KILN_EXIT_USAGE; /* CLI_OPT_ERROR, reported */
        }
    }
    if (!output)
        return cli_usage_error("scan", "-o catalog.csv is required");
    if (optind >= argc)
        return cli_usage_error("scan", "name at least one source folder or archive");
    int code = cli_check_output_file(output); /* before the scan, not after it */
    if (code)
        return code;
    int nsrc = argc - optind;
    char **sources = cli_sources_new(nsrc, argv + optind);
    if (!sources) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    struct cli_progress prog;
    cli_progress_start(&prog, "scan", quiet);
    o.progress = cli_progress_update;
    o.progress_ctx = &prog;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_scan_report rep;
    struct kiln_err err;
    kiln_err_clear(&err);
    int rc = kiln_stage_scan((const char *const *)sources, (size_t)nsrc, &o, &cat, &rep, &err);
    cli_progress_done(&prog);
    int exit_code = KILN_EXIT_OK;
    if (rc) {
        cli_error("%s", err.msg);
        exit_code = cli_exit_for_input(rc); /* a source or labels file that cannot be read */
    } else {
        rc = kiln_catalog_csv_save(output, &cat, &err);
        char *rec_path = cli_catalog_record_path(output);
        json_t *rec = json_object();
        json_object_set_new(rec, "catalog", json_string(output));
        json_object_set_new(rec, "scan",
                            kiln_scan_record((const char *const *)sources, (size_t)nsrc, &o,
                                             &rep, &cat));
        json_object_set_new(rec, "split", json_null());
        if (!rc)
            rc = rec_path ? kiln_json_save(rec_path, rec, &err)
                          : kiln_err_set(&err, KILN_ENOMEM, "out of memory");
        json_decref(rec);
        free(rec_path);
        if (rc) {
            cli_error("%s", err.msg);
            exit_code = cli_exit_for(rc) == KILN_EXIT_INPUT ? KILN_EXIT_FAILURE : cli_exit_for(rc);
        } else {
            cli_print_scan_summary(stdout, &cat, &rep, o.group_regex, quiet);
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
