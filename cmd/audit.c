/* kiln audit: report every group, identical file, identical picture and near-identical picture
 * that spans two splits, and classes missing from a split. */
#include <getopt.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/audit.h"
#include "../formats/files/catalog_csv.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln audit OUTDIR | catalog.csv [options]\n\n"
           "Lists every group (one specimen), set of identical files, set of identical decoded\n"
           "pictures and cluster of near-identical pictures (linked by pairs of difference hashes\n"
           "within BITS bits) whose items lie in different splits, with the items, and warns\n"
           "about classes missing from a split. Exit status 6 when\n"
           "anything spans two splits, 0 otherwise.\n\n"
           "options:\n"
           "  --near BITS          near-duplicate radius in bits of the difference hash\n"
           "                       (default 6, 0 to 16)\n"
           "  --no-near            check groups and identical content only\n"
           "  -q, --quiet          print only problems: no progress, no summary\n"
           "  -h, --help           this text\n");
}

int cmd_audit(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"near", required_argument, NULL, 'n'}, {"no-near", no_argument, NULL, 'N'},
        {"quiet", no_argument, NULL, 'q'},      {"help", no_argument, NULL, 'h'},
        {NULL, 0, NULL, 0}};
    int near = 6, c;
    bool quiet = false;
    while ((c = cli_getopt("audit", argc, argv, "qh", longopts, NULL)) != -1) {
        switch (c) {
        case 'n': {
            char *end;
            long v = strtol(optarg, &end, 10);
            if (!*optarg || *end || v < 0 || v > 16)
                return cli_usage_error("audit", "bad --near '%s': use a number of bits from 0 to 16",
                                       optarg);
            near = (int)v;
            break;
        }
        case 'N': near = -1; break;
        case 'q': quiet = true; break;
        case 'h': help(); return KILN_EXIT_OK;
        default: return KILN_EXIT_USAGE; /* CLI_OPT_ERROR, reported */
        }
    }
    if (optind + 1 != argc)
        return cli_usage_error("audit", "name one output folder or catalogue");
    const char *arg = argv[optind];
    struct stat st;
    char *path = NULL;
    if (stat(arg, &st) == 0 && S_ISDIR(st.st_mode)) {
        size_t n = strlen(arg) + sizeof "/catalog.csv";
        path = malloc(n);
        if (path)
            snprintf(path, n, "%s/catalog.csv", arg);
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
    int rc = kiln_catalog_csv_load(path, &cat, &has_split, &err);
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
    struct kiln_audit a;
    rc = kiln_audit_run(&cat, near, NULL, &a, &err);
    if (rc) {
        cli_error("%s", err.msg);
        kiln_catalog_free(&cat);
        free(path);
        return KILN_EXIT_FAILURE;
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
    free(path);
    return exit_code;
}
