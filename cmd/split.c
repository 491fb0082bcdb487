/* kiln split: assign every usable catalogue row to train, validation or test (docs/split.md)
 * and write the catalogue back with its unit and split columns. */
#include <stdlib.h>
#include <string.h>

#include "../core/audit.h"
#include "../core/pipeline/stage_near.h"
#include "../core/pipeline/stage_record.h"
#include "../core/pipeline/stage_split.h"
#include "../formats/files/catalog_csv.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    CLI_INCLUDE(cli_split_group),
    {"output", 'o', CLI_VALUE, "FILE", "write the split catalogue here instead of in place",
     cli_set_output},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_split(int argc, char **argv);

const struct cli_command cli_split = {
    .name = "split",
    .summary = "assign train/validation/test splits to a catalogue",
    .usage = "split catalog.csv --seed N [options]",
    .about = "Groups items that must stay together (same group, same file bytes, same decoded\n"
             "pixels, near duplicates checked on pixels) into units and deals the units to\n"
             "splits by a keyed hash of the seed and the unit's content, never by paths or row\n"
             "order. Writes the catalogue back (or to -o) with unit and split columns and\n"
             "records the parameters in catalog.json.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name exactly one catalogue",
    .main = cmd_split,
};

/* Everything after option parsing; returns the exit status. */
static int split(const struct cli_args *a, struct kiln_split_params *p)
{
    struct kiln_err err;
    const bool quiet = a->quiet;
    const char *output = a->output;
    const char *input = a->argv[0];
    if (!output)
        output = input;
    int code = cli_check_output_file(output);
    if (code)
        return code;
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    bool had_split;
    /* The fingerprints wait in a scratch file beside the output, not in memory. */
    int rc = kiln_near_attach_store_beside(&cat, output, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return KILN_EXIT_FAILURE;
    }
    rc = kiln_catalog_csv_load(input, &cat, &had_split, &err);
    if (!rc)
        rc = kiln_catalog_index_classes(&cat, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return cli_exit_for_input(rc);
    }
    struct kiln_units units;
    memset(&units, 0, sizeof units);
    struct kiln_split_report rep;
    struct kiln_nearlinks near;
    memset(&near, 0, sizeof near);
    const struct kiln_nearlinks *links = p->near ? &near : NULL;
    code = cli_split_catalog(&cat, p, a->jobs, &near, &units, &rep);
    if (code) {
        kiln_nearlinks_free(&near);
        kiln_units_free(&units);
        kiln_catalog_free(&cat);
        return code;
    }
    char *in_rec = cli_catalog_record_path(input), *out_rec = cli_catalog_record_path(output);
    json_t *rec = NULL;
    struct kiln_err lerr;
    if (in_rec && kiln_json_load(in_rec, &rec, &lerr) != 0) {
        cli_warn("no scan record beside %s (%s); the manifest will lack scan details", input,
                 lerr.msg);
        rec = NULL;
    }
    if (!rec)
        rec = json_object();
    json_object_set_new(rec, "catalog", json_string(output));
    json_t *srec = kiln_split_record(p, &units, &rep, links, &cat);
    struct kiln_audit audit;
    struct kiln_err aerr = {0};
    bool audited = kiln_audit_run(&cat, links, NULL, NULL, &audit, &aerr) == 0;
    if (audited)
        json_object_set_new(srec, "audit", kiln_audit_record(&audit, &cat));
    else
        cli_warn("the leakage audit could not run: %s (the split is written without it)", aerr.msg);
    json_object_set_new(rec, "split", srec);
    rc = kiln_catalog_csv_save(output, &cat, &err);
    if (!rc)
        rc = out_rec ? kiln_json_save(out_rec, rec, &err) : kiln_err_set(&err, KILN_ENOMEM, "oom");
    int exit_code = KILN_EXIT_OK;
    if (rc) {
        cli_error("%s", err.msg);
        exit_code = KILN_EXIT_FAILURE;
    } else {
        cli_print_split_summary(stdout, &cat, &units, p, &rep, links, quiet);
    }
    if (!rc && !quiet) {
        if (had_split)
            printf("(the catalogue's previous split was replaced)\n");
        printf("split catalogue written to %s\n", output);
    }
    if (audited) {
        if (exit_code == KILN_EXIT_OK)
            cli_print_audit(stdout, &audit, &cat, quiet, 20, output);
        kiln_audit_free(&audit);
    }
    json_decref(rec);
    free(in_rec);
    free(out_rec);
    kiln_nearlinks_free(&near);
    kiln_units_free(&units);
    kiln_catalog_free(&cat);
    return exit_code;
}

static int cmd_split(int argc, char **argv)
{
    struct kiln_split_params p;
    kiln_stage_split_defaults(&p);
    struct cli_args a = {.split = &p};
    int code = cli_parse(&cli_split, argc, argv, &a);
    if (code == CLI_GO)
        code = split(&a, &p);
    cli_args_free(&a);
    return code;
}
