/* Material-card reader and writer. cJSON keeps no line numbers, so a message about a key finds the
 * key's line by scanning the card text for "key": (the n-th occurrence for keys inside lists). */
#include "bandsieve/card.h"

#include <cjson/cJSON.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "bandsieve/config.h"
#include "bandsieve/hopfile.h"

#define CARD_MAX_BYTES (64L << 20) /* a card with an inversion operator for 20000 states is ~2 MB */
#define CARD_POS_TOL   1e-4        /* reduced; positions are printed to 5-6 digits (common practice) */

static int key_line(const char *text, const char *key, int nth);

typedef struct card_ctx {
    const char *path;
    const char *text;
    bs_err *err;
    char *notes; /* where notes go (may be NULL), capacity notes_cap */
    size_t notes_cap;
} card_ctx;

/* Appends one line to the caller's notes: something accepted but worth saying. */
static void add_note(const card_ctx *c, const char *key, const char *what)
{
    if (!c->notes || c->notes_cap == 0) return;
    size_t used = strlen(c->notes);
    int line = key_line(c->text, key, 0);
    if (line > 0)
        snprintf(c->notes + used, c->notes_cap - used, "%s:%d: key '%s': %s\n", c->path, line, key, what);
    else
        snprintf(c->notes + used, c->notes_cap - used, "%s: key '%s': %s\n", c->path, key, what);
}

/* Line of the nth (0-based) occurrence of "key" followed by ':' in the text, or 0. */
static int key_line(const char *text, const char *key, int nth)
{
    size_t klen = strlen(key);
    int line = 1;
    for (const char *p = text; *p; p++) {
        if (*p == '\n') line++;
        if (*p != '"' || strncmp(p + 1, key, klen) != 0 || p[1 + klen] != '"') continue;
        const char *q = p + 2 + klen;
        while (*q == ' ' || *q == '\t' || *q == '\r' || *q == '\n')
            q++;
        if (*q == ':' && nth-- == 0) return line;
    }
    return 0;
}

static int fail_key(const card_ctx *c, int code, const char *key, const char *label, int nth, const char *fmt,
                    ...) __attribute__((format(printf, 6, 7)));

/* key is searched for in the text; label is what the message calls it (e.g. "orbitals[3].l"). */
static int fail_key(const card_ctx *c, int code, const char *key, const char *label, int nth, const char *fmt,
                    ...)
{
    char what[400];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    int line = key ? key_line(c->text, key, nth) : 0;
    if (line > 0) return bs_fail(c->err, code, "%s:%d: key '%s': %s", c->path, line, label, what);
    return bs_fail(c->err, code, "%s: key '%s': %s", c->path, label, what);
}

static const char *json_type(const cJSON *j)
{
    if (!j) return "nothing";
    if (cJSON_IsNumber(j)) return "a number";
    if (cJSON_IsString(j)) return "a string";
    if (cJSON_IsBool(j)) return "a boolean";
    if (cJSON_IsNull(j)) return "null";
    if (cJSON_IsArray(j)) return "a list";
    if (cJSON_IsObject(j)) return "an object";
    return "an unknown value";
}

static int json_is_int(const cJSON *j)
{
    if (!cJSON_IsNumber(j)) return 0;
    double v = j->valuedouble;
    return isfinite(v) && v == floor(v) && fabs(v) < 2147483647.0;
}

/* A required (required = 1) or optional top-level key; NULL and no error when optional and absent. */
static int get_key(const card_ctx *c, const cJSON *obj, const char *key, int required, const cJSON **out)
{
    *out = cJSON_GetObjectItemCaseSensitive(obj, key);
    if (!*out && required) return bs_fail(c->err, BS_EPARSE, "%s: missing key '%s'", c->path, key);
    return 0;
}

static int get_int(const card_ctx *c, const cJSON *obj, const char *key, int *v)
{
    const cJSON *j;
    int rc = get_key(c, obj, key, 1, &j);
    if (rc != 0) return rc;
    if (!json_is_int(j))
        return fail_key(c, BS_EPARSE, key, key, 0, "expected an integer, found %s", json_type(j));
    *v = (int)j->valuedouble;
    return 0;
}

static int get_string(const card_ctx *c, const cJSON *obj, const char *key, int required, char *dst,
                      size_t cap)
{
    const cJSON *j;
    int rc = get_key(c, obj, key, required, &j);
    if (rc != 0 || !j) return rc;
    if (!cJSON_IsString(j))
        return fail_key(c, BS_EPARSE, key, key, 0, "expected a string, found %s", json_type(j));
    if (strlen(j->valuestring) >= cap)
        return fail_key(c, BS_EINVAL, key, key, 0, "longer than %zu characters", cap - 1);
    memcpy(dst, j->valuestring, strlen(j->valuestring) + 1);
    return 0;
}

/* A list of exactly n numbers (integers when want_int). */
static int get_vector(const card_ctx *c, const cJSON *j, const char *key, const char *label, int nth, int n,
                      int want_int, double *v)
{
    if (!cJSON_IsArray(j) || cJSON_GetArraySize(j) != n)
        return fail_key(c, BS_EPARSE, key, label, nth, "expected a list of %d %s, found %s%s", n,
                        want_int ? "integers" : "numbers", json_type(j),
                        cJSON_IsArray(j) ? " of another length" : "");
    int i = 0;
    for (const cJSON *e = j->child; e; e = e->next, i++) {
        if (want_int ? !json_is_int(e) : !cJSON_IsNumber(e))
            return fail_key(c, BS_EPARSE, key, label, nth, "element %d: expected %s, found %s", i + 1,
                            want_int ? "an integer" : "a number", json_type(e));
        if (!isfinite(e->valuedouble))
            return fail_key(c, BS_EINVAL, key, label, nth, "element %d is not finite", i + 1);
        v[i] = e->valuedouble;
    }
    return 0;
}

static const char *const card_keys[] = {
    "id",        "dimension",   "lattice",  "hoppings", "occupied_bands", "electrons",
    "spinful",   "spin_layout", "orbitals", "formula",  "source",         "fermi_energy_eV",
    "inversion", "magnetism",   "comment",  "meta",     "family",         NULL};
static const char *const family_keys[] = {"name", "parameter", "unit", "value", NULL};

/* Edit distance (insertions, deletions, substitutions, and swaps of neighbours) between two
 * short keys, capped at 9: enough to suggest the key a typo was meant to be. */
static int key_distance(const char *a, const char *b)
{
    size_t na = strlen(a), nb = strlen(b);
    if (na > 40 || nb > 40) return 9;
    int d[41][41];
    for (size_t i = 0; i <= na; i++)
        d[i][0] = (int)i;
    for (size_t j = 0; j <= nb; j++)
        d[0][j] = (int)j;
    for (size_t i = 1; i <= na; i++)
        for (size_t j = 1; j <= nb; j++) {
            int sub = d[i - 1][j - 1] + (a[i - 1] != b[j - 1]);
            int del = d[i - 1][j] + 1, ins = d[i][j - 1] + 1;
            int best = sub < del ? sub : del;
            best = best < ins ? best : ins;
            if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] && d[i - 2][j - 2] + 1 < best)
                best = d[i - 2][j - 2] + 1;
            d[i][j] = best;
        }
    return d[na][nb] < 9 ? d[na][nb] : 9;
}

/* The allowed key nearest to key when it is close enough to be a typo (distance <= 2, and less
 * than half the key's length), else NULL. */
static const char *suggest_key(const char *key, const char *const *allowed)
{
    const char *best = NULL;
    int bestd = 3;
    for (const char *const *k = allowed; *k; k++) {
        int dist = key_distance(key, *k);
        if (dist < bestd && 2 * (size_t)dist < strlen(*k)) {
            bestd = dist;
            best = *k;
        }
    }
    return best;
}

static int check_unknown_keys(const card_ctx *c, const cJSON *obj, const char *const *allowed,
                              const char *where, int nth)
{
    for (const cJSON *e = obj->child; e; e = e->next) {
        int ok = 0;
        for (const char *const *k = allowed; *k && !ok; k++)
            ok = strcmp(*k, e->string) == 0;
        char label[200];
        snprintf(label, sizeof label, "%s%s", where, e->string);
        if (!ok) {
            const char *near = suggest_key(e->string, allowed);
            if (near)
                return fail_key(c, BS_EPARSE, e->string, label, nth, "unknown key; did you mean '%s%s'?",
                                where, near);
            return fail_key(c, BS_EPARSE, e->string, label, nth,
                            "unknown key (extra information goes in the object 'meta')");
        }
        /* JSON allows a repeated key and cJSON keeps the first: refuse it rather than guess. */
        for (const cJSON *f = obj->child; f != e; f = f->next)
            if (strcmp(f->string, e->string) == 0)
                return fail_key(c, BS_EPARSE, e->string, label, nth + 1, "key given twice");
    }
    return 0;
}

int card_id_ok(const char *id)
{
    size_t n = strlen(id);
    if (n == 0 || n > 127 || id[0] == '.') return 0;
    for (size_t i = 0; i < n; i++) {
        char ch = id[i];
        int ok = (ch >= 'A' && ch <= 'Z') || (ch >= 'a' && ch <= 'z') || (ch >= '0' && ch <= '9') ||
                 ch == '_' || ch == '.' || ch == '+' || ch == '-';
        if (!ok) return 0;
    }
    return 1;
}

/* The fields read before the table: they fix how the table is checked. */
typedef struct card_head {
    char id[128];
    int dim, nocc, spinful, layout, nspatial;
    double lattice[3][3];
    char table[4096];
} card_head;

static int read_lattice(const card_ctx *c, const cJSON *root, double lat[3][3])
{
    const cJSON *j;
    int rc = get_key(c, root, "lattice", 1, &j);
    if (rc != 0) return rc;
    if (!cJSON_IsArray(j) || cJSON_GetArraySize(j) != 3)
        return fail_key(c, BS_EPARSE, "lattice", "lattice", 0, "expected a list of 3 rows, found %s",
                        json_type(j));
    int i = 0;
    for (const cJSON *row = j->child; row; row = row->next, i++)
        if ((rc = get_vector(c, row, "lattice", "lattice", 0, 3, 0, lat[i])) != 0) return rc;
    for (i = 0; i < 3; i++) {
        double len = sqrt(lat[i][0] * lat[i][0] + lat[i][1] * lat[i][1] + lat[i][2] * lat[i][2]);
        if (!(len >= BS_MIN_LATTICE_A && len <= BS_MAX_LATTICE_A))
            return fail_key(c, BS_EINVAL, "lattice", "lattice", 0, "row %d has length %g A, outside %g..%g A",
                            i + 1, len, BS_MIN_LATTICE_A, BS_MAX_LATTICE_A);
    }
    double det = lat[0][0] * (lat[1][1] * lat[2][2] - lat[1][2] * lat[2][1]) -
                 lat[0][1] * (lat[1][0] * lat[2][2] - lat[1][2] * lat[2][0]) +
                 lat[0][2] * (lat[1][0] * lat[2][1] - lat[1][1] * lat[2][0]);
    /* A cell below 1e-6 A^3 is no crystal: the rows are dependent or the units are wrong. */
    if (!(fabs(det) > 1e-6))
        return fail_key(c, BS_EINVAL, "lattice", "lattice", 0,
                        "rows are linearly dependent (volume %.3g A^3)", det);
    return 0;
}

static int read_spin(const card_ctx *c, const cJSON *root, card_head *h)
{
    const cJSON *j;
    int rc = get_key(c, root, "spinful", 1, &j);
    if (rc != 0) return rc;
    if (!cJSON_IsBool(j))
        return fail_key(c, BS_EPARSE, "spinful", "spinful", 0, "expected true or false, found %s",
                        json_type(j));
    h->spinful = cJSON_IsTrue(j);
    const cJSON *lay = cJSON_GetObjectItemCaseSensitive(root, "spin_layout");
    if (!h->spinful) {
        /* Cards are often made from one template: a layout on a spinless card says nothing wrong,
         * it just has no states to order. Accepted and ignored, with a note. */
        if (lay) add_note(c, "spin_layout", "ignored: the model is spinless (one state per orbital)");
        h->layout = TB_SPIN_NONE;
        return 0;
    }
    if (!lay)
        return bs_fail(c->err, BS_EPARSE, "%s: missing key 'spin_layout' (required when spinful)", c->path);
    if (!cJSON_IsString(lay))
        return fail_key(c, BS_EPARSE, "spin_layout", "spin_layout", 0,
                        "expected \"blocks\" or \"interleaved\", found %s", json_type(lay));
    if (strcmp(lay->valuestring, "blocks") == 0)
        h->layout = TB_SPIN_BLOCKS;
    else if (strcmp(lay->valuestring, "interleaved") == 0)
        h->layout = TB_SPIN_INTERLEAVED;
    else
        return fail_key(c, BS_EINVAL, "spin_layout", "spin_layout", 0,
                        "expected \"blocks\" or \"interleaved\", found \"%.40s\"", lay->valuestring);
    return 0;
}

/* The table path: relative names are taken from the card's folder. */
static int table_path(const card_ctx *c, const char *name, char *dst, size_t cap)
{
    const char *slash = strrchr(c->path, '/');
    int n;
    if (name[0] == '/' || !slash)
        n = snprintf(dst, cap, "%s", name);
    else
        n = snprintf(dst, cap, "%.*s/%s", (int)(slash - c->path), c->path, name);
    if (n < 0 || (size_t)n >= cap)
        return fail_key(c, BS_EINVAL, "hoppings", "hoppings", 0, "path longer than %zu characters", cap - 1);
    return 0;
}

/* The filling: "occupied_bands", or "electrons", the electron count of the Wannier subspace (the
 * bands of the table, not the crystal's total). A spinful band holds one electron; a spinless model
 * stands for two spin-degenerate copies, so each of its bands holds two and the count must be even
 * (an odd count half-fills a band: a metal by counting, which we do not guess into a filling). */
static int read_filling(const card_ctx *c, const cJSON *root, card_head *h)
{
    const cJSON *ob = cJSON_GetObjectItemCaseSensitive(root, "occupied_bands");
    const cJSON *el = cJSON_GetObjectItemCaseSensitive(root, "electrons");
    if (ob && el)
        return fail_key(c, BS_EPARSE, "electrons", "electrons", 0,
                        "give either 'occupied_bands' or 'electrons', not both");
    if (!el) return get_int(c, root, "occupied_bands", &h->nocc);
    if (!json_is_int(el))
        return fail_key(c, BS_EPARSE, "electrons", "electrons", 0, "expected an integer, found %s",
                        json_type(el));
    int ne = (int)el->valuedouble;
    if (ne < 1)
        return fail_key(c, BS_EINVAL, "electrons", "electrons", 0, "expected a positive count, found %d", ne);
    if (h->spinful) {
        h->nocc = ne;
        return 0;
    }
    if (ne % 2)
        return fail_key(c, BS_EINVAL, "electrons", "electrons", 0,
                        "%d electrons in a spinless model (2 per band) "
                        "leave a band half filled; give 'occupied_bands' or a spinful model",
                        ne);
    h->nocc = ne / 2;
    return 0;
}

static int read_head(const card_ctx *c, const cJSON *root, card_head *h)
{
    int rc = check_unknown_keys(c, root, card_keys, "", 0);
    if (rc == 0) rc = get_string(c, root, "id", 1, h->id, sizeof h->id);
    if (rc == 0 && !card_id_ok(h->id))
        rc = fail_key(c, BS_EINVAL, "id", "id", 0,
                      "'%s' is not a valid id (1..127 of A-Z a-z 0-9 _ . + -, "
                      "not starting with '.')",
                      h->id);
    if (rc == 0) rc = get_int(c, root, "dimension", &h->dim);
    if (rc == 0 && h->dim != 2 && h->dim != 3)
        rc = fail_key(c, BS_EINVAL, "dimension", "dimension", 0, "expected 2 or 3, found %d", h->dim);
    if (rc == 0) rc = read_lattice(c, root, h->lattice);
    char name[2048] = "";
    if (rc == 0) rc = get_string(c, root, "hoppings", 1, name, sizeof name);
    if (rc == 0 && !name[0]) rc = fail_key(c, BS_EINVAL, "hoppings", "hoppings", 0, "empty path");
    if (rc == 0) rc = table_path(c, name, h->table, sizeof h->table);
    if (rc == 0) rc = read_spin(c, root, h);
    if (rc == 0) rc = read_filling(c, root, h);
    const cJSON *orb = NULL;
    if (rc == 0) rc = get_key(c, root, "orbitals", 1, &orb);
    if (rc == 0 && (!cJSON_IsArray(orb) || cJSON_GetArraySize(orb) < 1))
        rc = fail_key(c, BS_EPARSE, "orbitals", "orbitals", 0,
                      "expected a non-empty list of orbitals, found %s",
                      cJSON_IsArray(orb) ? "an empty list" : json_type(orb));
    if (rc == 0) h->nspatial = cJSON_GetArraySize(orb);
    return rc;
}

static int read_orbitals(const card_ctx *c, const cJSON *root, tb_model *m)
{
    static const char *const orb_keys[] = {"position", "l", "label", "shape", NULL};
    const cJSON *orb = cJSON_GetObjectItemCaseSensitive(root, "orbitals");
    int i = 0, rc = 0;
    char label[64];
    for (const cJSON *o = orb->child; o && rc == 0; o = o->next, i++) {
        snprintf(label, sizeof label, "orbitals[%d]", i + 1);
        if (!cJSON_IsObject(o))
            return fail_key(c, BS_EPARSE, "orbitals", label, 0, "expected an object, found %s", json_type(o));
        snprintf(label, sizeof label, "orbitals[%d].", i + 1);
        if ((rc = check_unknown_keys(c, o, orb_keys, label, 0)) != 0) return rc;
        const cJSON *pos = cJSON_GetObjectItemCaseSensitive(o, "position");
        const cJSON *l = cJSON_GetObjectItemCaseSensitive(o, "l");
        snprintf(label, sizeof label, "orbitals[%d].position", i + 1);
        if (!pos) return fail_key(c, BS_EPARSE, "orbitals", label, 0, "missing");
        if ((rc = get_vector(c, pos, "position", label, i, 3, 0, m->orb_pos[i])) != 0) return rc;
        snprintf(label, sizeof label, "orbitals[%d].l", i + 1);
        if (!l) return fail_key(c, BS_EPARSE, "orbitals", label, 0, "missing");
        if (!json_is_int(l))
            return fail_key(c, BS_EPARSE, "l", label, i, "expected an integer 0..3, found %s", json_type(l));
        if (l->valuedouble < 0 || l->valuedouble > 3)
            return fail_key(c, BS_EINVAL, "l", label, i, "expected 0..3, found %d", (int)l->valuedouble);
        m->orb_l[i] = (int)l->valuedouble;
        const cJSON *shape = cJSON_GetObjectItemCaseSensitive(o, "shape");
        if (!shape) continue;
        snprintf(label, sizeof label, "orbitals[%d].shape", i + 1);
        int idx = cJSON_IsString(shape) ? tb_shape_index(m->orb_l[i], shape->valuestring) : -1;
        if (idx < 0)
            return fail_key(c, BS_EINVAL, "shape", label, i,
                            "expected a shape of l = %d (%s%s%s...), found %s", m->orb_l[i],
                            tb_shape_name(m->orb_l[i], 0), m->orb_l[i] > 0 ? ", " : "",
                            m->orb_l[i] > 0 ? tb_shape_name(m->orb_l[i], 1) : "",
                            cJSON_IsString(shape) ? shape->valuestring : json_type(shape));
        if (!m->orb_shape) {
            m->orb_shape = malloc((size_t)m->nspatial * sizeof *m->orb_shape);
            if (!m->orb_shape) return bs_fail(c->err, BS_ENOMEM, "out of memory (orbital shapes)");
            for (int q = 0; q < m->nspatial; q++)
                m->orb_shape[q] = -1;
        }
        m->orb_shape[i] = idx;
    }
    return rc;
}

static int read_inversion_entry(const card_ctx *c, const cJSON *e, int i, tb_model *m)
{
    static const char *const inv_keys[] = {"maps_to", "sign", "shift", NULL};
    char label[64];
    snprintf(label, sizeof label, "inversion[%d]", i + 1);
    if (!cJSON_IsObject(e))
        return fail_key(c, BS_EPARSE, "inversion", label, 0, "expected an object, found %s", json_type(e));
    snprintf(label, sizeof label, "inversion[%d].", i + 1);
    int rc = check_unknown_keys(c, e, inv_keys, label, 0);
    if (rc != 0) return rc;
    const cJSON *to = cJSON_GetObjectItemCaseSensitive(e, "maps_to");
    const cJSON *sg = cJSON_GetObjectItemCaseSensitive(e, "sign");
    const cJSON *sh = cJSON_GetObjectItemCaseSensitive(e, "shift");
    snprintf(label, sizeof label, "inversion[%d].maps_to", i + 1);
    if (!json_is_int(to))
        return fail_key(c, BS_EPARSE, to ? "maps_to" : "inversion", label, to ? i : 0,
                        "expected a state number 1..%d, found %s", m->norb, json_type(to));
    if (to->valuedouble < 1 || to->valuedouble > m->norb)
        return fail_key(c, BS_EINVAL, "maps_to", label, i, "expected 1..%d, found %d", m->norb,
                        (int)to->valuedouble);
    snprintf(label, sizeof label, "inversion[%d].sign", i + 1);
    if (!json_is_int(sg) || fabs(sg->valuedouble) != 1.0)
        return fail_key(c, BS_EPARSE, sg ? "sign" : "inversion", label, sg ? i : 0,
                        "expected +1 or -1, found %s", json_type(sg));
    snprintf(label, sizeof label, "inversion[%d].shift", i + 1);
    if (!sh) return fail_key(c, BS_EPARSE, "inversion", label, 0, "missing");
    double shift[3];
    if ((rc = get_vector(c, sh, "shift", label, i, 3, 1, shift)) != 0) return rc;
    m->inv_perm[i] = (int)to->valuedouble - 1;
    m->inv_sign[i] = sg->valuedouble;
    for (int d = 0; d < 3; d++)
        m->inv_shift[i][d] = (int)shift[d];
    return 0;
}

/* Each state must land on a state of the same spin at the inverted position (see card.h). */
static int check_inversion_geometry(const card_ctx *c, tb_model *m)
{
    char label[64];
    int *hit = calloc((size_t)m->norb, sizeof *hit);
    if (!hit) return bs_fail(c->err, BS_ENOMEM, "%s: out of memory", c->path);
    int rc = 0;
    for (int i = 0; i < m->norb && rc == 0; i++) {
        int j = m->inv_perm[i];
        snprintf(label, sizeof label, "inversion[%d]", i + 1);
        if (hit[j]++)
            rc = fail_key(c, BS_EINVAL, "maps_to", label, i, "state %d is the image of two states", j + 1);
        else if (tb_state_spin(m, i) != tb_state_spin(m, j))
            rc = fail_key(c, BS_EINVAL, "maps_to", label, i, "maps state %d to state %d of the other spin",
                          i + 1, j + 1);
        const double *ti = m->orb_pos[tb_state_orbital(m, i)], *tj = m->orb_pos[tb_state_orbital(m, j)];
        int ncheck = m->dim == 2 ? 2 : 3;
        for (int d = 0; d < ncheck && rc == 0; d++)
            if (fabs(-ti[d] - tj[d] - m->inv_shift[i][d]) > CARD_POS_TOL)
                rc = fail_key(c, BS_EINVAL, "shift", label, i,
                              "-tau_%d - tau_%d - shift = %.6g in component "
                              "%d, expected 0 (shift = -tau_i - tau_j)",
                              i + 1, j + 1, -ti[d] - tj[d] - m->inv_shift[i][d], d + 1);
        if (rc == 0 && m->dim == 2 && m->inv_shift[i][2] != 0)
            rc = fail_key(c, BS_EINVAL, "shift", label, i, "third component must be 0 in 2D");
    }
    free(hit);
    return rc;
}

static int read_inversion(const card_ctx *c, const cJSON *root, tb_model *m)
{
    const cJSON *inv = cJSON_GetObjectItemCaseSensitive(root, "inversion");
    if (!inv) return 0;
    if (!cJSON_IsArray(inv) || cJSON_GetArraySize(inv) != m->norb)
        return fail_key(c, BS_EINVAL, "inversion", "inversion", 0,
                        "expected a list of %d entries (one per "
                        "state), found %s%s",
                        m->norb, json_type(inv), cJSON_IsArray(inv) ? " of another length" : "");
    m->inv_perm = malloc((size_t)m->norb * sizeof *m->inv_perm);
    m->inv_sign = malloc((size_t)m->norb * sizeof *m->inv_sign);
    m->inv_shift = malloc((size_t)m->norb * sizeof *m->inv_shift);
    if (!m->inv_perm || !m->inv_sign || !m->inv_shift)
        return bs_fail(c->err, BS_ENOMEM, "%s: out of memory for the inversion operator", c->path);
    m->has_inversion_op = 1;
    int i = 0, rc = 0;
    for (const cJSON *e = inv->child; e && rc == 0; e = e->next, i++)
        rc = read_inversion_entry(c, e, i, m);
    if (rc == 0) rc = check_inversion_geometry(c, m);
    return rc;
}

/* "family": {"name": ..., "parameter": ..., "unit": ..., "value": ...}; unit is optional. */
static int read_family(const card_ctx *c, const cJSON *root, tb_model *m)
{
    const cJSON *f = cJSON_GetObjectItemCaseSensitive(root, "family");
    if (!f) return 0;
    if (!cJSON_IsObject(f))
        return fail_key(c, BS_EPARSE, "family", "family", 0,
                        "expected an object {name, parameter, unit, value}, "
                        "found %s",
                        json_type(f));
    int rc = check_unknown_keys(c, f, family_keys, "family.", 0);
    if (rc == 0) rc = get_string(c, f, "name", 1, m->family, sizeof m->family);
    if (rc == 0) rc = get_string(c, f, "parameter", 1, m->family_param, sizeof m->family_param);
    if (rc == 0) rc = get_string(c, f, "unit", 0, m->family_unit, sizeof m->family_unit);
    if (rc != 0) return rc;
    if (!card_id_ok(m->family))
        return fail_key(c, BS_EINVAL, "name", "family.name", 0,
                        "'%s': expected 1-63 characters from [A-Za-z0-9_.+-]", m->family);
    if (!m->family_param[0]) return fail_key(c, BS_EINVAL, "parameter", "family.parameter", 0, "empty");
    const cJSON *v = cJSON_GetObjectItemCaseSensitive(f, "value");
    if (!v) return bs_fail(c->err, BS_EPARSE, "%s: missing key 'family.value'", c->path);
    if (!cJSON_IsNumber(v) || !isfinite(v->valuedouble))
        return fail_key(c, BS_EPARSE, "value", "family.value", 0, "expected a finite number, found %s",
                        json_type(v));
    m->family_value = v->valuedouble;
    m->has_family = 1;
    return 0;
}

static int read_optional(const card_ctx *c, const cJSON *root, tb_model *m)
{
    int rc = get_string(c, root, "formula", 0, m->formula, sizeof m->formula);
    if (rc == 0) rc = get_string(c, root, "source", 0, m->source, sizeof m->source);
    const cJSON *ef = cJSON_GetObjectItemCaseSensitive(root, "fermi_energy_eV");
    if (rc == 0 && ef) {
        if (!cJSON_IsNumber(ef))
            return fail_key(c, BS_EPARSE, "fermi_energy_eV", "fermi_energy_eV", 0,
                            "expected a number, found %s", json_type(ef));
        if (!isfinite(ef->valuedouble) || fabs(ef->valuedouble) > BS_MAX_HOPPING_EV)
            return fail_key(c, BS_EINVAL, "fermi_energy_eV", "fermi_energy_eV", 0,
                            "%g eV is outside +-%g eV (not finite or wrong units)", ef->valuedouble,
                            BS_MAX_HOPPING_EV);
        m->has_fermi = 1;
        m->fermi_ev = ef->valuedouble;
    }
    const cJSON *mag = cJSON_GetObjectItemCaseSensitive(root, "magnetism");
    if (rc == 0 && mag) {
        int v = cJSON_IsString(mag) ? tb_magnetism_parse(mag->valuestring) : -1;
        if (v < 0)
            return fail_key(c, cJSON_IsString(mag) ? BS_EINVAL : BS_EPARSE, "magnetism", "magnetism", 0,
                            "expected \"none\", \"magnetic\" or \"unknown\", found %s",
                            cJSON_IsString(mag) ? "another string" : json_type(mag));
        m->magnetism = v;
    }
    const cJSON *cm = cJSON_GetObjectItemCaseSensitive(root, "comment");
    if (rc == 0 && cm && !cJSON_IsString(cm))
        return fail_key(c, BS_EPARSE, "comment", "comment", 0, "expected a string, found %s", json_type(cm));
    const cJSON *meta = cJSON_GetObjectItemCaseSensitive(root, "meta");
    if (rc == 0 && meta && !cJSON_IsObject(meta))
        return fail_key(c, BS_EPARSE, "meta", "meta", 0, "expected an object, found %s", json_type(meta));
    /* The whole card is kept as provenance (set dataset "card", catalogue materials.card_json). */
    if (rc == 0 && !(m->card_json = cJSON_PrintUnformatted(root)))
        return bs_fail(c->err, BS_ENOMEM, "%s: out of memory", c->path);
    return rc;
}

/* Reads the table and checks it against the card: state count, then fills the card fields. */
static int build_model(const card_ctx *c, const cJSON *root, const card_head *h, int flags, tb_model **out)
{
    tb_model *m = NULL;
    int rc = hop_read(h->table, h->spinful, &m, c->err);
    if (rc != 0) {
        int line = key_line(c->text, "hoppings", 0);
        return line ? bs_err_context(c->err, "%s:%d: key 'hoppings': ", c->path, line)
                    : bs_err_context(c->err, "%s: key 'hoppings': ", c->path);
    }
    int want = (h->spinful ? 2 : 1) * h->nspatial;
    if (m->norb != want) {
        rc = fail_key(c, BS_EINVAL, "orbitals", "orbitals", 0,
                      "%d orbitals%s need %d states, but the table %s "
                      "has %d",
                      h->nspatial, h->spinful ? " (spinful)" : "", want, h->table, m->norb);
        goto done;
    }
    if (!(flags & CARD_NO_VALIDATE) && (h->nocc < 1 || h->nocc >= m->norb)) {
        rc = fail_key(c, BS_EINVAL, "occupied_bands", "occupied_bands", 0,
                      "expected 1..%d for %d states, "
                      "found %d",
                      m->norb - 1, m->norb, h->nocc);
        goto done;
    }
    memcpy(m->id, h->id, sizeof m->id);
    m->dim = h->dim;
    memcpy(m->lattice, h->lattice, sizeof m->lattice);
    m->nocc = h->nocc;
    m->spin_layout = h->layout;
    if ((rc = read_orbitals(c, root, m)) != 0) goto done;
    if ((rc = read_optional(c, root, m)) != 0) goto done;
    if ((rc = read_family(c, root, m)) != 0) goto done;
    if ((rc = read_inversion(c, root, m)) != 0) goto done;
    if (!(flags & CARD_NO_VALIDATE)) {
        rc = tb_model_validate(m, BS_HERMITIAN_TOL_EV, h->table, c->err);
        if (rc != 0) {
            bs_err_context(c->err, "%s: ", c->path);
            goto done;
        }
    }
    *out = m;
    m = NULL;
done:
    tb_model_free(m);
    return rc;
}

static int slurp(const char *path, char **text, bs_err *err)
{
    *text = NULL;
    struct stat st;
    if (stat(path, &st) == 0 && !S_ISREG(st.st_mode))
        return bs_fail(err, BS_EIO, "%s: not a regular file (a card is a JSON file)", path);
    FILE *fp = fopen(path, "rb");
    if (!fp) return bs_fail(err, BS_EIO, "%s: cannot open card: %s", path, strerror(errno));
    int rc = 0;
    char *buf = NULL;
    if (fseek(fp, 0, SEEK_END) != 0) {
        rc = bs_fail(err, BS_EIO, "%s: cannot read card: %s", path, strerror(errno));
        goto done;
    }
    long size = ftell(fp);
    if (size < 0 || size > CARD_MAX_BYTES) {
        rc = bs_fail(err, BS_EINVAL, "%s: card size %ld bytes outside 0..%ld", path, size, CARD_MAX_BYTES);
        goto done;
    }
    rewind(fp);
    buf = malloc((size_t)size + 1);
    if (!buf) {
        rc = bs_fail(err, BS_ENOMEM, "%s: out of memory for the card", path);
        goto done;
    }
    if (fread(buf, 1, (size_t)size, fp) != (size_t)size) {
        rc = bs_fail(err, BS_EIO, "%s: cannot read card: %s", path, strerror(errno));
        goto done;
    }
    buf[size] = '\0';
    if (strlen(buf) != (size_t)size) {
        rc = bs_fail(err, BS_EPARSE, "%s: card holds a NUL byte (not a text file)", path);
        goto done;
    }
    *text = buf;
    buf = NULL;
done:
    free(buf);
    fclose(fp);
    return rc;
}

static int json_parse(const card_ctx *c, cJSON **root)
{
    const char *end = NULL;
    *root = cJSON_ParseWithOpts(c->text, &end, 1);
    if (*root && cJSON_IsObject(*root)) return 0;
    if (*root)
        return bs_fail(c->err, BS_EPARSE, "%s:1: expected a JSON object, found %s", c->path,
                       json_type(*root));
    int line = 1;
    const char *stop = end ? end : c->text;
    for (const char *p = c->text; p < stop && *p; p++)
        line += *p == '\n';
    char near[24];
    snprintf(near, sizeof near, "%s", stop);
    for (char *p = near; *p; p++)
        if (*p == '\n' || *p == '\r' || *p == '\t') *p = ' ';
    return bs_fail(c->err, BS_EPARSE, "%s:%d: JSON syntax error near '%s'", c->path, line, near);
}

int card_read_notes(const char *path, int flags, tb_model **out, char *notes, size_t cap, bs_err *err)
{
    *out = NULL;
    if (notes && cap) notes[0] = '\0';
    char *text = NULL;
    cJSON *root = NULL;
    card_head *h = calloc(1, sizeof *h);
    if (!h) return bs_fail(err, BS_ENOMEM, "%s: out of memory", path);
    int rc = slurp(path, &text, err);
    if (rc != 0) goto done;
    card_ctx c = {path, text, err, notes, cap};
    if ((rc = json_parse(&c, &root)) != 0) goto done;
    if ((rc = read_head(&c, root, h)) != 0) goto done;
    rc = build_model(&c, root, h, flags, out);
done:
    cJSON_Delete(root);
    free(text);
    free(h);
    return rc;
}

int card_read_opts(const char *path, int flags, tb_model **out, bs_err *err)
{
    return card_read_notes(path, flags, out, NULL, 0, err);
}

int card_read(const char *path, tb_model **out, bs_err *err)
{
    return card_read_opts(path, 0, out, err);
}

static cJSON *json_vec(const double *v, int n)
{
    cJSON *a = cJSON_CreateArray();
    for (int i = 0; a && i < n; i++)
        cJSON_AddItemToArray(a, cJSON_CreateNumber(v[i]));
    return a;
}

static cJSON *card_json(const tb_model *m, const char *table_name)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "id", m->id);
    if (m->formula[0]) cJSON_AddStringToObject(root, "formula", m->formula);
    if (m->source[0]) cJSON_AddStringToObject(root, "source", m->source);
    cJSON_AddNumberToObject(root, "dimension", m->dim);
    cJSON *lat = cJSON_AddArrayToObject(root, "lattice");
    for (int i = 0; lat && i < 3; i++)
        cJSON_AddItemToArray(lat, json_vec(m->lattice[i], 3));
    cJSON_AddStringToObject(root, "hoppings", table_name);
    cJSON_AddNumberToObject(root, "occupied_bands", m->nocc);
    cJSON_AddBoolToObject(root, "spinful", m->spinful);
    if (m->spinful)
        cJSON_AddStringToObject(root, "spin_layout",
                                m->spin_layout == TB_SPIN_INTERLEAVED ? "interleaved" : "blocks");
    if (m->has_fermi) cJSON_AddNumberToObject(root, "fermi_energy_eV", m->fermi_ev);
    if (m->magnetism != TB_MAG_UNKNOWN)
        cJSON_AddStringToObject(root, "magnetism", tb_magnetism_name(m->magnetism));
    if (m->has_family) {
        cJSON *f = cJSON_AddObjectToObject(root, "family");
        cJSON_AddStringToObject(f, "name", m->family);
        cJSON_AddStringToObject(f, "parameter", m->family_param);
        if (m->family_unit[0]) cJSON_AddStringToObject(f, "unit", m->family_unit);
        cJSON_AddNumberToObject(f, "value", m->family_value);
    }
    cJSON *orb = cJSON_AddArrayToObject(root, "orbitals");
    for (int i = 0; orb && i < m->nspatial; i++) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddItemToObject(o, "position", json_vec(m->orb_pos[i], 3));
        cJSON_AddNumberToObject(o, "l", m->orb_l[i]);
        if (m->orb_shape && m->orb_shape[i] >= 0)
            cJSON_AddStringToObject(o, "shape", tb_shape_name(m->orb_l[i], m->orb_shape[i]));
        cJSON_AddItemToArray(orb, o);
    }
    if (m->has_inversion_op) {
        cJSON *inv = cJSON_AddArrayToObject(root, "inversion");
        for (int i = 0; inv && i < m->norb; i++) {
            cJSON *e = cJSON_CreateObject();
            cJSON_AddNumberToObject(e, "maps_to", m->inv_perm[i] + 1);
            cJSON_AddNumberToObject(e, "sign", m->inv_sign[i]);
            double sh[3] = {m->inv_shift[i][0], m->inv_shift[i][1], m->inv_shift[i][2]};
            cJSON_AddItemToObject(e, "shift", json_vec(sh, 3));
            cJSON_AddItemToArray(inv, e);
        }
    }
    return root;
}

int card_write(const tb_model *m, const char *dir, char *card_path, size_t cap, bs_err *err)
{
    if (!card_id_ok(m->id)) return bs_fail(err, BS_EINVAL, "cannot write a card for the id '%s'", m->id);
    char table[4096], card[4096], table_name[160];
    snprintf(table_name, sizeof table_name, "%s_hop.dat", m->id);
    int nt = snprintf(table, sizeof table, "%s/%s", dir, table_name);
    int nc = snprintf(card, sizeof card, "%s/%s.json", dir, m->id);
    if (nt < 0 || nc < 0 || (size_t)nt >= sizeof table || (size_t)nc >= sizeof card)
        return bs_fail(err, BS_EINVAL, "%s: folder name too long", dir);
    char comment[200];
    snprintf(comment, sizeof comment, "bandsieve hopping table of %s", m->id);
    int rc = hop_write(table, m, comment, err);
    if (rc != 0) return rc;
    cJSON *root = card_json(m, table_name);
    char *text = root ? cJSON_Print(root) : NULL;
    cJSON_Delete(root);
    if (!text) return bs_fail(err, BS_ENOMEM, "%s: out of memory printing the card", card);
    FILE *fp = fopen(card, "wb");
    if (!fp)
        rc = bs_fail(err, BS_EIO, "%s: cannot create card: %s", card, strerror(errno));
    else {
        int bad = fputs(text, fp) < 0 || fputc('\n', fp) == EOF;
        if (fclose(fp) != 0 || bad) rc = bs_fail(err, BS_EIO, "%s: write failed: %s", card, strerror(errno));
    }
    cJSON_free(text);
    if (rc == 0 && card_path) snprintf(card_path, cap, "%s", card);
    return rc;
}
