/* The command-line layer: one file per subcommand, each defining a struct cli_command (its
 * usage, help text, option table and function). Only this layer prints or picks exit codes;
 * the work is done by the pipeline's public functions (core/pipeline/stage_*.h). How to add an
 * option or a command: DEVELOPERS.md, "Adding an option" and "Adding a subcommand". */
#ifndef KILN_CMD_H
#define KILN_CMD_H

#include <stdbool.h>
#include <stdio.h>
#include <time.h>

#include "../core/err.h"
#include "../core/recipe.h"
#include "../core/pipeline/stage_scan.h"
#include "../core/shortcut.h"
#include "../core/split.h"

/* Exit codes, pinned (docs/cli.md). */
enum {
    KILN_EXIT_OK = 0,
    KILN_EXIT_FAILURE = 1,  /* the run failed: I/O, memory, or a bug */
    KILN_EXIT_USAGE = 2,    /* bad command line */
    KILN_EXIT_INPUT = 3,    /* bad input: catalogue, manifest, no usable image, --strict rows */
    KILN_EXIT_DAMAGED = 4,  /* verify: an output differs from its recorded checksum */
    KILN_EXIT_DRIFT = 5,    /* verify/reproduce: a source file is missing or changed */
    KILN_EXIT_LEAK = 6,     /* audit: something spans two splits; pack: identical records */
    KILN_EXIT_DIFFERS = 7,  /* reproduce: rebuilt outputs are not byte-identical */
};

/* ---- commands and their options (cmd/options.c) ---------------------------------------- */

/* What a command has parsed: the options every command may take, pointers to the option groups
 * it takes (NULL where it takes none), its own options, and the arguments left over. */
struct cli_args {
    const struct cli_command *cmd;
    bool quiet;
    unsigned jobs;             /* --jobs, or the online CPUs */
    const char *output;        /* -o */
    const char **sources;      /* -s/--source, repeatable (nsources of them) */
    size_t nsources;
    uint8_t *path_key;         /* --path-key FILE's bytes (malloc'ed), NULL without */
    size_t path_key_len;
    struct kiln_scan_opts *scan;     /* cli_scan_group's options */
    struct kiln_split_params *split; /* cli_split_group's */
    struct kiln_recipe *recipe;      /* cli_recipe_group's and cli_limit_group's */
    void *own;                 /* the command's own options; its handlers know the type */
    int argc;                  /* arguments that are not options, in order */
    char **argv;
    bool seen[64];             /* per option, in table order with groups spliced in: given */
    bool help;
};

enum cli_arg { CLI_SWITCH, CLI_VALUE, CLI_OPTIONAL };

/* One option: its names, its help, and the function that applies it. The table of a command
 * drives both parsing and --help, so every option is named once. */
struct cli_opt {
    const char *name;  /* long name without "--"; NULL: a heading in --help (help = its title,
                        * "" for a blank line), or an include */
    char letter;       /* short form, or 0 */
    enum cli_arg arg;
    const char *value; /* what the value looks like in --help: "N", "WxH | S" */
    const char *help;  /* lines separated by '\n' */
    /* Applies the option (value NULL for a switch or an absent optional value): returns 0, or
     * an exit status after printing why (a bad value: cli_bad_value, exit 2). */
    int (*set)(struct cli_args *a, const struct cli_opt *o, const char *value);
    const char *required; /* the usage error when the option is missing; NULL: optional */
    const struct cli_opt *include; /* instead of an option: a group spliced in here */
};

struct cli_command {
    const char *name;    /* "scan" */
    const char *summary; /* one line for `kiln --help` */
    const char *usage;   /* after "usage: kiln " */
    const char *about;   /* paragraphs after the usage line, each line ending in '\n' */
    const struct cli_opt *opts; /* ends with CLI_OPT_END */
    int min_args, max_args;     /* arguments that are not options (max -1: any number) */
    const char *args_error;     /* the usage error when their number is wrong */
    /* The command: sets up its option structs, calls cli_parse with this table, does the work
     * through the pipeline and returns the exit status. argv[0] is the command's name. */
    int (*main)(int argc, char **argv);
};

/* The command being run ("scan", ...), for messages; set by main before dispatching. */
extern const char *cli_cmd_name;

extern const struct cli_command cli_scan, cli_split, cli_pack, cli_build, cli_audit,
    cli_verify, cli_reproduce, cli_inspect, cli_report;

/* Parses argv (argv[0] is the command's name) by c's table into a (whose group pointers and own
 * options the caller has set, with their defaults): applies every option, checks the number of
 * arguments and the required options. Returns CLI_GO to go on, or the exit status to return:
 * 0 after printing --help, 2 after a usage error, 3 or 1 when an option's file cannot be read.
 * cli_args_free releases what parsing allocated, in every case. */
#define CLI_GO (-1)
int cli_parse(const struct cli_command *c, int argc, char **argv, struct cli_args *a);
void cli_args_free(struct cli_args *a);
/* Prints c's --help on f. */
void cli_help(FILE *f, const struct cli_command *c);

/* Reports a bad option value ("bad --NAME 'VALUE': <why>") as a usage error; returns 2. */
int cli_bad_value(const struct cli_opt *o, const char *value, const char *why);

/* Handlers and entries shared by several commands. */
int cli_set_output(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_source(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_path_key(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_jobs(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_quiet(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_help(struct cli_args *a, const struct cli_opt *o, const char *value);

/* The near-duplicate settings (split, build and audit): they fill a->split's near_params. */
int cli_set_near_radius(struct cli_args *a, const struct cli_opt *o, const char *value);
int cli_set_near_limit(struct cli_args *a, const struct cli_opt *o, const char *value);
#define CLI_OPT_NEAR_RADIUS {"near-radius", 0, CLI_VALUE, "BITS", \
                             "hash distance of the candidate search (default 6, 0 to 16)", \
                             cli_set_near_radius}
#define CLI_OPT_NEAR_LIMIT {"near-unit-limit", 0, CLI_VALUE, "N", \
                            "most pictures near-duplicate links may join into one unit\n" \
                            "(default 8, at least 2)", cli_set_near_limit}

#define CLI_OPT_JOBS {"jobs", 'j', CLI_VALUE, "N", "worker threads (default: online CPUs)", \
                      cli_set_jobs}
#define CLI_OPT_QUIET {"quiet", 'q', CLI_SWITCH, NULL, \
                       "print only problems: no progress, no summary", cli_set_quiet}
#define CLI_OPT_HELP {"help", 'h', CLI_SWITCH, NULL, "this text", cli_set_help}
#define CLI_OPT_END {NULL, 0, CLI_SWITCH, NULL, NULL, NULL, NULL, NULL}
/* A heading line in --help ("" for a blank line). */
#define CLI_HEADING(title) {NULL, 0, CLI_SWITCH, NULL, title, NULL, NULL, NULL}
#define CLI_INCLUDE(group) {NULL, 0, CLI_SWITCH, NULL, NULL, NULL, NULL, group}

/* The option groups shared by several commands (cmd/options.c), for a table's include: scan's
 * rules, the pixel limits (scan, pack, build), split's parameters and the recipe (pack, build,
 * with --path-key). Their handlers fill a->scan, a->recipe and a->split. */
extern const struct cli_opt cli_scan_group[], cli_limit_group[], cli_split_group[],
    cli_recipe_group[];

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

/* Copies the source arguments with trailing slashes removed, so "data/" and "data" name the
 * same source; NULL when memory runs out (nothing is left allocated). */
char **cli_sources_new(int n, char **argv);
void cli_sources_free(char **sources, int n);

/* Runs the split stage over cat (kiln_stage_split: with p->near the checked links go to near,
 * which the caller frees) and reports what went wrong or moved (--keep-conflicts test);
 * returns an exit status. Shared by split and build. */
int cli_split_catalog(struct kiln_catalog *cat, struct kiln_split_params *p, unsigned jobs,
                      struct kiln_nearlinks *near, struct kiln_units *units,
                      struct kiln_split_report *rep);

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
                             const struct kiln_split_report *rep,
                             const struct kiln_nearlinks *near, bool quiet);

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

/* The evidence of one near-duplicate link on one line (no newline): hash distances, the
 * correlations that decided, hue, orientation, crop alignment, searches, unit rule. */
void cli_print_link_evidence(FILE *f, const struct kiln_nearlink *l);
/* cmd/balance.c. The compact class x split table of the ok items that have a split (classes
 * beyond 30 are counted, not listed), with the shares achieved and, when given, the ratios
 * asked. */
void cli_print_class_table(FILE *f, const struct kiln_catalog *cat, const char *asked,
                           bool with_val);
/* Runs the shortcut check (core/shortcut.h) over cat and prints what fires: as "SHORTCUT"
 * findings on f (kiln audit, printed even when quiet) or as warnings on stderr (split, build);
 * unless quiet, one line on f saying nothing fired and which attribute came closest. */
struct kiln_shortcuts;
void cli_print_shortcuts(FILE *f, const struct kiln_shortcuts *s, const struct kiln_catalog *cat,
                         bool findings, bool quiet);
void cli_check_shortcuts(FILE *f, const struct kiln_catalog *cat, bool findings, bool quiet);

/* Says on stderr what preparing an output folder removed or left (interrupted runs' temporary
 * files); silent when there was nothing. */
struct kiln_debris;
void cli_report_debris(const char *outdir, const struct kiln_debris *d);
/* Says on stderr that a killed run's half-done replace of outdir's files was undone. */
void cli_report_restored(const char *outdir, long pid);


#endif
