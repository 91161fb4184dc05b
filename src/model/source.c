/* Dispatch from a source string to the card reader, the material-set reader or a built-in model. */
#include "bandsieve/source.h"

#include <stdio.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/matset.h"

static int ends_with(const char *s, const char *tail)
{
    size_t n = strlen(s), t = strlen(tail);
    return n >= t && strcmp(s + n - t, tail) == 0;
}

/* Position of the ':' that ends the set's path (last ".h5:" in source), or NULL. */
static const char *set_split(const char *source)
{
    const char *hit = NULL;
    for (const char *p = strstr(source, ".h5:"); p; p = strstr(p + 1, ".h5:"))
        hit = p + 3;
    return hit;
}

static int load_from_set(const char *source, const char *colon, tb_model **out, bs_err *err)
{
    char path[4096];
    size_t n = (size_t)(colon - source);
    if (n >= sizeof path) return bs_fail(err, BS_EUSAGE, "%.64s...: path too long", source);
    memcpy(path, source, n);
    path[n] = '\0';
    const char *id = colon + 1;
    if (!*id) return bs_fail(err, BS_EUSAGE, "%s: name an entry after the colon (SET.h5:ID)", source);
    ms_set *set = NULL;
    int rc = ms_open(path, &set, err);
    if (rc == 0) rc = ms_read_id(set, id, out, err);
    ms_free(set);
    return rc;
}

int src_load(const char *source, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (strncmp(source, "model:", 6) == 0) return lm_build(source + 6, out, err);
    const char *colon = set_split(source);
    if (colon) return load_from_set(source, colon, out, err);
    if (ends_with(source, ".h5"))
        return bs_fail(err, BS_EUSAGE, "%s: a material set; name one entry as %s:ID", source, source);
    if (ends_with(source, ".json")) return card_read(source, out, err);
    return bs_fail(err, BS_EUSAGE,
                   "%s: not a source; expected CARD.json, SET.h5:ID or model:NAME[:key=val,...]", source);
}
