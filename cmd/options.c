/* Option parsing with kiln's messages: getopt_long, whose own messages name the program rather
 * than the command and leave the rest to the caller, wrapped so that every command reports a
 * bad command line the same way (docs/cli.md, "Options"). */
#include <getopt.h>
#include <stdio.h>
#include <string.h>

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

int cli_getopt(const char *cmd, int argc, char **argv, const char *shortopts,
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
