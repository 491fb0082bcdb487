/* Implementation of the caller-owned error struct; the only formatting code in core/. */
#include "err.h"

#include <stdarg.h>
#include <stdio.h>
#include <string.h>

int kiln_err_set(struct kiln_err *err, int code, const char *fmt, ...)
{
    if (err) {
        va_list ap;
        va_start(ap, fmt);
        err->code = code;
        vsnprintf(err->msg, sizeof err->msg, fmt, ap);
        va_end(ap);
    }
    return code;
}

int kiln_err_sys(struct kiln_err *err, int code, int errnum, const char *fmt, ...)
{
    if (err) {
        va_list ap;
        char sysmsg[128];
        va_start(ap, fmt);
        err->code = code;
        vsnprintf(err->msg, sizeof err->msg, fmt, ap);
        va_end(ap);
        /* GNU strerror_r may return a static string instead of filling the buffer. */
        const char *s = strerror_r(errnum, sysmsg, sizeof sysmsg);
        size_t used = strlen(err->msg);
        snprintf(err->msg + used, sizeof err->msg - used, ": %s", s);
    }
    return code;
}

void kiln_err_prefix(struct kiln_err *err, const char *fmt, ...)
{
    if (!err)
        return;
    char prefix[256], old[sizeof err->msg];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(prefix, sizeof prefix, fmt, ap);
    va_end(ap);
    memcpy(old, err->msg, sizeof old);
    snprintf(err->msg, sizeof err->msg, "%s: %s", prefix, old);
}

void kiln_err_clear(struct kiln_err *err)
{
    if (err) {
        err->code = KILN_OK;
        err->msg[0] = '\0';
    }
}

const char *kiln_code_name(int code)
{
    static const char *const names[] = {
        "ok", "invalid", "io", "nomem", "corrupt", "truncated", "unsupported", "too-large",
        "mismatch", "internal", "leak", "write",
    };
    if (code < 0 || code >= (int)(sizeof names / sizeof names[0]))
        return "unknown";
    return names[code];
}
