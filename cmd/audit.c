/* kiln audit: report every group, identical file, identical picture and identical record that
 * spans two splits, every checked near-duplicate link between two splits with its evidence,
 * and classes missing from a split. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/audit.h"
#include "../core/checked.h"
#include "../core/pipeline/stage_catalog.h"
#include "../core/pipeline/stage_near.h"
#include "../core/pipeline/stage_outrecords.h"
#include "../core/pipeline/stage_record.h"
#include "../core/pipeline/stage_split.h"
#include "../formats/files/catalog_csv.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

/* The audit's own options: the near-duplicate settings given (applied over the recorded ones)
 * and --no-near. */
struct audit_opts {
    bool no_near;
    const char *radius, *limit;
};

static int set_no_near(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    ((struct audit_opts *)a->own)->no_near = true;
    return 0;
}

/* Checked now (a bad value is exit 2 before any work), applied after the record is read. */
static int set_radius(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    int code = cli_set_near_radius(a, o, v);
    if (!code)
        ((struct audit_opts *)a->own)->radius = v;
    return code;
}

static int set_limit(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    int code = cli_set_near_limit(a, o, v);
    if (!code)
        ((struct audit_opts *)a->own)->limit = v;
    return code;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"no-near", 0, CLI_SWITCH, NULL, "check groups and identical content only", set_no_near},
    {"near-radius", 0, CLI_VALUE, "BITS", "hash distance of the candidate search (0 to 16)",
     set_radius},
    {"near-unit-limit", 0, CLI_VALUE, "N", "the unit rule's most pictures per unit (at least 2)",
     set_limit},
    CLI_OPT_JOBS,
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_audit(int argc, char **argv);

const struct cli_command cli_audit = {
    .name = "audit",
    .summary = "report groups, duplicates and near duplicates that span splits",
    .usage = "audit OUTDIR | catalog.csv [options]",
    .about = "Lists every group (one specimen), set of identical files, identical decoded\n"
             "pictures and identical records whose items lie in different splits, and every pair\n"
             "of pictures in different splits that the near-duplicate check links (candidates\n"
             "from DCT hashes, each checked on pixels; docs/near-duplicates.md) with its\n"
             "evidence, and warns about classes missing from a split. The check uses the\n"
             "settings the split recorded (manifest.json or catalog.json), else the defaults.\n"
             "For an output folder the records of its tensor files are compared too.\n"
             "Exit status 6 when anything spans two splits, 0 otherwise.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name one output folder or catalogue",
    .main = cmd_audit,
};

/* The split record that goes with the catalogue: manifest.json in an output folder, else the
 * catalogue's catalog.json; NULL when there is none. */
static struct kiln_split_record *split_record(const char *arg, bool dir, const char *path)
{
    char *rec = dir ? kiln_pipeline_path(arg, KILN_FILE_MANIFEST) : kiln_stage_catalog_record_path(path);
    json_t *j = NULL;
    struct kiln_err e;
    if (!rec || kiln_json_load(rec, &j, &e) != 0)
        j = NULL;
    free(rec);
    struct kiln_scan_record *scan = NULL;
    struct kiln_split_record *split = NULL;
    if (j && kiln_manifest_read_records(j, &scan, &split, &e) != 0)
        split = NULL; /* unreadable records: the defaults, as without any */
    kiln_scan_record_free(scan);
    free(scan);
    json_decref(j);
    return split;
}

/* Everything after option parsing; returns the exit status. */
static int audit(const struct cli_args *args, const struct audit_opts *ao)
{
    const char *arg = args->argv[0];
    struct stat st;
    char *path = NULL;
    const bool dir = stat(arg, &st) == 0 && S_ISDIR(st.st_mode);
    if (dir) {
        path = kiln_pipeline_path(arg, KILN_FILE_CATALOG);
    } else {
        path = strdup(arg);
    }
    if (!path) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_err err;
    kiln_err_clear(&err);
    bool has_split;
    int rc = ao->no_near ? KILN_OK : kiln_near_attach_store_beside(&cat, path, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        free(path);
        return KILN_EXIT_FAILURE;
    }
    rc = kiln_catalog_csv_load(path, &cat, &has_split, &err);
    if (!rc)
        rc = kiln_catalog_index_classes(&cat, &err);
    if (!rc && !has_split)
        rc = kiln_err_set(&err, KILN_EINVAL, "%s has no split to audit; run kiln split", path);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        free(path);
        return cli_exit_for_input(rc);
    }
    /* The near-duplicate check as the split made it, with the options' changes. */
    struct kiln_split_params sp;
    kiln_stage_split_defaults(&sp);
    struct kiln_split_record *srec = split_record(arg, dir, path);
    bool recorded_on;
    kiln_near_params_from_record(srec, &recorded_on, &sp.near_params);
    kiln_split_record_free(srec);
    free(srec);
    struct cli_args apply = {.split = &sp};
    if (ao->radius)
        cli_set_near_radius(&apply, &opts[2], ao->radius);
    if (ao->limit)
        cli_set_near_limit(&apply, &opts[3], ao->limit);
    struct kiln_nearlinks near;
    memset(&near, 0, sizeof near);
    if (!ao->no_near)
        rc = kiln_stage_near(&cat, &sp.near_params, args->jobs, &near, &err);
    /* An output folder: its records themselves, compared across splits. */
    uint8_t(*records)[KILN_RECORD_DIGEST_LEN] = NULL;
    if (!rc && dir) {
        records = kiln_alloc_array(cat.n ? cat.n : 1, sizeof *records);
        rc = records ? kiln_output_record_digests(arg, &cat, records, &err)
                     : kiln_err_set(&err, KILN_ENOMEM, "out of memory");
    }
    struct kiln_audit a;
    if (!rc)
        rc = kiln_audit_run(&cat, ao->no_near ? NULL : &near,
                            (const uint8_t(*)[KILN_RECORD_DIGEST_LEN])records, NULL, &a, &err);
    kiln_nearlinks_free(&near);
    free(records);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        free(path);
        return rc == KILN_ECORRUPT || rc == KILN_EIO ? KILN_EXIT_INPUT : KILN_EXIT_FAILURE;
    }
    cli_print_audit(stdout, &a, &cat, args->quiet, SIZE_MAX, "");
    cli_check_shortcuts(stdout, &cat, true, args->quiet);
    for (int s = 0; s < KILN_NSPLITS; s++)
        for (size_t k = 0; k < a.nclasses; k++)
            if (a.missing[(size_t)s * a.nclasses + k])
                cli_warn("class '%s' has no item in the %s split", cat.classes[k],
                         kiln_split_name(s));
    int exit_code = a.nleaks ? KILN_EXIT_LEAK : KILN_EXIT_OK;
    kiln_audit_free(&a);
    kiln_catalog_free(&cat);
    free(path);
    return exit_code;
}

static int cmd_audit(int argc, char **argv)
{
    struct audit_opts ao = {false, NULL, NULL};
    struct kiln_split_params check; /* the options' values are checked on this */
    kiln_stage_split_defaults(&check);
    struct cli_args a = {.own = &ao, .split = &check};
    int code = cli_parse(&cli_audit, argc, argv, &a);
    if (code == CLI_GO)
        code = audit(&a, &ao);
    cli_args_free(&a);
    return code;
}
