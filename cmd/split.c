/* kiln split: assign every usable catalogue row to train, validation or test (docs/split.md)
 * and write the catalogue back with its unit and split columns. */
#include <stdlib.h>
#include <string.h>

#include "../core/audit.h"
#include "../core/pipeline/stage_near.h"
#include "../core/pipeline/stage_record.h"
#include "../core/pipeline/stage_split.h"
#include "../core/pipeline/stage_catalog.h"
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
    rc = kiln_stage_catalog_load(input, false, "", &cat, &had_split, &err);
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
    struct kiln_scan_record *scan = NULL;
    struct kiln_split_record *old = NULL, srec;
    struct kiln_catalog_record crec = {.split = &srec};
    if (!code && kiln_stage_catalog_load_record(input, &scan, &old, &err) != 0)
        cli_warn("no scan record beside %s (%s); the manifest will lack scan details", input,
                 err.msg);
    crec.scan = scan;
    rc = code ? KILN_OK : kiln_record_split(&srec, p, &units, &rep, links, &cat, &err);
    struct kiln_audit audit;
    struct kiln_err aerr = {0};
    const bool audited =
        !code && !rc && kiln_audit_run(&cat, links, NULL, NULL, &audit, &aerr) == 0;
    if (audited) {
        crec.audit = &audit;
        crec.audit_cat = &cat;
    } else if (!code && !rc) {
        cli_warn("the leakage audit could not run: %s (the split is written without it)", aerr.msg);
    }
    if (!code && !rc)
        rc = kiln_stage_catalog_save(output, &cat, &crec, &err);
    if (!code && rc) {
        cli_error("%s", err.msg);
        code = KILN_EXIT_FAILURE;
    } else if (!code) {
        cli_print_split_summary(stdout, &cat, &units, p, &rep, links, quiet);
        if (!quiet && had_split)
            printf("(the catalogue's previous split was replaced)\n");
        if (!quiet)
            printf("split catalogue written to %s\n", output);
        if (audited)
            cli_print_audit(stdout, &audit, &cat, quiet, 20, output);
    }
    if (audited)
        kiln_audit_free(&audit);
    if (!code)
        kiln_split_record_free(&srec);
    kiln_scan_record_free(scan);
    kiln_split_record_free(old);
    free(scan);
    free(old);
    kiln_nearlinks_free(&near);
    kiln_units_free(&units);
    kiln_catalog_free(&cat);
    return code;
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
