/* Fault injection for tests/cli/kill_points.sh, loaded into kiln with LD_PRELOAD: counts the
 * fsync, renameat and unlinkat calls -- the end of writing each output file and of the journal,
 * and the steps by which an output folder's files are replaced (formats/files/outfile.c) and
 * interrupted runs' files cleared away -- and kills the process with SIGKILL just before step
 * KILN_TEST_KILL_STEP, as kill -9 or a power cut would stop it there. Without that variable nothing is killed; KILN_TEST_STEP_COUNT=FILE receives
 * the number of steps at exit, so a test learns how many moments a run has. */
#include <dlfcn.h>
#include <signal.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <unistd.h>

static atomic_long steps;

static void step(void)
{
    const long n = atomic_fetch_add(&steps, 1) + 1;
    const char *at = getenv("KILN_TEST_KILL_STEP");
    if (at && atol(at) == n)
        kill(getpid(), SIGKILL);
}

int renameat(int olddirfd, const char *oldpath, int newdirfd, const char *newpath)
{
    static int (*real)(int, const char *, int, const char *);
    if (!real)
        *(void **)&real = dlsym(RTLD_NEXT, "renameat");
    step();
    return real(olddirfd, oldpath, newdirfd, newpath);
}

int unlinkat(int dirfd, const char *path, int flags)
{
    static int (*real)(int, const char *, int);
    if (!real)
        *(void **)&real = dlsym(RTLD_NEXT, "unlinkat");
    step();
    return real(dirfd, path, flags);
}

int fsync(int fd)
{
    static int (*real)(int);
    if (!real)
        *(void **)&real = dlsym(RTLD_NEXT, "fsync");
    step();
    return real(fd);
}

__attribute__((destructor)) static void report(void)
{
    const char *out = getenv("KILN_TEST_STEP_COUNT");
    FILE *f = out ? fopen(out, "w") : NULL;
    if (f) {
        fprintf(f, "%ld\n", atomic_load(&steps));
        fclose(f);
    }
}
