/* Card inputs for pack and check (cardlist.h). */
#include "cardlist.h"

#include <dirent.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

void cardlist_clear(cardlist *l)
{
    for (size_t i = 0; i < l->n; i++)
        free(l->path[i]);
    free(l->path);
    memset(l, 0, sizeof *l);
}

static int push(cardlist *l, const char *path, bs_err *err)
{
    if (l->n == l->cap) {
        size_t cap = l->cap ? 2 * l->cap : 64;
        char **p = realloc(l->path, cap * sizeof *p);
        if (!p) return bs_fail(err, BS_ENOMEM, "out of memory for the card list");
        l->path = p;
        l->cap = cap;
    }
    if (!(l->path[l->n] = strdup(path))) return bs_fail(err, BS_ENOMEM, "out of memory for the card list");
    l->n++;
    return 0;
}

static int by_name(const void *a, const void *b)
{
    return strcmp(*(char *const *)a, *(char *const *)b);
}

static int add_folder(cardlist *l, const char *dir, bs_err *err)
{
    DIR *d = opendir(dir);
    if (!d) return bs_fail(err, BS_EIO, "%s: cannot read the folder: %s", dir, strerror(errno));
    size_t first = l->n;
    int rc = 0;
    for (struct dirent *e; rc == 0 && (e = readdir(d));) {
        size_t n = strlen(e->d_name);
        if (e->d_name[0] == '.' || n <= 5 || strcmp(e->d_name + n - 5, ".json") != 0) continue;
        char path[4096];
        if (snprintf(path, sizeof path, "%s/%s", dir, e->d_name) >= (int)sizeof path)
            rc = bs_fail(err, BS_EINVAL, "%s/%s: path too long", dir, e->d_name);
        else
            rc = push(l, path, err);
    }
    closedir(d);
    if (rc == 0 && l->n == first) rc = bs_fail(err, BS_EINVAL, "%s: no *.json card in the folder", dir);
    if (rc == 0) qsort(l->path + first, l->n - first, sizeof *l->path, by_name);
    return rc;
}

int cardlist_add_arg(cardlist *l, const char *arg, bs_err *err)
{
    struct stat st;
    if (stat(arg, &st) == 0 && S_ISDIR(st.st_mode)) return add_folder(l, arg, err);
    return push(l, arg, err);
}

int cardlist_add_file(cardlist *l, const char *list_path, bs_err *err)
{
    FILE *fp = fopen(list_path, "r");
    if (!fp) return bs_fail(err, BS_EIO, "%s: cannot open the list: %s", list_path, strerror(errno));
    const char *slash = strrchr(list_path, '/');
    int dirlen = slash ? (int)(slash - list_path) : 0;
    char line[4096];
    int rc = 0, lineno = 0;
    while (rc == 0 && fgets(line, sizeof line, fp)) {
        lineno++;
        size_t n = strlen(line);
        if (n == sizeof line - 1 && line[n - 1] != '\n') {
            rc = bs_fail(err, BS_EPARSE, "%s:%d: line longer than %zu characters", list_path, lineno,
                         sizeof line - 2);
            break;
        }
        while (n > 0 &&
               (line[n - 1] == '\n' || line[n - 1] == '\r' || line[n - 1] == ' ' || line[n - 1] == '\t'))
            line[--n] = '\0';
        char *p = line;
        while (*p == ' ' || *p == '\t')
            p++;
        if (!*p || *p == '#') continue;
        char path[8300];
        if (p[0] == '/' || !slash)
            snprintf(path, sizeof path, "%s", p);
        else
            snprintf(path, sizeof path, "%.*s/%s", dirlen, list_path, p);
        struct stat st;
        if (stat(path, &st) != 0)
            rc = bs_fail(err, BS_EIO, "%s:%d: %s: %s", list_path, lineno, path, strerror(errno));
        else
            rc = cardlist_add_arg(l, path, err);
    }
    fclose(fp);
    return rc;
}

int cardlist_is_hdf5(const char *path)
{
    static const unsigned char sig[8] = {0x89, 'H', 'D', 'F', '\r', '\n', 0x1a, '\n'};
    unsigned char buf[8];
    FILE *fp = fopen(path, "rb");
    if (!fp) return 0;
    size_t n = fread(buf, 1, 8, fp);
    fclose(fp);
    return n == 8 && memcmp(buf, sig, 8) == 0;
}

/* A string set with an index per key (open addressing, FNV-1a): ids and contents seen so far, so
 * that duplicates are found in linear time for sets of 10^5 cards. */

static size_t str_hash(const char *s)
{
    size_t h = 1469598103934665603ULL;
    for (; *s; s++)
        h = (h ^ (unsigned char)*s) * 1099511628211ULL;
    return h;
}

int cli_strmap_get(const cli_strmap *m, const char *key)
{
    if (!m->cap) return -1;
    for (size_t i = str_hash(key) & (m->cap - 1);; i = (i + 1) & (m->cap - 1)) {
        if (!m->key[i]) return -1;
        if (!strcmp(m->key[i], key)) return m->val[i];
    }
}

int cli_strmap_put(cli_strmap *m, const char *key, int val)
{
    if (2 * (m->n + 1) > m->cap) {
        cli_strmap g = {NULL, NULL, m->cap ? 2 * m->cap : 1024, 0};
        g.key = calloc(g.cap, sizeof *g.key);
        g.val = calloc(g.cap, sizeof *g.val);
        if (!g.key || !g.val) {
            free(g.key);
            free(g.val);
            return -1;
        }
        for (size_t i = 0; i < m->cap; i++)
            if (m->key[i]) {
                size_t j = str_hash(m->key[i]) & (g.cap - 1);
                while (g.key[j])
                    j = (j + 1) & (g.cap - 1);
                g.key[j] = m->key[i];
                g.val[j] = m->val[i];
                g.n++;
            }
        free(m->key);
        free(m->val);
        *m = g;
    }
    size_t i = str_hash(key) & (m->cap - 1);
    while (m->key[i] && strcmp(m->key[i], key))
        i = (i + 1) & (m->cap - 1);
    if (!m->key[i]) {
        if (!(m->key[i] = strdup(key))) return -1;
        m->n++;
    }
    m->val[i] = val;
    return 0;
}

void cli_strmap_clear(cli_strmap *m)
{
    for (size_t i = 0; i < m->cap; i++)
        free(m->key[i]);
    free(m->key);
    free(m->val);
    memset(m, 0, sizeof *m);
}
