/* kiln verify: re-check every checksum of a packed output folder and name each mismatch. */
#include <stdlib.h>
#include <string.h>

#include "../core/pipeline/stage_verify.h"
#include "cmd.h"

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"source", 's', CLI_VALUE, "DIR", "check the sources too (repeatable)", cli_set_source},
    {"path-key", 0, CLI_VALUE, "FILE",
     "the key of a --hash-paths output, to tell files in place\n"
     "from moved ones (not needed with the public key)",
     cli_set_path_key},
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_verify(int argc, char **argv);

const struct cli_command cli_verify = {
    .name = "verify",
    .summary = "re-check every checksum of a packed output folder",
    .usage = "verify OUTDIR [options]",
    .about = "Recomputes the SHA-256 of every output listed in OUTDIR/manifest.json, compares it\n"
             "with the manifest and with SHA256SUMS, and checks the per-array SHA-256 values\n"
             "inside each .kten header. With --source, also finds every recorded source file\n"
             "by its SHA-256 in the given folders and archives, reporting missing and changed\n"
             "files (and, as information, moved and extra ones).\n\n"
             "Exit status: 0 all good, 4 an output is missing or differs, 5 (outputs good) a\n"
             "source file is missing or changed.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name exactly one output folder",
    .main = cmd_verify,
};

static void on_issue(void *ctx, int kind, const char *msg)
{
    const bool quiet = *(const bool *)ctx;
    static const char *const words[] = {"", "DAMAGED", "MISSING", "SOURCE MISSING",
                                        "SOURCE CHANGED", "moved", "extra"};
    if ((kind == KILN_ISSUE_SOURCE_MOVED || kind == KILN_ISSUE_SOURCE_EXTRA) && quiet)
        return;
    printf("%s: %s\n", kind >= 1 && kind <= 6 ? words[kind] : "?", msg);
}

/* Everything after option parsing; returns the exit status. */
static int verify(const char *dir, const char *const *sources, size_t nsources, const uint8_t *key,
                  size_t keylen, bool quiet)
{
    struct cli_progress prog;
    cli_progress_start(&prog, "verify", true);
    struct kiln_verify_report rep;
    struct kiln_err err;
    kiln_err_clear(&err);
    int rc = kiln_stage_verify(dir, on_issue, &quiet, &rep, &err);
    if (rep.restored)
        cli_report_restored(dir, rep.restored_pid);
    if (rc == KILN_EMISMATCH) {
        cli_error("%s: %zu problems (files or arrays differ from their recorded SHA-256)", dir,
                  rep.problems);
        return KILN_EXIT_DAMAGED;
    }
    if (rc) {
        cli_error("cannot verify %s: %s", dir, err.msg);
        return KILN_EXIT_DAMAGED;
    }
    if (nsources) {
        rc = kiln_stage_verify_sources(dir, sources, nsources, key, keylen, on_issue, &quiet, &rep,
                                       &err);
        if (rep.places_unknown)
            cli_warn("%s hashes names with a key that was not given (--path-key): files found by "
                     "content cannot be told to be in place or moved",
                     dir);
        if (rc == KILN_EMISMATCH) {
            cli_error("%s: %zu source files missing, %zu changed (of %zu recorded)", dir,
                      rep.sources_missing, rep.sources_changed, rep.sources_checked);
            return KILN_EXIT_DRIFT;
        }
        if (rc) {
            cli_error("cannot check the sources of %s: %s", dir, err.msg);
            return cli_exit_for_input(rc);
        }
        if (!quiet)
            printf("sources: all %zu recorded files found (%zu moved, %zu extra files)\n",
                   rep.sources_checked, rep.sources_moved, rep.sources_extra);
    }
    if (!quiet)
        printf("%s: all %zu files and %zu arrays match (%.1f MB hashed in %.2f s)\n", dir,
               rep.files_checked, rep.arrays_checked, (double)rep.bytes_hashed / 1e6,
               cli_elapsed(&prog));
    return KILN_EXIT_OK;
}

static int cmd_verify(int argc, char **argv)
{
    struct cli_args a = {0};
    int code = cli_parse(&cli_verify, argc, argv, &a);
    if (code == CLI_GO)
        code = verify(a.argv[0], a.sources, a.nsources, a.path_key, a.path_key_len, a.quiet);
    cli_args_free(&a);
    return code;
}
