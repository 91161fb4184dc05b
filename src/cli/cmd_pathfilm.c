#include <stdio.h>
#include "pathfilm.h"
int path_films(const char *source, const double miller[3], const char *layers, const pp_opts *o, int json)
{ fprintf(stderr, "TODO\n"); return 2; }
int path_family(const char *set_path, const char *family, const pp_opts *o, int json)
{ fprintf(stderr, "TODO\n"); return 2; }
