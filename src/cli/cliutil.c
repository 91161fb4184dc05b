/* Option-text parsing shared by the subcommands. */
#include "cliutil.h"

#include <errno.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* The partial output to remove on a signal; the handler uses only unlink and raise, which are
 * async-signal-safe. */
static char remove_path[4300];
static volatile sig_atomic_t remove_armed = 0;
static const int REMOVE_SIGNALS[] = {SIGINT, SIGTERM, SIGHUP, SIGQUIT};

static void remove_and_die(int sig)
{
    if (remove_armed) unlink(remove_path);
    signal(sig, SIG_DFL);
    raise(sig);
}

void cli_remove_on_signal(const char *path)
{
    remove_armed = 0;
    if (!path || snprintf(remove_path, sizeof remove_path, "%s", path) >= (int)sizeof remove_path) return;
    struct sigaction sa;
    memset(&sa, 0, sizeof sa);
    sa.sa_handler = remove_and_die;
    sigemptyset(&sa.sa_mask);
    for (size_t i = 0; i < sizeof REMOVE_SIGNALS / sizeof REMOVE_SIGNALS[0]; i++)
        sigaddset(&sa.sa_mask, REMOVE_SIGNALS[i]);
    /* A signal the process was started to ignore (SIGINT of a background job) stays ignored. */
    for (size_t i = 0; i < sizeof REMOVE_SIGNALS / sizeof REMOVE_SIGNALS[0]; i++) {
        struct sigaction old;
        if (sigaction(REMOVE_SIGNALS[i], NULL, &old) == 0 && old.sa_handler == SIG_IGN) continue;
        sigaction(REMOVE_SIGNALS[i], &sa, NULL);
    }
    remove_armed = 1;
}

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

int cli_figure_path_ok(const char *path)
{
    const char *dot = strrchr(path, '.');
    return dot && (!strcmp(dot, ".svg") || !strcmp(dot, ".png") || !strcmp(dot, ".pdf"));
}
