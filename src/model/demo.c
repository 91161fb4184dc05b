/* The invented demonstration family ("Jo-Qu compounds", fictitious: no element symbol begins with
 * J or Q). Each entry is a built-in lattice model with parameters drawn from a seeded generator. */
#include "bandsieve/demo.h"

#include <math.h>
#include <stdio.h>
#include <string.h>

#include "bandsieve/fitnoise.h"
#include "bandsieve/lattice_models.h"
#include "bandsieve/matset.h"

/* splitmix64: small, seeded, reproducible across platforms (common practice). */
static uint64_t mix(uint64_t z)
{
    z += 0x9E3779B97F4A7C15ULL;
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

typedef struct demo_rng {
    uint64_t state;
} demo_rng;

static double uniform(demo_rng *g, double lo, double hi)
{
    g->state = mix(g->state);
    return lo + (hi - lo) * ((g->state >> 11) * (1.0 / 9007199254740992.0));
}

static const char *const SYMBOLS[] = {"Ja", "Je", "Jo", "Qu", "Qi", "Qo", "Jy", "Qa"};

static void invent_formula(demo_rng *g, char *out, int len)
{
    int a = (int)uniform(g, 0, 8), b = (int)uniform(g, 0, 8);
    if (b == a) b = (a + 3) % 8;
    int na = 1 + (int)uniform(g, 0, 3), nb = 1 + (int)uniform(g, 0, 4);
    char sa[16] = "", sb[16] = "";
    if (na > 1) snprintf(sa, sizeof sa, "%d", na);
    if (nb > 1) snprintf(sb, sizeof sb, "%d", nb);
    snprintf(out, len, "%s%s%s%s", SYMBOLS[a], sa, SYMBOLS[b], sb);
}

/* Parameters of one entry. The mix of models puts entries on both sides of each published
 * phase boundary (see lattice_models.h for the boundaries). */
static void draw_spec(demo_rng *g, char *spec, int len)
{
    double u = uniform(g, 0, 1);
    if (u < 0.20) {
        double so = uniform(g, 0.02, 0.10), lv = uniform(g, 0.0, 0.7);
        double lr = uniform(g, 0, 1) < 0.5 ? 0.0 : uniform(g, 0.0, 0.08);
        snprintf(spec, len, "kane_mele:lambda_SO=%.4f,lambda_v=%.4f,lambda_R=%.4f", so, lv, lr);
    } else if (u < 0.35) {
        double M = uniform(g, -2.0, 10.0), delta = uniform(g, 0, 1) < 0.3 ? uniform(g, 0.0, 0.1) : 0.0;
        snprintf(spec, len, "bhz:M=%.4f,delta=%.4f", M, delta);
    } else if (u < 0.45) {
        double M = uniform(g, -0.9, 0.9), phi = uniform(g, -1.0, 1.0);
        snprintf(spec, len, "haldane:M=%.4f,phi=%.4f", M, phi);
    } else if (u < 0.72) {
        double dt = uniform(g, -0.6, 0.6), stag = uniform(g, 0, 1) < 0.6 ? 0.0 : uniform(g, 0.0, 0.9);
        snprintf(spec, len, "fkm:dt=%.4f,stag=%.4f", dt, stag);
    } else if (u < 0.80) {
        snprintf(spec, len, "weyl:w=%.4f,m=%.4f", uniform(g, 0.1, 0.4), uniform(g, 1.5, 3.0));
    } else if (u < 0.86) {
        snprintf(spec, len, "nodal_line:m=%.4f", uniform(g, 1.2, 2.8));
    } else if (u < 0.94) {
        snprintf(spec, len, "atomic:delta=%.4f,dim=%d", uniform(g, 0.5, 3.0), uniform(g, 0, 1) < 0.5 ? 2 : 3);
    } else {
        snprintf(spec, len, "metal:v=%.4f,dim=%d", uniform(g, 0.0, 0.5), uniform(g, 0, 1) < 0.5 ? 2 : 3);
    }
}

static int nbroken(int count)
{
    return count / 50 > 4 ? count / 50 : 4;
}

void demo_entry(int i, int count, uint64_t seed, char *spec, int speclen, char *formula, int formlen,
                int *broken, double *noise_rel, uint64_t *noise_seed)
{
    demo_rng g = {mix(seed ^ (0x51ED2701ULL * (uint64_t)(i + 1)))};
    invent_formula(&g, formula, formlen);
    draw_spec(&g, spec, speclen);
    /* The broken entries are spread through the set, one of each kind in turn. */
    int nb = nbroken(count), stride = count / nb;
    *broken = (i % stride == stride / 2 && i / stride < nb) ? 1 + (i / stride) % 4 : 0;
    /* Invented fit noise, drawn after the spec so that the specs of the set do not change. */
    double u = uniform(&g, 0, 1), e = uniform(&g, -4, -3);
    *noise_rel = !*broken && u < 0.25 ? pow(10.0, e) : 0.0;
    g.state = mix(g.state);
    *noise_seed = g.state;
}

int demo_model(int i, int count, uint64_t seed, tb_model **out, bs_err *err)
{
    *out = NULL;
    char spec[256], formula[32];
    int broken = 0;
    double noise = 0;
    uint64_t nseed = 0;
    demo_entry(i, count, seed, spec, sizeof spec, formula, sizeof formula, &broken, &noise, &nseed);
    tb_model *m = NULL;
    int rc = lm_build(spec, &m, err);
    if (rc != 0) return rc;
    if (noise > 0) {
        tb_model *noisy = NULL;
        rc = fitnoise_apply(m, noise, nseed, &noisy, err);
        tb_model_free(m);
        if (rc != 0) return rc;
        m = noisy;
        snprintf(m->source, sizeof m->source,
                 "invented demo entry with invented fit noise %.1e; model %.180s", noise, spec);
    } else {
        snprintf(m->source, sizeof m->source, "invented demo entry; model %.200s", spec);
    }
    snprintf(m->id, sizeof m->id, "JQ-%04d", i + 1);
    snprintf(m->formula, sizeof m->formula, "%s", formula);
    *out = m;
    return 0;
}

/* Damages a valid model the way a bad fit or a bad export would. */
static void damage(tb_model *m, int kind)
{
    size_t nn = (size_t)m->norb * m->norb;
    if (kind == 1) {
        /* Break hermiticity: one hopping of R != 0 changes without its partner at -R. */
        for (int r = 0; r < m->nR; r++)
            if (m->R[r][0] || m->R[r][1] || m->R[r][2]) {
                m->H[r * nn + 1] += 0.05;
                break;
            }
    } else if (kind == 2) {
        m->nocc = m->norb;
    } else if (kind == 3) {
        m->H[0] = NAN;
    }
}

/* Invented families appended by demo_write_set_families: a pressure series of one invented
 * diamond-lattice compound (Fu-Kane-Mele model, Phys. Rev. Lett. 98, 106803 (2007), whose [111]
 * bond hopping is made to grow with pressure, with a small inversion-breaking staggered potential,
 * so the path crosses a Weyl phase) and a two-end-member alloy of honeycomb compounds (Kane-Mele
 * model, Phys. Rev. Lett. 95, 226801 (2005), with the staggered potential across the 3 sqrt3
 * lambda_SO boundary). The numbers are invented; only the models are published. */
static int add_families(ms_set *set, bs_err *err)
{
    static const double pressure[] = {0, 2, 4, 6, 8};
    int rc = 0;
    for (int i = 0; rc == 0 && i < 5; i++) {
        char spec[128];
        snprintf(spec, sizeof spec, "fkm:dt=%.4f,stag=0.15", -0.3 + 0.075 * pressure[i]);
        tb_model *m = NULL;
        rc = lm_build(spec, &m, err);
        if (rc != 0) break;
        snprintf(m->id, sizeof m->id, "JQF-Jo2Qu-%.0fGPa", pressure[i]);
        snprintf(m->formula, sizeof m->formula, "Jo2Qu");
        snprintf(m->source, sizeof m->source, "invented pressure series (demo); model %.200s", spec);
        m->has_family = 1;
        snprintf(m->family, sizeof m->family, "Jo2Qu-pressure");
        snprintf(m->family_param, sizeof m->family_param, "pressure");
        snprintf(m->family_unit, sizeof m->family_unit, "GPa");
        m->family_value = pressure[i];
        rc = ms_add(set, m, err);
        tb_model_free(m);
    }
    static const char *const ends[2] = {"JaQi", "JaQo"};
    static const double lv[2] = {0.1, 0.5};
    for (int i = 0; rc == 0 && i < 2; i++) {
        char spec[128];
        snprintf(spec, sizeof spec, "kane_mele:lambda_SO=0.06,lambda_R=0,lambda_v=%.2f", lv[i]);
        tb_model *m = NULL;
        rc = lm_build(spec, &m, err);
        if (rc != 0) break;
        snprintf(m->id, sizeof m->id, "JQF-%s", ends[i]);
        snprintf(m->formula, sizeof m->formula, "%s", ends[i]);
        snprintf(m->source, sizeof m->source, "invented alloy end member (demo); model %.200s", spec);
        m->has_family = 1;
        snprintf(m->family, sizeof m->family, "JaQi1-xQox");
        snprintf(m->family_param, sizeof m->family_param, "x");
        m->family_value = i;
        rc = ms_add(set, m, err);
        tb_model_free(m);
    }
    return rc;
}

int demo_write_set(const char *path, int count, uint64_t seed, bs_err *err)
{
    return demo_write_set_families(path, count, seed, 0, err);
}

int demo_write_set_families(const char *path, int count, uint64_t seed, int families, bs_err *err)
{
    if (count < 12) return bs_fail(err, BS_EINVAL, "demo set needs at least 12 entries, asked for %d", count);
    ms_set *set = NULL;
    int rc = ms_create(path, &set, err);
    if (rc != 0) return rc;
    char desc[512];
    snprintf(
        desc, sizeof desc,
        "INVENTED demonstration family (the fictitious Jo-Qu compounds, seed %llu, %d "
        "entries): built-in published lattice models with drawn parameters, invented fit noise (1e-4 to "
        "1e-3 of the largest hopping) on about a quarter of them, and a few deliberately broken entries. "
        "Not real materials.",
        (unsigned long long)seed, count);
    rc = ms_set_meta(set, desc, 1, err);
    for (int i = 0; rc == 0 && i < count; i++) {
        char spec[256], formula[32], id[64];
        int broken = 0;
        double noise = 0;
        uint64_t nseed = 0;
        demo_entry(i, count, seed, spec, sizeof spec, formula, sizeof formula, &broken, &noise, &nseed);
        snprintf(id, sizeof id, "JQ-%04d", i + 1);
        if (broken == 4) {
            char msg[256];
            snprintf(msg, sizeof msg,
                     "cards/%s.json:7: key \"occupied_bands\" must be an integer, found a string "
                     "(invented broken card)",
                     id);
            rc = ms_add_error(set, id, BS_EPARSE, msg, err);
            continue;
        }
        tb_model *m = NULL;
        rc = demo_model(i, count, seed, &m, err);
        if (rc != 0) break;
        if (broken) {
            damage(m, broken);
            rc = ms_add_broken(set, m, err);
        } else {
            rc = ms_add(set, m, err);
        }
        tb_model_free(m);
    }
    if (rc == 0 && families) rc = add_families(set, err);
    if (rc == 0) rc = ms_close(set, err);
    ms_free(set);
    return rc;
}
