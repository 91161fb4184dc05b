/* Surface evidence for one plane, as the screening run stores it (see surfsummary.h). */
#include "bandsieve/surfsummary.h"

#include <string.h>

#include "bandsieve/slab.h"
#include "bandsieve/surfstates.h"

void ssum_default_direction(const tb_model *m, int miller[3])
{
    miller[0] = m->dim == 2 ? 1 : 0;
    miller[1] = 0;
    miller[2] = m->dim == 2 ? 0 : 1;
}

int ssum_compute(const tb_model *m, const int miller[3], int nlayers, ssum_result *out, bs_err *err)
{
    memset(out, 0, sizeof *out);
    memcpy(out->miller, miller, sizeof out->miller);
    out->layers = nlayers > 0 ? nlayers : (m->dim == 2 ? 32 : 20);
    out->kdim = m->dim - 1;
    slab *s = NULL;
    ss_ctx *c = NULL;
    ss_opts o;
    ss_opts_default(&o);
    int rc = slab_create(m, miller, out->layers, 0.0, &s, err);
    if (rc == 0) rc = ss_create(s, &o, &c, err);
    /* 24 points per axis hold every TRIM and the K points of hexagonal lattices. */
    if (rc == 0) rc = ss_bulk_edges(m, 24, &out->vbm_ev, &out->cbm_ev, err);
    if (rc == 0) {
        out->fermi_ev = ss_fermi_default(out->vbm_ev, out->cbm_ev);
        double kt[8];
        int nt = 0;
        ss_trims(c, kt, &nt);
        out->ka[0] = kt[0]; out->ka[1] = kt[1];
        out->kb[0] = kt[2]; out->kb[1] = kt[3];
        rc = ss_crossings(c, kt, kt + 2, out->fermi_ev, &out->n_top, &out->n_bottom, &out->n_other, err);
    }
    ss_dirac dirac[16];
    int nd = 0;
    if (rc == 0) rc = ss_dirac_points(c, dirac, 16, &nd, err);
    for (int i = 0; rc == 0 && i < nd && i < 16; i++)
        if (dirac[i].side == SS_TOP && dirac[i].energy_ev > out->vbm_ev && dirac[i].energy_ev < out->cbm_ev)
            out->ndirac_top++;
    ss_free(c);
    slab_free(s);
    return rc;
}
