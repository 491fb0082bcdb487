/* Option parsing driven by each command's option table (struct cli_opt), with kiln's
 * messages: getopt_long, whose own messages name the program rather than the command, wrapped
 * so that every command reports a bad command line the same way (docs/cli.md, "Options"); the
 * --help text is printed from the same table; and the handlers of the shared option groups. */
#include <errno.h>
#include <getopt.h>
#include <regex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../core/audit.h"
#include "../core/pipeline/stage_split.h"
#include "../formats/sources/source.h"
#include "cmd.h"

/* The long option the token names ("--name" or "--name=value", perhaps abbreviated): its
 * index, or -1 when none; *matches counts the options the name abbreviates. */
static int long_match(const char *token, const struct option *longopts, size_t *matches)
{
    const char *name = token + 2;
    const size_t len = strcspn(name, "=");
    int found = -1;
    *matches = 0;
    for (int i = 0; longopts[i].name; i++) {
        if (strncmp(longopts[i].name, name, len) != 0)
            continue;
        if (strlen(longopts[i].name) == len) { /* exact: never ambiguous */
            *matches = 1;
            return i;
        }
        ++*matches;
        found = i;
    }
    return *matches == 1 ? found : -1;
}

/* "--seed, --size and --stratify" */
static void list_matches(const char *token, const struct option *longopts, char *buf, size_t len)
{
    const char *name = token + 2;
    const size_t n = strcspn(name, "=");
    size_t used = 0, k = 0, total = 0;
    for (int i = 0; longopts[i].name; i++)
        total += strncmp(longopts[i].name, name, n) == 0;
    buf[0] = '\0';
    for (int i = 0; longopts[i].name && used < len; i++)
        if (strncmp(longopts[i].name, name, n) == 0) {
            k++;
            used += (size_t)snprintf(buf + used, len - used, "%s--%s",
                                     k == 1 ? "" : k == total ? " and " : ", ", longopts[i].name);
        }
}

static bool all_digits(const char *s)
{
    if (!*s)
        return false;
    for (; *s; s++)
        if (*s < '0' || *s > '9')
            return false;
    return true;
}

/* Reports the error getopt_long signalled with c ('?' or ':'). */
static void bad_option(const char *cmd, int c, char **argv, const struct option *longopts)
{
    const char *token = optind > 0 ? argv[optind - 1] : "";
    const bool is_long = strncmp(token, "--", 2) == 0 && token[2];
    const int len = (int)strcspn(token, "=");
    size_t matches = 0;
    const int i = is_long ? long_match(token, longopts, &matches) : -1;
    if (c == ':') {
        if (strncmp(token, "-", 1) == 0)
            cli_usage_error(cmd, "option '%.*s' needs a value", len, token);
        else
            cli_usage_error(cmd, "option '-%c' needs a value", optopt);
    } else if (i >= 0 && token[len] == '=' && longopts[i].has_arg == no_argument) {
        cli_usage_error(cmd, "option '--%s' takes no value (got '%s')", longopts[i].name,
                        token + len + 1);
    } else if (optopt) {
        cli_usage_error(cmd, "unknown option '-%c'", optopt);
    } else if (matches > 1) {
        char names[512];
        list_matches(token, longopts, names, sizeof names);
        cli_usage_error(cmd, "option '%.*s' is ambiguous: it can mean %s", len, token, names);
    } else {
        cli_usage_error(cmd, "unknown option '%.*s'", len, token);
    }
}

/* getopt_long with kiln's messages: returns what getopt_long returns, or CLI_OPT_ERROR after
 * printing a usage error that names the option and what is wrong with it: unknown, ambiguous
 * abbreviation, missing value, value given to a switch, or an optional value written after a
 * space instead of '=' (docs/cli.md, "Options"). */
#define CLI_OPT_ERROR (-2)
static int cli_getopt(const char *cmd, int argc, char **argv, const char *shortopts,
                      const struct option *longopts, int *longindex)
{
    char spec[64];
    snprintf(spec, sizeof spec, ":%s", shortopts); /* ':' reports a missing value as ':' */
    opterr = 0;
    int idx = -1;
    const int c = getopt_long(argc, argv, spec, longopts, &idx);
    if (longindex)
        *longindex = idx;
    if (c == '?' || c == ':') {
        bad_option(cmd, c, argv, longopts);
        return CLI_OPT_ERROR;
    }
    if (c == -1 || idx < 0)
        return c;
    /* glibc takes an abbreviation that fits several options with the same argument kind as the
     * first of them ("--s 8" as --seed or --size, whichever comes first): refuse it. */
    const char *token = optarg && optind >= 2 && optarg == argv[optind - 1] ? argv[optind - 2]
                                                                           : argv[optind - 1];
    size_t matches = 0;
    if (strncmp(token, "--", 2) == 0 && long_match(token, longopts, &matches) < 0 &&
        matches > 1) {
        char names[512];
        list_matches(token, longopts, names, sizeof names);
        cli_usage_error(cmd, "option '%.*s' is ambiguous: it can mean %s",
                        (int)strcspn(token, "="), token, names);
        return CLI_OPT_ERROR;
    }
    /* An optional value is taken only after '='. A number written after a space would become a
     * source or a catalogue name: say so rather than fail on a missing "source 8". */
    if (longopts[idx].has_arg == optional_argument && !optarg && optind < argc &&
        all_digits(argv[optind])) {
        cli_usage_error(cmd,
                        "option '--%s' takes its value only after '=' (--%s=%s); with a space "
                        "'%s' is not its value but a file name (write ./%s for a file so named)",
                        longopts[idx].name, longopts[idx].name, argv[optind], argv[optind],
                        argv[optind]);
        return CLI_OPT_ERROR;
    }
    return c;
}

/* ---- parsing by table --------------------------------------------------------------------- */

enum { MAX_OPTS = sizeof ((struct cli_args *)0)->seen / sizeof(bool) };

static bool is_end(const struct cli_opt *o)
{
    return !o->name && !o->help && !o->include;
}

/* The table with its groups spliced in, in order; the number of entries, or -1 when too many. */
static int flatten(const struct cli_opt *t, const struct cli_opt **flat, int n)
{
    for (; n >= 0 && !is_end(t); t++) {
        if (t->include)
            n = flatten(t->include, flat, n);
        else if (t->name && n < MAX_OPTS)
            flat[n++] = t;
        else if (t->name)
            n = -1;
    }
    return n;
}

int cli_parse(const struct cli_command *c, int argc, char **argv, struct cli_args *a)
{
    a->cmd = c;
    a->jobs = cli_default_jobs();
    const struct cli_opt *flat[MAX_OPTS];
    const int n = flatten(c->opts, flat, 0);
    if (n < 0) {
        cli_error("internal error: %s has more than %d options", c->name, MAX_OPTS);
        return KILN_EXIT_FAILURE;
    }
    a->sources = calloc((size_t)argc + 1, sizeof *a->sources);
    if (!a->sources) {
        cli_error("out of memory");
        return KILN_EXIT_FAILURE;
    }
    static const int has_arg[] = {[CLI_SWITCH] = no_argument, [CLI_VALUE] = required_argument,
                                  [CLI_OPTIONAL] = optional_argument};
    struct option longopts[MAX_OPTS + 1];
    char shortopts[3 * MAX_OPTS + 1];
    size_t nshort = 0;
    for (int i = 0; i < n; i++) {
        /* getopt_long returns the letter of a short option and 256 + the entry's index for a
         * long one, so an option is told apart by its entry, never by its spelling. */
        longopts[i] = (struct option){flat[i]->name, has_arg[flat[i]->arg], NULL, 256 + i};
        if (flat[i]->letter) {
            shortopts[nshort++] = flat[i]->letter;
            for (int k = 0; k < (int)flat[i]->arg; k++) /* ':' value, '::' optional value */
                shortopts[nshort++] = ':';
        }
    }
    longopts[n] = (struct option){NULL, 0, NULL, 0};
    shortopts[nshort] = '\0';
    optind = 1;
    int ch;
    while ((ch = cli_getopt(c->name, argc, argv, shortopts, longopts, NULL)) != -1) {
        if (ch == CLI_OPT_ERROR)
            return KILN_EXIT_USAGE; /* reported */
        int i = ch - 256;
        if (ch < 256)
            for (i = 0; i < n && flat[i]->letter != ch; i++)
                ;
        if (i < 0 || i >= n) {
            cli_error("internal error: option %d of %s is not in its table", ch, c->name);
            return KILN_EXIT_FAILURE;
        }
        a->seen[i] = true;
        const int code = flat[i]->set(a, flat[i], optarg);
        if (code)
            return code;
        if (a->help) {
            cli_help(stdout, c);
            return KILN_EXIT_OK;
        }
    }
    a->argc = argc - optind;
    a->argv = argv + optind;
    if (a->argc < c->min_args || (c->max_args >= 0 && a->argc > c->max_args))
        return cli_usage_error(c->name, "%s", c->args_error);
    for (int i = 0; i < n; i++)
        if (flat[i]->required && !a->seen[i])
            return cli_usage_error(c->name, "%s", flat[i]->required);
    return CLI_GO;
}

void cli_args_free(struct cli_args *a)
{
    free(a->sources);
    free(a->path_key);
    a->sources = NULL;
    a->path_key = NULL;
}

/* "  -o, --output FILE    catalogue to write", continuation lines under the text. */
static void help_option(FILE *f, const struct cli_opt *o)
{
    enum { COL = 20 };
    char spelling[64];
    snprintf(spelling, sizeof spelling, "%s%s--%s%s%s%s", o->letter ? (char[]){'-', o->letter, 0} : "",
             o->letter ? ", " : "", o->name,
             o->arg == CLI_VALUE ? " " : o->arg == CLI_OPTIONAL ? "[=" : "",
             o->arg != CLI_SWITCH && o->value ? o->value : "", o->arg == CLI_OPTIONAL ? "]" : "");
    if (strlen(spelling) > COL)
        fprintf(f, "  %s\n  %-*s ", spelling, COL, "");
    else
        fprintf(f, "  %-*s ", COL, spelling);
    for (const char *line = o->help; *line;) {
        const size_t len = strcspn(line, "\n");
        fprintf(f, "%.*s\n", (int)len, line);
        line += len;
        if (*line == '\n' && *++line)
            fprintf(f, "  %-*s ", COL, "");
    }
}

static void help_table(FILE *f, const struct cli_opt *t)
{
    for (; !is_end(t); t++) {
        if (t->include)
            help_table(f, t->include);
        else if (!t->name)
            fprintf(f, "\n%s%s", t->help, t->help[0] ? "\n" : "");
        else
            help_option(f, t);
    }
}

void cli_help(FILE *f, const struct cli_command *c)
{
    fprintf(f, "usage: kiln %s\n\n%s", c->usage, c->about);
    help_table(f, c->opts);
}

int cli_bad_value(const struct cli_opt *o, const char *value, const char *why)
{
    return cli_usage_error(cli_cmd_name, "bad --%s '%s': %s", o->name, value, why);
}

/* ---- options every command may take ------------------------------------------------------- */

int cli_set_output(struct cli_args *a, const struct cli_opt *o, const char *value)
{
    (void)o;
    a->output = value;
    return 0;
}

int cli_set_source(struct cli_args *a, const struct cli_opt *o, const char *value)
{
    (void)o;
    a->sources[a->nsources++] = value; /* at most one per argument: sized by argc */
    return 0;
}

int cli_set_quiet(struct cli_args *a, const struct cli_opt *o, const char *value)
{
    (void)o, (void)value;
    a->quiet = true;
    return 0;
}

int cli_set_help(struct cli_args *a, const struct cli_opt *o, const char *value)
{
    (void)o, (void)value;
    a->help = true;
    return 0;
}

int cli_set_jobs(struct cli_args *a, const struct cli_opt *o, const char *value)
{
    char *end;
    errno = 0;
    long v = strtol(value, &end, 10);
    if (!*value || *end || errno || v < 1 || v > 1024)
        return cli_bad_value(o, value, "use 1 to 1024");
    a->jobs = (unsigned)v;
    return 0;
}

/* Reads a --path-key file (at most 1 MiB, not empty): exit 3 when it cannot be used. */
int cli_set_path_key(struct cli_args *a, const struct cli_opt *o, const char *file)
{
    (void)o;
    free(a->path_key);
    a->path_key = NULL;
    a->path_key_len = 0;
    struct kiln_err e;
    int rc = kiln_source_read_file(file, 1u << 20, &a->path_key, &a->path_key_len, &e);
    if (rc == KILN_ETOOLARGE)
        cli_error("cannot use %s as a path key: it is larger than 1 MiB", file);
    else if (rc)
        cli_error("cannot read the path key %s (%s)", file, e.msg);
    else if (a->path_key_len == 0)
        cli_error("cannot use %s as a path key: the file is empty", file);
    if (!rc && a->path_key_len)
        return KILN_EXIT_OK;
    free(a->path_key);
    a->path_key = NULL;
    return rc == KILN_ENOMEM ? KILN_EXIT_FAILURE : KILN_EXIT_INPUT;
}

/* ---- scan's options ----------------------------------------------------------------------- */

static int set_labels(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    if (strcmp(v, "folder") == 0)
        a->scan->labels = KILN_LABELS_FOLDER;
    else if (strcmp(v, "none") == 0)
        a->scan->labels = KILN_LABELS_NONE;
    else if (strncmp(v, "csv:", 4) == 0 && v[4]) {
        a->scan->labels = KILN_LABELS_CSV;
        a->scan->labels_csv = v + 4;
    } else {
        return cli_bad_value(o, v, "use folder, none or csv:FILE");
    }
    return 0;
}

/* Compiled here once to check it, so a typo is a bad option value before any work. */
static int set_group_regex(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    regex_t re;
    int rc = regcomp(&re, v, REG_EXTENDED);
    if (rc) {
        char why[256];
        regerror(rc, &re, why, sizeof why);
        return cli_bad_value(o, v, why);
    }
    const size_t groups = re.re_nsub;
    regfree(&re);
    if (groups < 1)
        return cli_bad_value(o, v, "it has no capture group ( ) for the group key");
    a->scan->group_regex = v;
    return 0;
}

static int set_follow_links(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    a->scan->walk.follow_links = true;
    return 0;
}

/* A size in bytes: digits with an optional binary suffix (K, M, G or T; KiB ... also taken). */
static int set_max_file_size(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    errno = 0;
    unsigned long long n = strtoull(v, &end, 10);
    int shift = 0;
    if (*end) {
        static const char units[] = "KMGT";
        const char *u = strchr(units, *end);
        if (u && *u && (!end[1] || strcmp(end + 1, "iB") == 0))
            shift = 10 * (int)(u - units + 1);
        else
            shift = -1;
    }
    if (end == v || v[0] == '-' || errno || shift < 0 || n == 0 || n > (1ull << 62) >> shift)
        return cli_bad_value(o, v, "use a number of bytes from 1, with K, M, G or T for KiB, MiB, "
                                   "GiB or TiB (e.g. 2G)");
    a->scan->walk.max_file_bytes = (uint64_t)n << shift;
    return 0;
}

const struct cli_opt cli_scan_group[] = {
    {"labels", 0, CLI_VALUE, "RULE",
     "folder (default: first folder level), none, or csv:FILE with\n"
     "columns path,label[,group]",
     set_labels},
    {"group-regex", 0, CLI_VALUE, "ERE",
     "group key = first capture group of ERE on the relative path;\n"
     "items of one group always share a split",
     set_group_regex},
    {"follow-links", 0, CLI_SWITCH, NULL, "follow symbolic links (loops are detected and reported)",
     set_follow_links},
    {"max-file-size", 0, CLI_VALUE, "SIZE",
     "a file or archive member larger than SIZE is too-large,\n"
     "never read (default 1G; K, M, G, T: binary units)",
     set_max_file_size},
    CLI_OPT_END,
};

/* ---- the recipe and the pixel limits ------------------------------------------------------ */

/* The recipe's own setter parses every valued recipe option by its long name (core/recipe.h),
 * so the command line and the manifest accept the same spellings. */
static int set_recipe_value(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    struct kiln_err e;
    if (kiln_recipe_set(a->recipe, o->name, v, &e))
        return cli_usage_error(cli_cmd_name, "%s", e.msg);
    return 0;
}

static int set_no_dct_scale(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    a->recipe->dct_scale = false;
    return 0;
}

static int set_no_orient(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    a->recipe->orient = false;
    return 0;
}

static int set_hash_paths(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    a->recipe->hash_paths = true;
    return 0;
}

const struct cli_opt cli_limit_group[] = {
    {"max-pixels", 0, CLI_VALUE, "N", "reject images with more pixels (default 268435456 = 2^28)",
     set_recipe_value},
    {"max-side", 0, CLI_VALUE, "N", "reject images with a longer side (default 65535)",
     set_recipe_value},
    CLI_OPT_END,
};

const struct cli_opt cli_recipe_group[] = {
    {"size", 0, CLI_VALUE, "WxH | S", "output image size (required)", set_recipe_value},
    {"fit", 0, CLI_VALUE, "MODE", "stretch (default), pad (letterbox) or crop (centre crop)",
     set_recipe_value},
    {"filter", 0, CLI_VALUE, "NAME", "nearest, box, bilinear (default), bicubic or lanczos3",
     set_recipe_value},
    {"channels", 0, CLI_VALUE, "1|3|4", "grey (BT.601 luma), RGB (default) or RGBA",
     set_recipe_value},
    {"depth", 0, CLI_VALUE, "8|16", "bits per sample of the records (default 8)",
     set_recipe_value},
    {"dtype", 0, CLI_VALUE, "u8|u16|f32",
     "output type; f32 is normalised with the training statistics", set_recipe_value},
    {"layout", 0, CLI_VALUE, "nhwc|nchw", "array layout (default nhwc)", set_recipe_value},
    {"pad-value", 0, CLI_VALUE, "V[,..]", "letterbox fill, 0-255 per channel (default 0)",
     set_recipe_value},
    {"background", 0, CLI_VALUE, "R,G,B", "colour alpha is composited over (default 255,255,255)",
     set_recipe_value},
    {"no-dct-scale", 0, CLI_SWITCH, NULL, "decode JPEG at full size even when the target is small",
     set_no_dct_scale},
    {"no-orient", 0, CLI_SWITCH, NULL, "ignore EXIF orientation", set_no_orient},
    {"hash-paths", 0, CLI_SWITCH, NULL,
     "write file, folder and group names as keyed hashes in every\n"
     "output (personal data in names; docs/formats.md)",
     set_hash_paths},
    {"path-key", 0, CLI_VALUE, "FILE",
     "secret key for --hash-paths (without it the key is public and\n"
     "a guessed name can be confirmed)",
     cli_set_path_key},
    CLI_OPT_END,
};

/* ---- split's options ---------------------------------------------------------------------- */

static int set_seed(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    errno = 0;
    unsigned long long n = strtoull(v, &end, 10);
    if (!*v || *end || errno || v[0] == '-')
        return cli_bad_value(o, v, "use a whole number from 0 to 2^64-1");
    a->split->seed = n;
    return 0;
}

static int set_ratios(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    struct kiln_err e;
    bool note;
    if (kiln_split_parse_ratios(v, a->split, &note, &e))
        return cli_usage_error(cli_cmd_name, "%s", e.msg);
    if (note)
        cli_warn("--%s %s does not sum to 100; the parts are used as weights", o->name, v);
    return 0;
}

static int set_stratify(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o, (void)v;
    a->split->stratify = true;
    return 0;
}

static int set_mode(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    int m = kiln_split_mode_parse(v);
    if (m < 0)
        return cli_bad_value(o, v, "use exact or stable");
    a->split->mode = m;
    return 0;
}

static int set_near(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    if (strcmp(v, "on") != 0 && strcmp(v, "off") != 0)
        return cli_bad_value(o, v, "use on or off");
    a->split->near = strcmp(v, "on") == 0;
    return 0;
}

int cli_set_near_radius(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    errno = 0;
    long n = strtol(v, &end, 10);
    if (!*v || *end || errno || n < 0 || n > 16)
        return cli_bad_value(o, v, "use a number of bits from 0 to 16");
    a->split->near_params.radius_full = a->split->near_params.radius_centre = (unsigned)n;
    return 0;
}

int cli_set_near_limit(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    char *end;
    errno = 0;
    long n = strtol(v, &end, 10);
    if (!*v || *end || errno || n < 2 || n > 1000000)
        return cli_bad_value(o, v, "use a number of pictures from 2 to 1000000");
    a->split->near_params.max_pictures = (unsigned)n;
    return 0;
}

static int set_keep(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    (void)o;
    a->split->keep_manifest = v;
    return 0;
}

static int set_keep_conflicts(struct cli_args *a, const struct cli_opt *o, const char *v)
{
    if (strcmp(v, "test") != 0 && strcmp(v, "error") != 0)
        return cli_bad_value(o, v, "use test (or error, the default)");
    a->split->keep_to_test = strcmp(v, "test") == 0;
    return 0;
}

const struct cli_opt cli_split_group[] = {
    {"seed", 0, CLI_VALUE, "N", "seed of the split (required)", set_seed,
     "--seed N is required, so the split can be rebuilt"},
    {"ratios", 0, CLI_VALUE, "A:B[:C]",
     "train:test or train:val:test shares, e.g. 80:10:10, 0.7:0.3\n(default 80:10:10)",
     set_ratios},
    {"stratify", 0, CLI_SWITCH, NULL, "keep class proportions in every split", set_stratify},
    {"mode", 0, CLI_VALUE, "MODE",
     "exact (default: sizes as close to the ratios as whole units\n"
     "allow) or stable (a unit's split depends on its own key only)",
     set_mode},
    {"near-duplicates", 0, CLI_VALUE, "on|off",
     "keep pictures that are copies of one another (re-saved,\n"
     "resized, cropped, turned, ... and checked on pixels) in one\n"
     "unit (default on; docs/near-duplicates.md)",
     set_near},
    CLI_OPT_NEAR_RADIUS,
    CLI_OPT_NEAR_LIMIT,
    {"keep", 0, CLI_VALUE, "MANIFEST",
     "items packed in that earlier output keep their split; new items\nare dealt by the mode",
     set_keep},
    {"keep-conflicts", 0, CLI_VALUE, "test",
     "a unit joining two old splits goes to the later one (train <\n"
     "val < test) instead of stopping with an error",
     set_keep_conflicts},
    CLI_OPT_END,
};
