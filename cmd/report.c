/* kiln report: one self-contained HTML file describing an output folder. */
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "../core/pipeline/stage_report.h"
#include "cmd.h"

struct report_opts {
    size_t sample; /* thumbnails per class and split */
};

static int set_sample(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    const long n = strtol(v, &end, 10);
    if (!*v || *end || n < 1 || n > KILN_REPORT_MAX_SAMPLE)
        return cli_bad_value(o, v, "use 1 to 32 records per class and split");
    ((struct report_opts *)a->own)->sample = (size_t)n;
    return 0;
}

static const struct cli_opt opts[] = {
    CLI_HEADING("options:"),
    {"output", 'o', CLI_VALUE, "FILE.html", "the report to write (required)", cli_set_output,
     "-o report.html is required"},
    {"source", 's', CLI_VALUE, "DIR",
     "also find every recorded source file by content in DIR\n"
     "(repeatable), as verify --source does",
     cli_set_source},
    {"path-key", 0, CLI_VALUE, "FILE", "the key of a --hash-paths output (as for verify)",
     cli_set_path_key},
    {"sample", 0, CLI_VALUE, "N",
     "thumbnails per class and split (default 4, 1 to 32; fewer\n"
     "when classes are many: at most 1200 in all)",
     set_sample},
    CLI_OPT_QUIET,
    CLI_OPT_HELP,
    CLI_OPT_END,
};

static int cmd_report(int argc, char **argv);

const struct cli_command cli_report = {
    .name = "report",
    .summary = "write one self-contained HTML page describing an output folder",
    .usage = "report OUTDIR -o report.html [options]",
    .about = "Reads an output folder of pack or build and writes one HTML file that opens in\n"
             "any browser without a network: the run (versions, scan, split and recipe\n"
             "settings) and verify's verdict on every checksum; records per class and split\n"
             "as a table and a chart, with the shares against those asked; per-split\n"
             "statistics; per-class counts of format, size, depth, channels, source,\n"
             "orientation, JPEG coding and file-size band with the shortcut check; sample\n"
             "thumbnails of the packed records per class and split; every audit finding with\n"
             "its pictures and evidence; and every file not packed, by status, with its\n"
             "reason. With --source, also whether every recorded source file is still there.\n"
             "Exit 0 when written, 4 when the folder's files do not match their checksums, 5\n"
             "when a source file is missing or changed (the report shows which), 3 when the\n"
             "folder cannot be read.\n",
    .opts = opts,
    .min_args = 1,
    .max_args = 1,
    .args_error = "name exactly one output folder",
    .main = cmd_report,
};

static int report(const struct cli_args *a, const struct report_opts *o)
{
    const char *outdir = a->argv[0], *html = a->output;
    const int code = cli_check_output_file(html);
    if (code)
        return code;
    struct kiln_report_summary sum;
    struct kiln_err err;
    kiln_err_clear(&err);
    const struct kiln_report_opts ro = {outdir, html, o->sample, a->sources, a->nsources,
                                        a->path_key, a->path_key_len};
    int rc = kiln_stage_report(&ro, &sum, &err);
    if (rc) {
        cli_error("%s", err.msg);
        return rc == KILN_EWRITE || rc == KILN_ENOMEM ? KILN_EXIT_FAILURE : cli_exit_for_input(rc);
    }
    if (!sum.verified)
        cli_warn("%s: the checksums could not be checked (the report says why)", outdir);
    else if (sum.problems)
        cli_error("%s: %zu %s with verify (listed in %s)", outdir, sum.problems,
                  sum.problems == 1 ? "problem" : "problems", html);
    if (sum.sources_missing || sum.sources_changed)
        cli_error("%s: %zu source files missing, %zu changed (listed in %s)", outdir,
                  sum.sources_missing, sum.sources_changed, html);
    if (!a->quiet) {
        struct stat st;
        const long long bytes = stat(html, &st) == 0 ? (long long)st.st_size : -1;
        printf("report: %s (%.1f kB), %zu %s (%zu per class and split), %zu audit %s, %zu %s "
               "not packed, %zu shortcut %s\n", html, (double)bytes / 1e3, sum.thumbs,
               sum.thumbs == 1 ? "thumbnail" : "thumbnails", sum.per_class, sum.findings,
               sum.findings == 1 ? "finding" : "findings", sum.not_packed,
               sum.not_packed == 1 ? "row" : "rows", sum.shortcuts,
               sum.shortcuts == 1 ? "warning" : "warnings");
    }
    if (sum.verified && sum.problems)
        return KILN_EXIT_DAMAGED;
    return sum.sources_missing || sum.sources_changed ? KILN_EXIT_DRIFT : KILN_EXIT_OK;
}

static int cmd_report(int argc, char **argv)
{
    struct report_opts o = {.sample = KILN_REPORT_SAMPLE};
    struct cli_args a = {.own = &o};
    int code = cli_parse(&cli_report, argc, argv, &a);
    if (code == CLI_GO)
        code = report(&a, &o);
    cli_args_free(&a);
    return code;
}
