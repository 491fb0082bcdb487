/* kiln's entry point: the command table and the options that come before a command. */
#include <errno.h>
#include <signal.h>
#include <string.h>
#include <unistd.h>

#include "../core/pipeline/interrupt.h"
#include "../core/version.h"
#include "../formats/files/manifest.h"
#include "cmd.h"

static const struct cli_command *const commands[] = {
    &cli_scan, &cli_split, &cli_pack, &cli_build, &cli_audit, &cli_verify, &cli_reproduce,
    &cli_inspect, &cli_report,
};

#define NCOMMANDS (sizeof commands / sizeof commands[0])

static void usage(FILE *f)
{
    fprintf(f, "usage: kiln <command> [options]\n\n"
               "Turns folders and archives of lab images into reproducible, leakage-free tensor\n"
               "data sets.\n\ncommands:\n");
    for (size_t i = 0; i < NCOMMANDS; i++)
        fprintf(f, "  %-9s %s\n", commands[i]->name, commands[i]->summary);
    fprintf(f, "\nRun 'kiln <command> --help' for a command's options; 'kiln --version' for the "
               "version\nand the libraries in use.\n");
}

/* Runs on the signal thread (core/pipeline/interrupt.c) as the process ends: formatted into
 * one buffer and written at once, so it is not mixed into other output. */
static void on_interrupt(int sig, size_t files, uint64_t bytes)
{
    char msg[256];
    int n = snprintf(msg, sizeof msg, "%skiln: error: interrupted by %s", isatty(2) ? "\n" : "",
                     sig == SIGINT ? "SIGINT" : sig == SIGTERM ? "SIGTERM" : "SIGHUP");
    if (files && n > 0 && (size_t)n < sizeof msg)
        n += snprintf(msg + n, sizeof msg - (size_t)n,
                      "; removed %zu temporary %s (%.1f MB, %llu bytes) of this run", files,
                      files == 1 ? "file" : "files", (double)bytes / 1e6,
                      (unsigned long long)bytes);
    if (n > 0 && (size_t)n < sizeof msg - 1) {
        msg[n++] = '\n';
        ssize_t w = write(2, msg, (size_t)n);
        (void)w;
    }
}

int main(int argc, char **argv)
{
    struct kiln_err ierr;
    if (kiln_interrupt_start(on_interrupt, &ierr) != 0) {
        cli_error("%s", ierr.msg);
        return KILN_EXIT_FAILURE;
    }
    if (argc < 2) {
        usage(stderr);
        return KILN_EXIT_USAGE;
    }
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        usage(stdout);
        return KILN_EXIT_OK;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("kiln %s\n", KILN_VERSION);
        struct kiln_library_version v[KILN_MAX_LIBRARIES];
        size_t n = kiln_library_versions(v, KILN_MAX_LIBRARIES);
        for (size_t i = 0; i < n; i++)
            printf("%s %s\n", v[i].library, v[i].version);
        return fflush(stdout) == 0 ? KILN_EXIT_OK : KILN_EXIT_FAILURE;
    }
    for (size_t i = 0; i < NCOMMANDS; i++)
        if (strcmp(argv[1], commands[i]->name) == 0) {
            cli_cmd_name = commands[i]->name;
            int rc = commands[i]->main(argc - 1, argv + 1);
            /* A full disk must not end in a silent success. */
            if (fflush(stdout) != 0 || ferror(stdout)) {
                cli_error("cannot write to standard output: %s", strerror(errno));
                return KILN_EXIT_FAILURE;
            }
            return rc;
        }
    cli_error("'%s' is not a kiln command", argv[1]);
    usage(stderr);
    return KILN_EXIT_USAGE;
}
