/* kiln verify: re-check every checksum of a packed output folder and name each mismatch. */
#include <getopt.h>
#include <string.h>

#include "../core/stage_verify.h"
#include "cmd.h"

static void help(void)
{
    printf("usage: kiln verify OUTDIR [options]\n\n"
           "Recomputes the SHA-256 of every output listed in OUTDIR/manifest.json, compares it\n"
           "with the manifest and with SHA256SUMS, and checks the per-array SHA-256 values\n"
           "inside each .kten header. Exit status 0 when all match, 4 when anything differs.\n\n"
           "options:\n"
           "  -q, --quiet          print only problems\n"
           "  -h, --help           this text\n");
}

static void on_issue(void *ctx, int kind, const char *msg)
{
    (void)ctx;
    printf("%s: %s\n", kind == KILN_ISSUE_MISSING ? "MISSING" : "DAMAGED", msg);
}

int cmd_verify(int argc, char **argv)
{
    static const struct option longopts[] = {
        {"quiet", no_argument, NULL, 'q'}, {"help", no_argument, NULL, 'h'}, {NULL, 0, NULL, 0}};
    bool quiet = false;
    int c;
    while ((c = getopt_long(argc, argv, "qh", longopts, NULL)) != -1) {
        switch (c) {
        case 'q': quiet = true; break;
        case 'h': help(); return KILN_EXIT_OK;
        default: return cli_usage_error("verify", "unknown option");
        }
    }
    if (optind + 1 != argc)
        return cli_usage_error("verify", "name exactly one output folder");
    const char *dir = argv[optind];
    struct cli_progress prog;
    cli_progress_start(&prog, "verify", true);
    struct kiln_verify_report rep;
    struct kiln_err err;
    kiln_err_clear(&err);
    int rc = kiln_stage_verify(dir, on_issue, NULL, &rep, &err);
    if (rc == KILN_EMISMATCH) {
        cli_error("%s: %zu problems (files or arrays differ from their recorded SHA-256)", dir,
                  rep.problems);
        return KILN_EXIT_DAMAGED;
    }
    if (rc) {
        cli_error("cannot verify %s: %s", dir, err.msg);
        return KILN_EXIT_DAMAGED;
    }
    if (!quiet)
        printf("%s: all %zu files and %zu arrays match (%.1f MB hashed in %.2f s)\n", dir,
               rep.files_checked, rep.arrays_checked, (double)rep.bytes_hashed / 1e6,
               cli_elapsed(&prog));
    return KILN_EXIT_OK;
}
