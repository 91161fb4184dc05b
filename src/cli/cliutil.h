/* Small helpers shared by the subcommands: parsing numbers and vectors from option text. */
#ifndef BANDSIEVE_CLI_UTIL_H
#define BANDSIEVE_CLI_UTIL_H

/* Parses "a,b,c" (2 or 3 numbers; a missing third is 0) into v; returns 0 or -1. */
int cli_parse_vec3(const char *text, double v[3]);

/* Parses a whole decimal integer in [lo, hi]; returns 0 or -1. */
int cli_parse_int(const char *text, long lo, long hi, long *out);

/* Parses a whole finite number; returns 0 or -1. */
int cli_parse_double(const char *text, double *out);

#endif
