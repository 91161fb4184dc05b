/* Option-text parsing shared by the subcommands. */
#include "cliutil.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>

int cli_parse_double(const char *text, double *out)
{
    char *end;
    errno = 0;
    double v = strtod(text, &end);
    if (end == text || *end != '\0' || errno != 0 || !isfinite(v)) return -1;
    *out = v;
    return 0;
}

int cli_parse_int(const char *text, long lo, long hi, long *out)
{
    char *end;
    errno = 0;
    long v = strtol(text, &end, 10);
    if (end == text || *end != '\0' || errno != 0 || v < lo || v > hi) return -1;
    *out = v;
    return 0;
}

int cli_parse_vec3(const char *text, double v[3])
{
    v[0] = v[1] = v[2] = 0.0;
    const char *p = text;
    for (int n = 0; n < 3; n++) {
        char *end;
        errno = 0;
        double x = strtod(p, &end);
        if (end == p || errno != 0 || !isfinite(x)) return -1;
        v[n] = x;
        if (*end == '\0') return n >= 1 ? 0 : -1;
        if (*end != ',') return -1;
        p = end + 1;
    }
    return -1;
}
