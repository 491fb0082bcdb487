/* kiln audit: report every group, identical file, identical picture and near-identical picture
 * that spans two splits, and classes missing from a split. */
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_catalog.h"
#include "cmd.h"

static int set_near(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    long n = strtol(v, &end, 10);
    if (!*v || *end || n < 0 || n > KILN_AUDIT_NEAR_BITS_MAX)
        return cli_bad_value(o, v, "use a number of bits from 0 to 16");
    *(int *)a->own = (int)n;
    return 0;
}

static int set_no_near(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    *(int *)a->own = -1;
    return 0;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"near", 0, CLI_VALUE, "BITS",
     "near-duplicate radius in bits of the difference hash\n(default 6, 0 to 16)", set_near},
    {"no-near", 0, CLI_SWITCH, NULL, "check groups and identical content only", set_no_near},
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_audit(int argc, char **argv);

const struct cli_command cli_audit = {
    .name = "audit",
    .summary = "report groups, duplicates and near duplicates that span splits",
    .usage = "audit OUTDIR | catalog.csv [options]",
    .about = "Lists every group (one specimen), set of identical files, set of identical decoded\n"
             "pictures and cluster of near-identical pictures (linked by pairs of difference hashes\n"
             "within BITS bits) whose items lie in different splits, with the items, and warns\n"
             "about classes missing from a split. Exit status 6 when\n"
             "anything spans two splits, 0 otherwise.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name one output folder or catalogue",
    .main = cmd_audit,
};

/* Everything after option parsing; returns the exit status. */
static int audit(const char *arg, int near, bool quiet)
{
    struct kiln_catalog cat;
    kiln_catalog_init(&cat);
    struct kiln_audit a;
    struct kiln_err err;
    kiln_err_clear(&err);
    int rc = kiln_stage_audit(arg, near, &cat, &a, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        return cli_exit_for_input(rc);
    }
    cli_print_audit(stdout, &a, &cat, quiet, SIZE_MAX, "");
    for (int s = 0; s < KILN_NSPLITS; s++)
        for (size_t k = 0; k < a.nclasses; k++)
            if (a.missing[(size_t)s * a.nclasses + k])
                cli_warn("class '%s' has no item in the %s split", cat.classes[k],
                         kiln_split_name(s));
    int exit_code = a.nleaks ? KILN_EXIT_LEAK : KILN_EXIT_OK;
    kiln_audit_free(&a);
    kiln_catalog_free(&cat);
    return exit_code;
}

static int cmd_audit(int argc, char **argv)
{
    int near = KILN_AUDIT_NEAR_BITS;
    struct cli_args a = {.own = &near};
    int code = cli_parse(&cli_audit, argc, argv, &a);
    if (code == CLI_GO)
        code = audit(a.argv[0], near, a.quiet);
    cli_args_free(&a);
    return code;
}
