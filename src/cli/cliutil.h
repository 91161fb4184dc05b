/* Small helpers shared by the subcommands: parsing numbers and vectors from option text. */
#ifndef BANDSIEVE_CLI_UTIL_H
#define BANDSIEVE_CLI_UTIL_H

/* Parses "a,b,c" (2 or 3 numbers; a missing third is 0) into v; returns 0 or -1. */
int cli_parse_vec3(const char *text, double v[3]);

/* Parses a whole decimal integer in [lo, hi]; returns 0 or -1. */
int cli_parse_int(const char *text, long lo, long hi, long *out);

/* Parses a whole finite number; returns 0 or -1. */
int cli_parse_double(const char *text, double *out);

/* 1 when path ends in .svg, .png or .pdf (the figure formats), else 0: checked before any work. */
int cli_figure_path_ok(const char *path);

/* Removes the file at path (a partial output) when the process is ended by SIGINT, SIGTERM, SIGHUP
 * or SIGQUIT, then ends it by that signal as before, so an interrupted command leaves nothing
 * behind. One path at a time (copied); NULL disarms. */
void cli_remove_on_signal(const char *path);

#endif
