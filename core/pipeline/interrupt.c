/* Clean interruption without signal handlers: the signals are blocked in every thread and one
 * thread takes them with sigwait, so the clean-up runs as ordinary code (it may take locks and
 * wait for a rename in progress) rather than in an async-signal context. */
#include "interrupt.h"

#include <errno.h>
#include <pthread.h>
#include <signal.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "../../formats/files/outfile.h"

static const int taken[] = {SIGINT, SIGTERM, SIGHUP};

struct waiter {
    sigset_t set;
    kiln_interrupt_fn fn;
};

static void *wait_main(void *arg)
{
    const struct waiter *w = arg;
    int sig = 0;
    while (sigwait(&w->set, &sig) != 0)
        ;
    size_t files;
    uint64_t bytes;
    kiln_outfile_remove_all(&files, &bytes);
    if (w->fn)
        w->fn(sig, files, bytes);
    /* End by the signal itself, so the parent sees how the process ended. */
    struct sigaction dfl;
    memset(&dfl, 0, sizeof dfl);
    dfl.sa_handler = SIG_DFL;
    sigemptyset(&dfl.sa_mask);
    sigaction(sig, &dfl, NULL);
    sigset_t one;
    sigemptyset(&one);
    sigaddset(&one, sig);
    pthread_sigmask(SIG_UNBLOCK, &one, NULL);
    raise(sig);
    _exit(128 + sig); /* not reached: the default action of each taken signal ends the process */
}

int kiln_interrupt_start(kiln_interrupt_fn fn, struct kiln_err *err)
{
    struct waiter *w = malloc(sizeof *w); /* lives as long as the process */
    if (!w)
        return kiln_err_set(err, KILN_ENOMEM, "cannot set up signal handling");
    w->fn = fn;
    sigemptyset(&w->set);
    bool any = false;
    for (size_t i = 0; i < sizeof taken / sizeof taken[0]; i++) {
        struct sigaction old;
        if (sigaction(taken[i], NULL, &old) == 0 && old.sa_handler == SIG_IGN)
            continue;
        sigaddset(&w->set, taken[i]);
        any = true;
    }
    if (!any) {
        free(w);
        return KILN_OK;
    }
    int rc = pthread_sigmask(SIG_BLOCK, &w->set, NULL);
    pthread_attr_t attr;
    if (!rc)
        rc = pthread_attr_init(&attr);
    if (rc) {
        free(w);
        return kiln_err_sys(err, KILN_ENOMEM, rc, "cannot set up signal handling");
    }
    pthread_attr_setdetachstate(&attr, PTHREAD_CREATE_DETACHED);
    pthread_t t;
    rc = pthread_create(&t, &attr, wait_main, w);
    pthread_attr_destroy(&attr);
    if (rc) {
        pthread_sigmask(SIG_UNBLOCK, &w->set, NULL);
        free(w);
        return kiln_err_sys(err, KILN_ENOMEM, rc, "cannot start the signal thread");
    }
    return KILN_OK;
}
