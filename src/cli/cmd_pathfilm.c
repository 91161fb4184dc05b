/* `bandsieve path` over thickness: films of growing layer count cut from a 3D source along a
 * lattice plane (slab builder, slab.h), each diagnosed as a 2D material: gap, 2D Z2, Chern number.
 * A 3D topological insulator made thin is a 2D system whose 2D Z2 depends on the number of layers
 * (Phys. Rev. B 81, 041307 (2010)). */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/diagnosis.h"
#include "bandsieve/matset.h"
#include "bandsieve/slab.h"
#include "bandsieve/source.h"
#include "cliutil.h"
#include "pathfilm.h"

static int parse_layers(const char *text, long *lo, long *hi)
{
    const char *dots = strstr(text, "..");
    char a[32];
    if (!dots || dots == text || (size_t)(dots - text) >= sizeof a) return -1;
    memcpy(a, text, (size_t)(dots - text));
    a[dots - text] = '\0';
    if (cli_parse_int(a, 1, 10000, lo) || cli_parse_int(dots + 2, 1, 10000, hi)) return -1;
    return *hi >= *lo ? 0 : -1;
}

int path_films(const char *source, const double miller_d[3], const char *layers, const pp_opts *o, int json)
{
    long lo, hi;
    if (parse_layers(layers, &lo, &hi)) {
        fprintf(stderr, "bandsieve path: --layers expects LO..HI, 1 <= LO <= HI, got '%s'\n", layers);
        return 2;
    }
    int miller[3];
    for (int i = 0; i < 3; i++) {
        miller[i] = (int)miller_d[i];
        if (miller[i] != miller_d[i]) {
            fprintf(stderr, "bandsieve path: --direction expects integer Miller indices\n");
            return 2;
        }
    }
    bs_err err;
    bs_err_clear(&err);
    tb_model *bulk = NULL;
    if (src_load(source, &bulk, &err) != 0) {
        fprintf(stderr, "bandsieve path: %s\n", err.msg);
        return 1;
    }
    if (bulk->dim != 3) {
        fprintf(stderr, "bandsieve path: %s: films need a 3D source\n", source);
        tb_model_free(bulk);
        return 2;
    }
    int status = 0;
    cJSON *j = cJSON_CreateObject(), *films = NULL;
    cJSON *p = cJSON_AddObjectToObject(j, "path");
    cJSON_AddStringToObject(p, "source", source);
    cJSON_AddStringToObject(p, "parameter", "layers");
    cJSON_AddItemToObject(p, "direction", cJSON_CreateIntArray(miller, 3));
    cJSON_AddNumberToObject(p, "from", (double)lo);
    cJSON_AddNumberToObject(p, "to", (double)hi);
    films = cJSON_AddArrayToObject(j, "films");
    if (!json)
        printf("films of %s along (%d,%d,%d), %ld..%ld layers (each diagnosed as a 2D material)\n"
               "  layers  states  gap (eV)     class                        Z2   Chern  confidence\n",
               source, miller[0], miller[1], miller[2], lo, hi);
    char prev_cls[40] = "";
    int prev_z2 = -1;
    long prev_n = 0;
    cJSON *trans = cJSON_AddArrayToObject(j, "transitions");
    for (long n = lo; n <= hi && status == 0; n++) {
        slab *s = NULL;
        tb_model *f = NULL;
        res_diag d;
        res_init(&d);
        int rc = slab_create(bulk, miller, (int)n, 0.0, &s, &err);
        if (rc == 0) rc = slab_film_model(s, bulk, &f, &err);
        if (rc == 0) rc = diag_run(f, &o->diag, &d, &err);
        if (rc != 0) {
            fprintf(stderr, "bandsieve path: film of %ld layers: %s (%s)\n", n, err.msg, bs_err_name(rc));
            status = 1;
        } else {
            int z2 = d.z2_status == RES_DONE ? d.z2[0] : -1;
            cJSON *e = cJSON_CreateObject();
            cJSON_AddNumberToObject(e, "layers", (double)n);
            cJSON_AddNumberToObject(e, "states", f->norb);
            cJSON_AddNumberToObject(e, "gap_direct_eV", d.gap_direct_ev);
            cJSON_AddNumberToObject(e, "gap_indirect_eV", d.gap_indirect_ev);
            cJSON_AddStringToObject(e, "class", res_class_name(d.cls));
            cJSON_AddNumberToObject(e, "confidence", d.confidence);
            if (z2 >= 0)
                cJSON_AddNumberToObject(e, "z2", z2);
            else
                cJSON_AddNullToObject(e, "z2");
            if (d.chern_status == RES_DONE)
                cJSON_AddNumberToObject(e, "chern", d.chern);
            else
                cJSON_AddNullToObject(e, "chern");
            cJSON_AddStringToObject(e, "reason", d.reason);
            cJSON_AddItemToArray(films, e);
            if (prev_cls[0] && (strcmp(prev_cls, res_class_name(d.cls)) != 0 || prev_z2 != z2)) {
                char text[200];
                snprintf(text, sizeof text, "%ld -> %ld layers: %s -> %s", prev_n, n, prev_cls,
                         res_class_name(d.cls));
                cJSON_AddItemToArray(trans, cJSON_CreateString(text));
            }
            snprintf(prev_cls, sizeof prev_cls, "%s", res_class_name(d.cls));
            prev_z2 = z2;
            prev_n = n;
            if (!json) {
                char zs[16] = "-", cs[16] = "-";
                if (z2 >= 0) snprintf(zs, sizeof zs, "%d", z2);
                if (d.chern_status == RES_DONE) snprintf(cs, sizeof cs, "%d", d.chern);
                printf("  %6ld  %6d  %-11.6f  %-28s %-4s %-6s %.2f\n", n, f->norb, d.gap_direct_ev,
                       res_class_name(d.cls), zs, cs, d.confidence);
            }
        }
        res_clear(&d);
        tb_model_free(f);
        slab_free(s);
    }
    if (status == 0 && json) {
        char *text = cJSON_PrintUnformatted(j);
        if (text) printf("%s\n", text);
        free(text);
    } else if (status == 0) {
        int nt = cJSON_GetArraySize(trans);
        if (nt == 0) printf("no change of class with thickness\n");
        for (int i = 0; i < nt; i++)
            printf("  %s\n", cJSON_GetArrayItem(trans, i)->valuestring);
    }
    cJSON_Delete(j);
    tb_model_free(bulk);
    return status;
}

typedef struct member_ref {
    int index;
    double value;
} member_ref;

static int cmp_member(const void *a, const void *b)
{
    double x = ((const member_ref *)a)->value, y = ((const member_ref *)b)->value;
    return (x > y) - (x < y);
}

int path_family(const char *set_path, const char *family, const pp_opts *o, int json, const char *figure)
{
    bs_err err;
    bs_err_clear(&err);
    ms_set *set = NULL;
    if (ms_open(set_path, &set, &err) != 0) {
        fprintf(stderr, "bandsieve path: %s\n", err.msg);
        return 1;
    }
    int n = 0, status = 0;
    member_ref *refs = calloc((size_t)ms_count(set) + 1, sizeof *refs);
    tb_model **ms = calloc((size_t)ms_count(set) + 1, sizeof *ms);
    double *vals = calloc((size_t)ms_count(set) + 1, sizeof *vals);
    const ms_entry *first = NULL;
    if (!refs || !ms || !vals) {
        fprintf(stderr, "bandsieve path: out of memory\n");
        status = 1;
        goto done;
    }
    for (int i = 0; i < ms_count(set); i++) {
        const ms_entry *e = ms_entry_at(set, i);
        if (!e->has_family || strcmp(e->family, family) != 0) continue;
        if (!first) first = e;
        refs[n].index = i;
        refs[n].value = e->family_value;
        n++;
    }
    if (n < 2) {
        fprintf(stderr,
                "bandsieve path: %s: family '%s' has %d member(s); a path needs two or more "
                "(bandsieve list %s)\n",
                set_path, family, n, set_path);
        status = 2;
        goto done;
    }
    qsort(refs, (size_t)n, sizeof *refs, cmp_member);
    for (int i = 0; i < n && status == 0; i++) {
        vals[i] = refs[i].value;
        if (ms_read(set, refs[i].index, &ms[i], &err) != 0) {
            fprintf(stderr, "bandsieve path: %s\n", err.msg);
            status = 1;
        }
    }
    pp_source *src = NULL;
    pp_result r;
    pp_result_init(&r);
    if (status == 0 && pp_source_members((const tb_model *const *)ms, vals, n, &src, &err) != 0) {
        fprintf(stderr, "bandsieve path: %s: family %s: %s\n", set_path, family, err.msg);
        status = 1;
    }
    if (status == 0 && pp_run(src, first->family_param, vals[0], vals[n - 1], o, &r, &err) != 0) {
        fprintf(stderr, "bandsieve path: family %s: %s (%s)\n", family, err.msg, bs_err_name(err.code));
        status = 1;
    }
    if (status == 0) {
        char label[400];
        snprintf(label, sizeof label, "%s family %s (%d members)", set_path, family, n);
        if (json) {
            cJSON *j = path_to_json(&r, label, first->family_unit, 1);
            cJSON *mem = cJSON_AddArrayToObject(cJSON_GetObjectItem(j, "path"), "members");
            for (int i = 0; i < n; i++) {
                cJSON *m = cJSON_CreateObject();
                cJSON_AddStringToObject(m, "id", ms[i]->id);
                cJSON_AddNumberToObject(m, "value", vals[i]);
                cJSON_AddItemToArray(mem, m);
            }
            char *text = cJSON_PrintUnformatted(j);
            if (text) printf("%s\n", text);
            free(text);
            cJSON_Delete(j);
        } else {
            printf("members:");
            for (int i = 0; i < n; i++)
                printf(" %s (%g%s%s)", ms[i]->id, vals[i], first->family_unit[0] ? " " : "",
                       first->family_unit);
            printf("\n");
            path_print(&r, label, first->family_unit, 1);
        }
        char title[200];
        snprintf(title, sizeof title, "family %s", family);
        if (path_figure(&r, figure, title, first->family_unit) != 0) status = 1;
    }
    pp_result_clear(&r);
    pp_source_free(src);
done:
    if (ms)
        for (int i = 0; i < n; i++)
            tb_model_free(ms[i]);
    free(ms);
    free(vals);
    free(refs);
    ms_free(set);
    return status;
}
