/* Parts of `bandsieve path` beyond one family of Hamiltonians in memory: films of growing thickness
 * (cmd_pathfilm.c) and the families of a material set. Each returns the process exit status. */
#ifndef BANDSIEVE_CLI_PATHFILM_H
#define BANDSIEVE_CLI_PATHFILM_H

#include <cjson/cJSON.h>

#include "bandsieve/phasepath.h"

int path_films(const char *source, const double miller[3], const char *layers, const pp_opts *o, int json);
int path_family(const char *set_path, const char *family, const pp_opts *o, int json, const char *figure);

/* Writes the figure of a path (fig_path) to figure when it is not NULL; 0, or 1 after printing the
 * error (cmd_path.c). */
int path_figure(const pp_result *r, const char *figure, const char *title, const char *unit);

/* The JSON object of a path (cmd_path.c); the caller owns it. */
cJSON *path_to_json(const pp_result *r, const char *source, const char *unit, int members);

/* The readable report of a path on stdout (cmd_path.c). */
void path_print(const pp_result *r, const char *source, const char *unit, int members);

#endif
