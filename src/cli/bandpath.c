/* Bands along a labelled path, with weights for colour and the gap and Fermi level on the path. */
#include "bandpath.h"

#include <complex.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/eig.h"
#include "bandsieve/hk.h"

/* Parses "orbitals:1,3" into a mask of spatial orbitals (0-based). */
static int parse_orbitals(const char *text, int nspatial, unsigned char *mask, bs_err *err)
{
    const char *p = text + strlen("orbitals:");
    int n = 0;
    while (*p) {
        char *end;
        long o = strtol(p, &end, 10);
        if (end == p || o < 1 || o > nspatial)
            return bs_fail(err, BS_EUSAGE, "--weight orbitals: expects 1-based orbitals 1..%d, got '%s'",
                           nspatial, text);
        mask[o - 1] = 1;
        n++;
        p = *end == ',' ? end + 1 : end;
        if (*end && *end != ',')
            return bs_fail(err, BS_EUSAGE, "--weight orbitals: expects a comma-separated list, got '%s'",
                           text);
    }
    return n ? 0 : bs_fail(err, BS_EUSAGE, "--weight orbitals: no orbital given");
}

/* Weight of each eigenvector (columns of Z) into w[norb]. */
static void state_weights(const tb_model *m, int kind, const unsigned char *mask, const double complex *Z,
                          double *w)
{
    int n = m->norb;
    for (int j = 0; j < n; j++) {
        double s = 0;
        for (int i = 0; i < n; i++) {
            double p = creal(Z[(size_t)j * n + i] * conj(Z[(size_t)j * n + i]));
            if (kind == BP_WEIGHT_SPIN)
                s += tb_state_spin(m, i) == 0 ? p : -p;
            else if (mask[tb_state_orbital(m, i)])
                s += p;
        }
        w[j] = s;
    }
}

static int diagonalise_path(const tb_model *m, band_path *bp, const unsigned char *mask, bs_err *err)
{
    const int batch = 64, n = m->norb;
    size_t nn = (size_t)n * n;
    hk_engine *hk = NULL;
    eig_ws *ws = NULL;
    double complex *H = NULL;
    int rc = hk_create(m, batch, &hk, err);
    if (rc == 0) rc = eig_create(n, &ws, err);
    if (rc == 0 && !(H = malloc(batch * nn * sizeof *H))) rc = bs_fail(err, BS_ENOMEM, "out of memory");
    for (int j0 = 0; rc == 0 && j0 < bp->s.nk; j0 += batch) {
        int nb = bp->s.nk - j0 < batch ? bp->s.nk - j0 : batch;
        rc = hk_build(hk, nb, bp->s.k + 3 * j0, H, err);
        for (int j = 0; rc == 0 && j < nb; j++) {
            double *E = bp->E + (size_t)(j0 + j) * n;
            if (!bp->w) {
                rc = eig_values(ws, H + j * nn, E, err);
                continue;
            }
            rc = eig_vectors(ws, H + j * nn, E, err);
            if (rc == 0) state_weights(m, bp->weight_kind, mask, H + j * nn, bp->w + (size_t)(j0 + j) * n);
        }
    }
    free(H);
    eig_free(ws);
    hk_free(hk);
    return rc;
}

/* Band edges at the filling along the path, and the Fermi level: the option's, the card's, or
 * mid-gap when the path is gapped (none otherwise: a metal's level needs the whole zone). */
static void path_edges(const tb_model *m, const double *fermi, band_path *bp)
{
    int n = bp->norb, v = bp->nocc - 1;
    bp->vbm_ev = -1e300, bp->cbm_ev = 1e300, bp->direct_ev = 1e300;
    for (int i = 0; i < bp->s.nk; i++) {
        const double *E = bp->E + (size_t)i * n;
        if (E[v] > bp->vbm_ev) bp->vbm_ev = E[v], bp->i_vbm = i;
        if (E[v + 1] < bp->cbm_ev) bp->cbm_ev = E[v + 1], bp->i_cbm = i;
        if (E[v + 1] - E[v] < bp->direct_ev) bp->direct_ev = E[v + 1] - E[v], bp->i_direct = i;
    }
    bp->gapped = bp->cbm_ev > bp->vbm_ev;
    if (fermi)
        bp->has_fermi = 1, bp->fermi_ev = *fermi, bp->fermi_source = "option";
    else if (m->has_fermi)
        bp->has_fermi = 1, bp->fermi_ev = m->fermi_ev, bp->fermi_source = "card";
    else if (bp->gapped)
        bp->has_fermi = 1, bp->fermi_ev = 0.5 * (bp->vbm_ev + bp->cbm_ev), bp->fermi_source = "mid-gap";
}

int band_path_compute(const tb_model *m, const char *spec, int npoints, const char *weight,
                      const double *fermi, band_path *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    out->norb = m->norb, out->nocc = m->nocc;
    unsigned char *mask = NULL;
    int rc = strcmp(spec, "auto") == 0
                 ? kpath_auto((const double(*)[3])m->lattice, m->dim, 0, &out->path, err)
                 : kpath_parse(spec, &out->path, err);
    if (rc == 0 && weight) {
        if (strcmp(weight, "spin") == 0) {
            out->weight_kind = BP_WEIGHT_SPIN;
            if (!m->spinful) rc = bs_fail(err, BS_EUSAGE, "--weight spin: %s is spinless", m->id);
        } else if (strncmp(weight, "orbitals:", 9) == 0) {
            out->weight_kind = BP_WEIGHT_ORBITALS;
            mask = calloc((size_t)m->nspatial, 1);
            rc = mask ? parse_orbitals(weight, m->nspatial, mask, err)
                      : bs_fail(err, BS_ENOMEM, "out of memory");
        } else {
            rc = bs_fail(err, BS_EUSAGE, "--weight expects spin or orbitals:i,j,..., got '%s'", weight);
        }
    }
    if (rc == 0) rc = kpath_sample(&out->path, (const double(*)[3])m->lattice, npoints, &out->s, err);
    size_t nv = (size_t)out->s.nk * m->norb;
    if (rc == 0 && !(out->E = malloc(nv * sizeof *out->E))) rc = bs_fail(err, BS_ENOMEM, "out of memory");
    if (rc == 0 && out->weight_kind && !(out->w = malloc(nv * sizeof *out->w)))
        rc = bs_fail(err, BS_ENOMEM, "out of memory");
    if (rc == 0) rc = diagonalise_path(m, out, mask, err);
    if (rc == 0) path_edges(m, fermi, out);
    free(mask);
    if (rc != 0) band_path_clear(out);
    return rc;
}

void band_path_clear(band_path *bp)
{
    if (!bp) return;
    kpath_samples_clear(&bp->s);
    free(bp->E);
    free(bp->w);
    memset(bp, 0, sizeof *bp);
}

void band_path_label(const band_path *bp, int i, char *buf, int n)
{
    int v = bp->s.vertex[i];
    snprintf(buf, (size_t)n, "%s", v < 0 ? "" : bp->path.point[v].label);
}
