/* The command-line layer: one file per subcommand, each exporting cmd_<name>() whose return
 * value is the process exit status. Only this layer prints or picks exit codes.
 *
 * Adding a subcommand:
 *   1. Write cmd/<name>.c with int cmd_<name>(int argc, char **argv); argv[0] is the name.
 *   2. Parse options with cli_getopt (getopt_long with kiln's messages); every subcommand
 *      takes --help, --quiet (docs/cli.md: the same rule everywhere) and, when it does
 *      parallel work, --jobs N. A bad option value is a usage error (exit 2); a file named by
 *      an option that cannot be read is bad input (exit 3). Share option parsing through the
 *      cli_* helpers below.
 *   3. Call core/ and formats/ only through their headers; print messages with cli_error or
 *      cli_warn and return one of the KILN_EXIT_* codes (docs/cli.md lists them).
 *   4. Add the command to the table in cmd/kiln.c, to CMakeLists.txt, and to docs/cli.md.
 *   5. Add tests/cli/<name>_*.sh cases. */
#ifndef KILN_CMD_H
#define KILN_CMD_H

#include <stdbool.h>
#include <stdio.h>
#include <time.h>

#include "../core/err.h"
#include "../core/recipe.h"
#include "../core/pipeline/stage_scan.h"
#include "../core/split.h"

/* Exit codes, pinned (docs/cli.md). */
enum {
    KILN_EXIT_OK = 0,
    KILN_EXIT_FAILURE = 1,  /* the run failed: I/O, memory, or a bug */
    KILN_EXIT_USAGE = 2,    /* bad command line */
    KILN_EXIT_INPUT = 3,    /* bad input: catalogue, manifest, no usable image, --strict rows */
    KILN_EXIT_DAMAGED = 4,  /* verify: an output differs from its recorded checksum */
    KILN_EXIT_DRIFT = 5,    /* verify/reproduce: a source file is missing or changed */
    KILN_EXIT_LEAK = 6,     /* audit: something spans two splits */
    KILN_EXIT_DIFFERS = 7,  /* reproduce: rebuilt outputs are not byte-identical */
};

int cmd_scan(int argc, char **argv);
int cmd_split(int argc, char **argv);
int cmd_pack(int argc, char **argv);
int cmd_build(int argc, char **argv);
int cmd_verify(int argc, char **argv);
int cmd_inspect(int argc, char **argv);
int cmd_audit(int argc, char **argv);
int cmd_reproduce(int argc, char **argv);

/* The command being run ("scan", ...), for messages; set by main before dispatching. */
extern const char *cli_command;

/* getopt_long with kiln's messages (cmd/options.c): returns what getopt_long returns, or
 * CLI_OPT_ERROR after printing a usage error that names the option and what is wrong with it:
 * unknown, ambiguous abbreviation, missing value, value given to a switch, or an optional value
 * written after a space instead of '=' (docs/cli.md, "Options"). */
#define CLI_OPT_ERROR (-2)
struct option;
int cli_getopt(const char *cmd, int argc, char **argv, const char *shortopts,
               const struct option *longopts, int *longindex);

/* Checks before any work that an output file can be created: its folder exists, is a folder
 * and is writable. Prints the error naming path and returns its exit status, or returns 0. */
int cli_check_output_file(const char *path);

/* "kiln: error: <msg>" / "kiln: warning: <msg>" on stderr. */
void cli_error(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
void cli_warn(const char *fmt, ...) __attribute__((format(printf, 1, 2)));
/* Exit code for an error code returned by core/ or formats/. */
int cli_exit_for(int code);
/* Exit code for a failure to read an input file the user named: 3, or 1 for memory. */
int cli_exit_for_input(int code);
/* Reports a usage error and returns KILN_EXIT_USAGE. */
int cli_usage_error(const char *cmd, const char *fmt, ...) __attribute__((format(printf, 2, 3)));

/* Online CPUs, at least 1. */
unsigned cli_default_jobs(void);
int cli_parse_jobs(const char *text, unsigned *jobs);

/* Progress on stderr, only when it is a terminal and --quiet is off. */
struct cli_progress {
    const char *what;
    bool on;
    struct timespec start, last;
};
void cli_progress_start(struct cli_progress *p, const char *what, bool quiet);
void cli_progress_update(void *ctx, const struct kiln_progress *p);
void cli_progress_done(struct cli_progress *p);
double cli_elapsed(const struct cli_progress *p);

/* Shared option handlers: return 1 when the option belongs to the group (and was applied),
 * 0 when it does not, or -1 after printing an error. */
int cli_scan_option(struct kiln_scan_opts *o, const char *name, const char *arg);
int cli_split_option(struct kiln_split_params *p, const char *name, const char *arg);
int cli_recipe_option(struct kiln_recipe *r, const char *name, const char *arg);

/* Copies the source arguments with trailing slashes removed, so "data/" and "data" name the
 * same source; NULL when memory runs out (nothing is left allocated). */
char **cli_sources_new(int n, char **argv);
void cli_sources_free(char **sources, int n);

/* Reads a --path-key file (at most 1 MiB, not empty) into *key (freeing what *key held; NULL
 * at first). Returns 0, or prints why not and returns the exit status (3: the file cannot be
 * read, is empty or too large). */
int cli_read_path_key(const char *file, uint8_t **key, size_t *len);

/* Split parameters with their defaults (80:10:10, exact, no near-duplicate merging). */
void cli_split_defaults(struct kiln_split_params *p);
/* Loads --keep (if given), runs the split over cat and reports problems; returns an exit
 * code. Shared by split and build. */
int cli_split_catalog(struct kiln_catalog *cat, struct kiln_split_params *p,
                      struct kiln_units *units, struct kiln_split_report *rep);

/* Help text of each option group, shared by the commands that take it. */
extern const char cli_scan_help[], cli_split_help[], cli_recipe_help[];

/* cmd/summary.c. What scan (and build) found: counts per status, the first unusable rows,
 * skipped files, multi-page files, group rule and labels CSV matches, on f unless quiet; and
 * on stderr always, a warning when the group rule matches no file, fewer than half of the
 * usable files, or keeps nothing together. */
void cli_print_scan_summary(FILE *f, const struct kiln_catalog *cat,
                            const struct kiln_scan_report *rep, const char *group_regex,
                            bool quiet);
/* What split (and build) did: units and items per split on f unless quiet; and on stderr
 * always, every unit holding more than one label and every unit larger than its split's share
 * (each named, with its items or size), zero shares, and classes missing from a split. */
void cli_print_split_summary(FILE *f, const struct kiln_catalog *cat,
                             const struct kiln_units *units, const struct kiln_split_params *p,
                             const struct kiln_split_report *rep, bool quiet);

/* Prints what pack wrote (records per split, training statistics, where the outputs are) on f
 * unless quiet, and the audit's warnings on stderr always. */
struct kiln_pack_report;
void cli_print_pack_summary(FILE *f, const char *outdir, const struct kiln_recipe *r,
                            const struct kiln_pack_report *rep, double seconds, bool quiet);

/* Prints audit findings (each with its items and splits; at most limit findings and limit items
 * a finding, then a line pointing at `kiln audit RERUN` for the rest). */
struct kiln_audit;
void cli_print_audit(FILE *f, const struct kiln_audit *a, const struct kiln_catalog *cat,
                     bool quiet, size_t limit, const char *rerun);

/* Says on stderr what preparing an output folder removed or left (interrupted runs' temporary
 * files); silent when there was nothing. */
struct kiln_debris;
void cli_report_debris(const char *outdir, const struct kiln_debris *d);

/* The path of the JSON record that sits beside a catalogue ("x.csv" -> "x.json"); malloc'ed. */
char *cli_catalog_record_path(const char *catalog_csv);

#endif
