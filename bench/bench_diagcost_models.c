/* Writes the models of the diagnosis-cost benchmark (bench/bench_diagcost.py) as cards, so that an
 * old and a new binary diagnose the same files. Realistic-size 3D insulators are made from the
 * published built-in models (lattice_models.h) dressed with extra orbitals: pairs of s orbitals on
 * the model's two sites, half of them below the model's bands (filled), half above (empty),
 * with hoppings among themselves out to a chosen range and couplings to the model's orbitals that
 * hybridise them with the model's bands. The extra orbitals, energies and couplings are INVENTED benchmark
 * data (no physics); the classes are whatever the diagnosis finds (the benchmark compares two binaries on the
 * same files). Inversion is made exact by averaging (symfit.h) except for the inversion-free variants; noisy
 * variants add fit-like noise (fitnoise.h) on top. Usage: bench_diagcost_models DIR   (prints one "id
 * card_path" line per model) */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/fitnoise.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/symfit.h"
#include "bandsieve/symmetry.h"

/* splitmix64: the benchmark's own seeded generator (invented data only). */
static double uniform(uint64_t *s)
{
    uint64_t z = (*s += 0x9E3779B97F4A7C15ull);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
    z ^= z >> 31;
    return (double)(z >> 11) / 9007199254740992.0 * 2.0 - 1.0;
}

typedef struct dress_spec {
    const char *id;
    const char *base; /* built-in model spec */
    int npair;        /* pairs of extra s orbitals (4 states each) */
    int rmax;         /* extra hoppings to cells with |R_i| <= rmax */
    int inversion;    /* make inversion exact by averaging */
    double noise;     /* relative fit noise (0: none) */
} dress_spec;

static int is_half(const int R[3])
{
    return R[0] != 0 ? R[0] > 0 : R[1] != 0 ? R[1] > 0 : R[2] > 0;
}

/* The dressed model (see the file comment); the caller owns *out. */
static int dress(const tb_model *b, const dress_spec *d, uint64_t seed, tb_model **out, bs_err *err)
{
    int nsb = b->nspatial, ns = nsb + 2 * d->npair, norb = 2 * ns, side = 2 * d->rmax + 1;
    int nR = side * side * side;
    for (int r = 0; r < b->nR; r++)
        if (abs(b->R[r][0]) > d->rmax || abs(b->R[r][1]) > d->rmax || abs(b->R[r][2]) > d->rmax) nR++;
    tb_model *m = NULL;
    int rc = tb_model_create(norb, nR, 1, &m, err);
    if (rc != 0) return rc;
    snprintf(m->id, sizeof m->id, "%s", d->id);
    snprintf(m->formula, sizeof m->formula, "invented");
    snprintf(m->source, sizeof m->source, "invented benchmark dressing of %.200s", b->source);
    m->dim = 3;
    memcpy(m->lattice, b->lattice, sizeof m->lattice);
    m->spin_layout = TB_SPIN_BLOCKS;
    for (int o = 0; o < ns; o++) {
        int src = o < nsb ? o : (o - nsb) % 2 == 0 ? 0 : nsb - 1;
        memcpy(m->orb_pos[o], b->orb_pos[src], sizeof m->orb_pos[o]);
        m->orb_l[o] = o < nsb ? b->orb_l[o] : 0;
    }
    int nlow = (d->npair + 1) / 2;
    m->nocc = b->nocc + 4 * nlow;
    int r = 0;
    for (int i = -d->rmax; i <= d->rmax; i++)
        for (int j = -d->rmax; j <= d->rmax; j++)
            for (int k = -d->rmax; k <= d->rmax; k++, r++) {
                m->R[r][0] = i, m->R[r][1] = j, m->R[r][2] = k;
            }
    for (int q = 0; q < b->nR; q++)
        if (abs(b->R[q][0]) > d->rmax || abs(b->R[q][1]) > d->rmax || abs(b->R[q][2]) > d->rmax)
            memcpy(m->R[r++], b->R[q], sizeof m->R[0]);
    size_t nn = (size_t)norb * norb, bn = (size_t)b->norb;
    for (r = 0; r < nR; r++)
        m->deg[r] = 1;
    /* The base model's hoppings in the enlarged basis (spin blocks in both). */
    for (int q = 0; q < b->nR; q++) {
        int t = tb_model_find_R(m, b->R[q]);
        for (size_t a = 0; a < bn; a++)
            for (size_t c = 0; c < bn; c++) {
                int oa = tb_state_orbital(b, (int)a), sa = tb_state_spin(b, (int)a);
                int oc = tb_state_orbital(b, (int)c), sc = tb_state_spin(b, (int)c);
                size_t A = (size_t)tb_state_index(m, oa, sa), C = (size_t)tb_state_index(m, oc, sc);
                m->H[t * nn + A * norb + C] = b->H[q * bn * bn + a * bn + c] / b->deg[q];
            }
    }
    /* Extra orbitals: on-site levels, spin-independent real hoppings (time reversal exact), each
     * bond entered on the half set of R with its reverse as the transpose. */
    for (r = 0; r < nR; r++) {
        const int *R = m->R[r];
        int zero = !R[0] && !R[1] && !R[2];
        if (!zero && !is_half(R)) continue;
        int rm_idx = -1;
        int minus[3] = {-R[0], -R[1], -R[2]};
        rm_idx = tb_model_find_R(m, minus);
        double dist = sqrt((double)(R[0] * R[0] + R[1] * R[1] + R[2] * R[2]));
        for (int a = 0; a < ns; a++)
            for (int c = 0; c < ns; c++) {
                if (a < nsb && c < nsb) continue;
                if (zero && c <= a) continue;
                if (!zero && (abs(R[0]) > d->rmax || abs(R[1]) > d->rmax || abs(R[2]) > d->rmax)) continue;
                int ea = a >= nsb, ec = c >= nsb;
                int pa = (a - nsb) / 2, pc = (c - nsb) / 2;
                double amp;
                if (ea && ec) /* among extras: bands of the same level mix more */
                    amp = (pa == pc ? 0.4 : 0.12) * exp(-dist);
                else /* extra to the model's orbitals: nearest cells only */
                    amp = dist <= 1.8 ? 0.25 * exp(-dist) : 0.0;
                if (amp == 0.0) continue;
                double v = amp * uniform(&seed);
                for (int s = 0; s < 2; s++) {
                    size_t A = (size_t)tb_state_index(m, a, s), C = (size_t)tb_state_index(m, c, s);
                    m->H[r * nn + A * norb + C] += v;
                    m->H[rm_idx * nn + C * norb + A] += v;
                }
            }
    }
    int r0 = tb_model_find_R(m, (int[3]){0, 0, 0});
    for (int p = 0; p < d->npair; p++) {
        double level = p < nlow ? -(4.0 + 0.6 * p) : 4.0 + 0.6 * (p - nlow);
        for (int e = 0; e < 2; e++)
            for (int s = 0; s < 2; s++) {
                size_t A = (size_t)tb_state_index(m, nsb + 2 * p + e, s);
                m->H[r0 * nn + A * norb + A] += level;
            }
    }
    *out = m;
    return 0;
}

static int make(const dress_spec *d, const char *dir, bs_err *err)
{
    tb_model *b = NULL, *m = NULL, *s = NULL, *n = NULL;
    sym_info *si = NULL;
    int rc = lm_build(d->base, &b, err);
    if (rc == 0) rc = dress(b, d, 0x5EED0000ull + (uint64_t)d->npair, &m, err);
    const tb_model *cur = m;
    if (rc == 0 && d->inversion) {
        sym_opts so;
        sym_opts_default(&so);
        rc = sym_detect(m, &so, &si, err);
        if (rc == 0 && si->inv_source == SYM_INV_NONE)
            rc = bs_fail(err, BS_EINVAL, "%s: no inversion map to average over", d->id);
        if (rc == 0) rc = symfit_symmetrise(m, si, SYMFIT_TR | SYMFIT_INV, NULL, &s, NULL, err);
        cur = s;
    }
    if (rc == 0 && d->noise > 0) {
        rc = fitnoise_apply(cur, d->noise, 77, &n, err);
        cur = n;
        if (rc == 0) {
            snprintf(n->id, sizeof n->id, "%s", d->id);
            snprintf(n->formula, sizeof n->formula, "invented");
        }
    }
    char path[1024];
    if (rc == 0) rc = card_write(cur, dir, path, sizeof path, err);
    if (rc == 0) printf("%s %s %d\n", d->id, path, cur->norb);
    sym_info_free(si);
    tb_model_free(n);
    tb_model_free(s);
    tb_model_free(m);
    tb_model_free(b);
    return rc;
}

int main(int argc, char **argv)
{
    if (argc != 2) {
        fprintf(stderr, "usage: bench_diagcost_models DIR\n");
        return 2;
    }
    static const dress_spec specs[] = {
        {"fkm_strong_48", "fkm:dt=0.4", 11, 2, 1, 0},
        {"fkm_weak_48", "fkm:dt=-0.4", 11, 2, 1, 0},
        {"atomic_48", "atomic", 11, 2, 1, 0},
        /* fit noise of 1e-5 of the largest element (the dressing's levels of 4..7 eV): summed over
         * 125 lattice vectors it breaks the symmetries by 0.02..0.1 eV, a safe margin */
        {"fkm_strong_48_noisy", "fkm:dt=0.4", 11, 2, 1, 1e-5},
        {"fkm_weak_48_noisy", "fkm:dt=-0.4", 11, 2, 1, 1e-5},
        {"atomic_48_noisy", "atomic", 11, 2, 1, 1e-5},
        /* ten times more: a breaking of about 0.4 eV against a gap of 0.67 eV, a thin margin */
        {"fkm_strong_48_noisier", "fkm:dt=0.4", 11, 2, 1, 1e-4},
        {"fkm_strong_64", "fkm:dt=0.4", 15, 2, 1, 0},
        {"fkm_noinv_48", "fkm:dt=0.4,stag=0.4", 11, 2, 0, 0},
        {"fkm_strong_128_long", "fkm:dt=0.4", 31, 4, 1, 0},
        /* the same with fit noise of 1e-5: a diagnosis of a noisy fit also holds the restored model */
        {"fkm_strong_128_long_noisy", "fkm:dt=0.4", 31, 4, 1, 1e-5},
    };
    const char *only = getenv("BENCH_MODELS"); /* comma list of ids, or unset: all */
    for (size_t i = 0; i < sizeof specs / sizeof specs[0]; i++) {
        if (only && !strstr(only, specs[i].id)) continue;
        bs_err err;
        bs_err_clear(&err);
        if (make(&specs[i], argv[1], &err) != 0) {
            fprintf(stderr, "bench_diagcost_models: %s: %s\n", specs[i].id, err.msg);
            return 1;
        }
    }
    return 0;
}
