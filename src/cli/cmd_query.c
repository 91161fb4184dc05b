/* `bandsieve query CAT.sqlite "SQL" | --view NAME [--format table|csv|json]`: runs one read-only
 * statement on a catalogue opened read-only and prints the rows. */
#include <ctype.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/catalogue.h"
#include "commands.h"

enum { FMT_TABLE, FMT_CSV, FMT_JSON };

/* Set by SIGTERM/SIGINT: the running statement stops at SQLite's next progress check. */
static volatile sig_atomic_t query_stop = 0;

static void on_query_signal(int sig)
{
    (void)sig;
    query_stop = 1;
}

/* Text columns of a table are at most this wide; longer cells wrap onto further lines of the
 * row, so a message is never cut (csv and json print every cell on one line). */
#define QUERY_CELL_MAX 60

static void query_usage(FILE *out)
{
    fprintf(out,
            "usage: bandsieve query CAT.sqlite \"SQL\" [--format table|csv|json]\n"
            "       bandsieve query CAT.sqlite --view NAME [--format table|csv|json]\n\n"
            "Runs one read-only SQL statement (or SELECT * FROM a view) on a catalogue and prints\n"
            "the rows. The catalogue is opened read-only, and statements that would change it\n"
            "(INSERT, UPDATE, DELETE, CREATE, DROP, ATTACH, BEGIN/COMMIT, PRAGMAs that set values)\n"
            "are refused.\n\n"
            "  --view NAME     a catalogue view: summary, candidates, failures, top_spin_hall,\n"
            "                  surfaces, run_progress\n"
            "  --timeout S     stop the statement after S seconds (exit status 1); SIGTERM and\n"
            "                  SIGINT stop it at once in any case\n"
            "  --format FMT    table (default; aligned columns, numbers right-aligned, NULL blank,\n"
            "                  text wrapped at %d characters, times in seconds), csv (RFC 4180, NULL\n"
            "                  empty, header row)\n"
            "                  or json (a list of objects, NULL as null)\n"
            "  -h, --help      this text\n\n"
            "Tables, columns and views are described in db/README.md.\n",
            QUERY_CELL_MAX);
}

/* All rows kept as text for the table layout (widths need every row first). */
typedef struct q_table {
    int ncol;
    char **name;
    size_t nrow, cap;
    char **cell; /* nrow * ncol, NULL for SQL NULL */
    int *type;   /* nrow * ncol */
} q_table;

typedef struct q_out {
    int format;
    FILE *fp;
    q_table t;
    long long nrow; /* rows streamed (csv, json) */
} q_out;

static void csv_field(FILE *fp, const char *s)
{
    if (!s) return;
    if (!strpbrk(s, ",\"\r\n")) {
        fputs(s, fp);
        return;
    }
    fputc('"', fp);
    for (const char *p = s; *p; p++) {
        if (*p == '"') fputc('"', fp);
        fputc(*p, fp);
    }
    fputc('"', fp);
}

static void json_string(FILE *fp, const char *s)
{
    fputc('"', fp);
    for (const unsigned char *p = (const unsigned char *)s; *p; p++) {
        if (*p == '"' || *p == '\\')
            fprintf(fp, "\\%c", *p);
        else if (*p == '\n')
            fputs("\\n", fp);
        else if (*p == '\t')
            fputs("\\t", fp);
        else if (*p == '\r')
            fputs("\\r", fp);
        else if (*p < 0x20)
            fprintf(fp, "\\u%04x", *p);
        else
            fputc(*p, fp);
    }
    fputc('"', fp);
}

static void json_value(FILE *fp, const char *s, int type)
{
    if (!s || type == CAT_COL_NULL) {
        fputs("null", fp);
        return;
    }
    if (type == CAT_COL_INTEGER) {
        fputs(s, fp);
        return;
    }
    if (type == CAT_COL_REAL) {
        /* The text already reads back as the exact double (cat_query); JSON has no infinity. */
        if (isfinite(strtod(s, NULL)))
            fputs(s, fp);
        else
            fputs("null", fp);
        return;
    }
    json_string(fp, s);
}

static int row_stream(q_out *o, const cat_row *row)
{
    if (o->format == FMT_CSV) {
        for (int i = 0; i < row->ncol; i++) {
            if (i) fputc(',', o->fp);
            csv_field(o->fp, row->index < 0 ? row->name[i] : row->text[i]);
        }
        fputs("\r\n", o->fp);
        return 0;
    }
    if (row->index < 0) return 0;
    fputs(o->nrow++ == 0 ? "[\n  {" : ",\n  {", o->fp);
    for (int i = 0; i < row->ncol; i++) {
        if (i) fputs(", ", o->fp);
        json_string(o->fp, row->name[i]);
        fputs(": ", o->fp);
        json_value(o->fp, row->text[i], row->type[i]);
    }
    fputc('}', o->fp);
    return 0;
}

static char *dup_or_null(const char *s, int *failed)
{
    if (!s) return NULL;
    char *d = strdup(s);
    if (!d) *failed = 1;
    return d;
}

static int row_keep(q_out *o, const cat_row *row, bs_err *err)
{
    q_table *t = &o->t;
    int failed = 0;
    if (row->index < 0) {
        t->ncol = row->ncol;
        t->name = calloc(row->ncol > 0 ? (size_t)row->ncol : 1, sizeof *t->name);
        if (!t->name) return bs_fail(err, BS_ENOMEM, "query: out of memory");
        for (int i = 0; i < row->ncol; i++)
            t->name[i] = dup_or_null(row->name[i], &failed);
        return failed ? bs_fail(err, BS_ENOMEM, "query: out of memory") : 0;
    }
    if (t->nrow == t->cap) {
        size_t cap = t->cap ? 2 * t->cap : 64;
        char **cell = realloc(t->cell, cap * (size_t)t->ncol * sizeof *cell);
        if (!cell) return bs_fail(err, BS_ENOMEM, "query: out of memory");
        t->cell = cell;
        int *type = realloc(t->type, cap * (size_t)t->ncol * sizeof *type);
        if (!type) return bs_fail(err, BS_ENOMEM, "query: out of memory");
        t->type = type;
        t->cap = cap;
    }
    for (int i = 0; i < t->ncol; i++) {
        size_t k = t->nrow * (size_t)t->ncol + (size_t)i;
        t->type[k] = row->type[i];
        t->cell[k] = dup_or_null(row->text[i], &failed);
    }
    t->nrow++;
    return failed ? bs_fail(err, BS_ENOMEM, "query: out of memory") : 0;
}

static int on_row(void *ctx, const cat_row *row, bs_err *err)
{
    q_out *o = ctx;
    if (o->format == FMT_TABLE) return row_keep(o, row, err);
    return row_stream(o, row);
}

/* Whether a column holds a duration in seconds (results.seconds, diag_seconds, worker_seconds). */
static int is_seconds_column(const char *name)
{
    size_t n = name ? strlen(name) : 0;
    return n >= 7 && strcmp(name + n - 7, "seconds") == 0;
}

/* A duration in fixed notation with three significant digits (0.0000720, 0.0523, 12.3, 4521):
 * always readable as seconds, never in exponent form. */
static void seconds_text(double t, char *out, size_t len)
{
    if (t == 0 || !isfinite(t)) {
        snprintf(out, len, "%g", t);
        return;
    }
    int mag = (int)floor(log10(fabs(t)));
    int decimals = mag >= 2 ? 0 : 2 - mag;
    if (decimals > 12) decimals = 12;
    snprintf(out, len, "%.*f", decimals, t);
}

/* The text a table cell shows (the caller frees it; NULL when out of memory): reals to 6
 * significant digits, durations by seconds_text, text on one line (line breaks become spaces). */
static char *cell_text(const char *s, int type, const char *column)
{
    char num[64];
    if (!s) return strdup("");
    if (type == CAT_COL_REAL) {
        double v = strtod(s, NULL);
        if (is_seconds_column(column))
            seconds_text(v, num, sizeof num);
        else
            snprintf(num, sizeof num, "%.6g", v);
        return strdup(num);
    }
    char *out = strdup(s);
    for (char *p = out; p && *p; p++)
        if (*p == '\n' || *p == '\t' || *p == '\r') *p = ' ';
    return out;
}

/* The next line of at most width bytes of the text at *pos: broken at the last space that fits,
 * else at width (never inside a UTF-8 sequence); *pos moves past it and the spaces after it.
 * Returns the line's length. */
static size_t wrap_next(const char **pos, size_t width)
{
    const char *p = *pos;
    size_t n = strlen(p);
    if (n <= width) {
        *pos = p + n;
        return n;
    }
    size_t cut = width;
    while (cut > 0 && p[cut] != ' ')
        cut--;
    if (cut == 0) {
        cut = width;
        while (cut > 1 && ((unsigned char)p[cut] & 0xC0) == 0x80)
            cut--;
    }
    *pos = p + cut;
    while (**pos == ' ')
        (*pos)++;
    return cut;
}

/* One row of shown cells; text longer than its column continues on further lines. */
static void table_row(FILE *fp, int ncol, char **shown, const int *type, const size_t *width)
{
    const char **pos = malloc((size_t)(ncol > 0 ? ncol : 1) * sizeof *pos);
    if (!pos) return;
    for (int i = 0; i < ncol; i++)
        pos[i] = shown[i] ? shown[i] : "";
    for (int more = 1; more;) {
        more = 0;
        size_t pending = 0; /* padding owed; written only before further text, so no line ends in blanks */
        for (int i = 0; i < ncol; i++) {
            const char *from = pos[i];
            size_t len = wrap_next(&pos[i], width[i]);
            int numeric = type[i] == CAT_COL_INTEGER || type[i] == CAT_COL_REAL;
            pending += (i ? 2 : 0) + (numeric ? width[i] - len : 0);
            if (len) {
                fprintf(fp, "%*s%.*s", (int)pending, "", (int)len, from);
                pending = 0;
            }
            if (!numeric) pending += width[i] - len;
            if (*pos[i]) more = 1;
        }
        fputc('\n', fp);
    }
    free(pos);
}

static void table_print(const q_table *t, FILE *fp)
{
    size_t ncell = t->nrow * (size_t)t->ncol;
    size_t *width = calloc(t->ncol > 0 ? (size_t)t->ncol : 1, sizeof *width);
    char **shown = calloc(ncell ? ncell : 1, sizeof *shown);
    if (!width || !shown) goto done;
    for (size_t k = 0; k < ncell; k++) {
        shown[k] = cell_text(t->cell[k], t->type[k], t->name[k % (size_t)t->ncol]);
        if (!shown[k]) goto done;
    }
    for (int i = 0; i < t->ncol; i++) {
        size_t head = strlen(t->name[i] ? t->name[i] : ""), longest = 0;
        for (size_t r = 0; r < t->nrow; r++) {
            size_t len = strlen(shown[r * (size_t)t->ncol + (size_t)i]);
            if (len > longest) longest = len;
        }
        if (longest > QUERY_CELL_MAX) longest = QUERY_CELL_MAX;
        width[i] = head > longest ? head : longest;
        if (width[i] == 0) width[i] = 1;
    }
    for (int i = 0; i < t->ncol; i++)
        fprintf(fp, "%s%-*s", i ? "  " : "", (int)width[i], t->name[i] ? t->name[i] : "");
    fputc('\n', fp);
    for (int i = 0; i < t->ncol; i++) {
        fputs(i ? "  " : "", fp);
        for (size_t w = 0; w < width[i]; w++)
            fputc('-', fp);
    }
    fputc('\n', fp);
    for (size_t r = 0; r < t->nrow; r++)
        table_row(fp, t->ncol, shown + r * (size_t)t->ncol, t->type + r * (size_t)t->ncol, width);
    fprintf(fp, "(%zu row%s)\n", t->nrow, t->nrow == 1 ? "" : "s");
done:
    for (size_t k = 0; shown && k < ncell; k++)
        free(shown[k]);
    free(shown);
    free(width);
}

static void table_free(q_table *t)
{
    for (int i = 0; t->name && i < t->ncol; i++)
        free(t->name[i]);
    for (size_t k = 0; t->cell && k < t->nrow * (size_t)t->ncol; k++)
        free(t->cell[k]);
    free(t->name);
    free(t->cell);
    free(t->type);
}

typedef struct view_list {
    char names[512];
    int found;
    const char *want;
} view_list;

static int on_view(void *ctx, const cat_row *row, bs_err *err)
{
    (void)err;
    view_list *v = ctx;
    if (row->index < 0 || !row->text[0]) return 0;
    if (strcmp(row->text[0], v->want) == 0) v->found = 1;
    size_t len = strlen(v->names);
    snprintf(v->names + len, sizeof v->names - len, "%s%s", len ? ", " : "", row->text[0]);
    return 0;
}

/* "SELECT * FROM NAME" for a view that exists; the name is checked against sqlite_master, so
 * nothing from the command line is pasted into SQL unchecked. */
static int view_sql(cat_db *cat, const char *name, char *sql, size_t len, bs_err *err)
{
    view_list v = {"", 0, name};
    int rc =
        cat_query(cat, "SELECT name FROM sqlite_master WHERE type = 'view' ORDER BY name", on_view, &v, err);
    if (rc != 0) return rc;
    if (!v.found)
        return bs_fail(err, BS_EUSAGE, "no view \"%s\" in the catalogue (views: %s)", name, v.names);
    snprintf(sql, len, "SELECT * FROM \"%s\"", name);
    return 0;
}

typedef struct q_args {
    const char *path, *sql, *view;
    int format;
    double timeout;
} q_args;

static int parse_args(int argc, char **argv, q_args *a)
{
    a->path = a->sql = a->view = NULL;
    a->format = FMT_TABLE;
    a->timeout = 0;
    for (int i = 1; i < argc; i++) {
        const char *s = argv[i];
        if (!strcmp(s, "--timeout")) {
            char *end = NULL;
            a->timeout = i + 1 < argc ? strtod(argv[i + 1], &end) : -1;
            if (i + 1 >= argc || !end || *end || !(a->timeout > 0) || !isfinite(a->timeout)) {
                fprintf(stderr, "bandsieve query: --timeout expects a positive number of seconds\n");
                return 2;
            }
            i++;
        } else if (!strcmp(s, "--view") || !strcmp(s, "--format")) {
            if (i + 1 >= argc) {
                fprintf(stderr, "bandsieve query: %s needs a value\n", s);
                return 2;
            }
            const char *v = argv[++i];
            if (!strcmp(s, "--view")) {
                a->view = v;
            } else if (!strcmp(v, "table")) {
                a->format = FMT_TABLE;
            } else if (!strcmp(v, "csv")) {
                a->format = FMT_CSV;
            } else if (!strcmp(v, "json")) {
                a->format = FMT_JSON;
            } else {
                fprintf(stderr, "bandsieve query: --format must be table, csv or json, not \"%s\"\n", v);
                return 2;
            }
        } else if (s[0] == '-' && s[1] == '-') {
            fprintf(stderr, "bandsieve query: unknown option %s (bandsieve query --help)\n", s);
            return 2;
        } else if (!a->path) {
            a->path = s;
        } else if (!a->sql) {
            a->sql = s;
        } else {
            fprintf(stderr, "bandsieve query: one SQL statement only; quote it as one argument\n");
            return 2;
        }
    }
    if (!a->path || (!a->sql && !a->view) || (a->sql && a->view)) {
        fprintf(
            stderr,
            "bandsieve query: give a catalogue and either \"SQL\" or --view NAME (bandsieve query --help)\n");
        return 2;
    }
    return 0;
}

int cmd_query(int argc, char **argv)
{
    for (int i = 1; i < argc; i++)
        if (!strcmp(argv[i], "--help") || !strcmp(argv[i], "-h")) {
            query_usage(stdout);
            return 0;
        }
    q_args a;
    int status = parse_args(argc, argv, &a);
    if (status != 0) return status;
    bs_err err;
    bs_err_clear(&err);
    cat_db *cat = NULL;
    char view[160];
    signal(SIGTERM, on_query_signal);
    signal(SIGINT, on_query_signal);
    int rc = cat_open(a.path, CAT_RO, &cat, &err);
    if (rc == 0) cat_set_limits(cat, &query_stop, a.timeout);
    const char *sql = a.sql;
    if (rc == 0 && a.view) {
        rc = view_sql(cat, a.view, view, sizeof view, &err);
        sql = view;
    }
    q_out o = {a.format, stdout, {0, NULL, 0, 0, NULL, NULL}, 0};
    if (rc == 0) rc = cat_query(cat, sql, on_row, &o, &err);
    if (rc == 0 && a.format == FMT_TABLE) table_print(&o.t, stdout);
    if (rc == 0 && a.format == FMT_JSON) fputs(o.nrow ? "\n]\n" : "[]\n", stdout);
    table_free(&o.t);
    cat_close(cat, NULL);
    if (rc != 0) {
        fprintf(stderr, "bandsieve query: %s\n", err.msg);
        return rc == BS_EUSAGE ? 2 : 1;
    }
    return 0;
}
