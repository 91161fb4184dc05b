/* The error record: first-message-wins filling and context prefixing. */
#include "bandsieve/err.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

void bs_err_clear(bs_err *e)
{
    if (!e) return;
    e->code = 0;
    e->msg[0] = '\0';
}

int bs_fail(bs_err *e, int code, const char *fmt, ...)
{
    if (!e || e->code != 0) return e && e->code ? e->code : code;
    e->code = code;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(e->msg, sizeof e->msg, fmt, ap);
    va_end(ap);
    return code;
}

int bs_err_context(bs_err *e, const char *fmt, ...)
{
    if (!e) return 0;
    char prefix[256];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(prefix, sizeof prefix, fmt, ap);
    va_end(ap);
    size_t np = strlen(prefix), nm = strlen(e->msg);
    if (np >= sizeof e->msg) np = sizeof e->msg - 1;
    if (np + nm >= sizeof e->msg) nm = sizeof e->msg - 1 - np;
    memmove(e->msg + np, e->msg, nm);
    memcpy(e->msg, prefix, np);
    e->msg[np + nm] = '\0';
    return e->code;
}

const char *bs_err_name(int code)
{
    switch (code) {
    case BS_OK:
        return "ok";
    case BS_EPARSE:
        return "parse";
    case BS_EIO:
        return "io";
    case BS_ENOMEM:
        return "memory";
    case BS_EINVAL:
        return "invalid";
    case BS_ENUMERIC:
        return "numeric";
    case BS_EHDF5:
        return "hdf5";
    case BS_ESQL:
        return "sqlite";
    case BS_EMPI:
        return "mpi";
    case BS_ETIMEOUT:
        return "timeout";
    case BS_EUSAGE:
        return "usage";
    case BS_EUNSUPPORTED:
        return "unsupported";
    default:
        return "unknown";
    }
}

int bs_fault_hit(const char *var, const char *key)
{
    const char *v = getenv(var);
    return v && key && (strcmp(v, "*") == 0 || strcmp(v, key) == 0);
}
