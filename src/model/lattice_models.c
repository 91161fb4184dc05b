/* The catalogue of built-in lattice models and the spec parser NAME[:key=val,...] that builds them.
 * The Hamiltonians themselves live in lm_honeycomb.c, lm_cubic.c and lm_diamond.c. */
#include "bandsieve/lattice_models.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "lm_acc.h"

#define LM_ANY -INFINITY, INFINITY
#define LM_LATT(def)                                                                                         \
    {                                                                                                        \
        "a", def, "lattice constant (Angstrom); does not change H(k) in reduced k", 0, 0.01, 1000            \
    }
#define LM_LAYOUT                                                                                            \
    {                                                                                                        \
        "layout", 0, "spin layout: 0 all spin-up states then all spin-down, 1 interleaved", 1, 0, 1          \
    }

static const lm_param GR_PARAMS[GR_N] = {
    [GR_T] = {"t", 2.7, "nearest-neighbour hopping (eV), H_AB = -t", 0, LM_ANY},
    [GR_A] = LM_LATT(2.46),
};

static const lm_param HA_PARAMS[HA_N] = {
    [HA_T1] = {"t1", 1.0, "nearest-neighbour hopping (eV), H_AB = -t1", 0, LM_ANY},
    [HA_T2] = {"t2", 0.1, "second-neighbour hopping magnitude (eV)", 0, LM_ANY},
    [HA_PHI] = {"phi", 0.5, "second-neighbour flux phase, in units of pi", 0, LM_ANY},
    [HA_M] = {"M", 0.0, "sublattice potential (eV): +M on A, -M on B", 0, LM_ANY},
    [HA_A] = LM_LATT(2.46),
};

static const lm_param KM_PARAMS[KM_N] = {
    [KM_T] = {"t", 1.0, "nearest-neighbour hopping (eV)", 0, LM_ANY},
    [KM_LSO] = {"lambda_SO", 0.06, "intrinsic spin-orbit coupling (eV), i lambda_SO nu_ij s_z", 0, LM_ANY},
    [KM_LR] = {"lambda_R", 0.05, "Rashba coupling (eV), i lambda_R (s x d_ij)_z", 0, LM_ANY},
    [KM_LV] = {"lambda_v", 0.1, "staggered sublattice potential (eV): +lambda_v on A, -lambda_v on B", 0,
               LM_ANY},
    [KM_A] = LM_LATT(2.46),
    [KM_LAYOUT] = LM_LAYOUT,
};

static const lm_param BHZ_PARAMS[BHZ_N] = {
    [BHZ_A] = {"A", 1.0, "spin-orbit velocity term (eV), A sin k", 0, LM_ANY},
    [BHZ_B] = {"B", 1.0, "band curvature of the mass term (eV)", 0, LM_ANY},
    [BHZ_C] = {"C", 0.0, "energy offset (eV)", 0, LM_ANY},
    [BHZ_D] = {"D", 0.0, "particle-hole asymmetric curvature (eV)", 0, LM_ANY},
    [BHZ_M] = {"M", 1.0, "mass at Gamma (eV); 2D TI for 0 < M/B < 8", 0, LM_ANY},
    [BHZ_G] = {"g", 0.0, "S_z-breaking term g sin ky s_x tau_x (eV), keeps T and inversion", 0, LM_ANY},
    [BHZ_DELTA] = {"delta", 0.0,
                   "constant spin-block coupling delta s_y tau_y (eV), keeps T, breaks "
                   "S_z and inversion",
                   0, LM_ANY},
    [BHZ_LATT] = LM_LATT(1.0),
    [BHZ_LAYOUT] = LM_LAYOUT,
};

static const lm_param FKM_PARAMS[FKM_N] = {
    [FKM_T] = {"t", 1.0, "nearest-neighbour hopping (eV)", 0, LM_ANY},
    [FKM_DT] = {"dt", 0.4, "change of the [111] bond's hopping (eV): > 0 strong TI, < 0 weak TI", 0, LM_ANY},
    [FKM_LSO] = {"lambda_SO", 0.125, "second-neighbour spin-orbit coupling (eV)", 0, LM_ANY},
    [FKM_STAG] = {"stag", 0.0, "staggered potential (eV), +stag on A, -stag on B; breaks inversion", 0,
                  LM_ANY},
    [FKM_A] = LM_LATT(3.567),
    [FKM_LAYOUT] = LM_LAYOUT,
};

static const lm_param WE_PARAMS[WE_N] = {
    [WE_T] = {"t", 1.0, "hopping (eV)", 0, LM_ANY},
    [WE_M] = {"m", 1.0, "mass term m(2 - cos ky - cos kz) (eV) gapping the other nodes", 0, LM_ANY},
    [WE_W] = {"w", 0.25, "node position: nodes at reduced k = (+-w, 0, 0)", 0, 0, 0.5},
    [WE_A] = LM_LATT(1.0),
};

static const lm_param NL_PARAMS[NL_N] = {
    [NL_T] = {"t", 1.0, "hopping (eV)", 0, LM_ANY},
    [NL_M] = {"m", 2.0, "loop size: cos kx + cos ky = m - 1 in the k3 = 0 plane", 0, LM_ANY},
    [NL_TZ] = {"tz", 1.0, "tz sin kz s_z term (eV) that gaps everything off the mirror planes", 0, LM_ANY},
    [NL_A] = LM_LATT(1.0),
};

static const lm_param AT_PARAMS[AT_N] = {
    [AT_DELTA] = {"delta", 2.0, "on-site energy (eV): +delta on A, -delta on B", 0, LM_ANY},
    [AT_T] = {"t", 0.1, "A-B hopping (eV)", 0, LM_ANY},
    [AT_DIM] = {"dim", 3, "dimension, 2 or 3", 1, 2, 3},
    [AT_A] = LM_LATT(1.0),
    [AT_LAYOUT] = LM_LAYOUT,
};

static const lm_param ME_PARAMS[ME_N] = {
    [ME_T] = {"t", 1.0, "hopping (eV), dispersion -2t sum cos k_i", 0, LM_ANY},
    [ME_DELTA] = {"delta", 1.0, "orbital splitting (eV)", 0, LM_ANY},
    [ME_V] = {"v", 0.2, "on-site hybridisation (eV)", 0, LM_ANY},
    [ME_DIM] = {"dim", 3, "dimension, 2 or 3", 1, 2, 3},
    [ME_A] = LM_LATT(1.0),
};

static const lm_param RS_PARAMS[RS_N] = {
    [RS_M] = {"m", 1.65,
              "sublattice mass (eV): +m on site 1, -m on site 2; m > 0 inverted (crystalline insulator), m < "
              "0 trivial",
              0, LM_ANY},
    [RS_T12] = {"t12", 0.9, "nearest-neighbour sigma hopping between the sublattices (eV)", 0, LM_ANY},
    [RS_T11] = {"t11", 0.5, "second-neighbour sigma hopping (eV): t11 on site 1, -t11 on site 2", 0, LM_ANY},
    [RS_L1] = {"lambda1", -0.7, "spin-orbit coupling on site 1 (eV)", 0, LM_ANY},
    [RS_L2] = {"lambda2", 0.3, "spin-orbit coupling on site 2 (eV)", 0, LM_ANY},
    [RS_A] = LM_LATT(6.3),
    [RS_LAYOUT] = LM_LAYOUT,
};

static const lm_param RA_PARAMS[RA_N] = {
    [RA_T] = {"t", 1.0, "nearest-neighbour hopping (eV), dispersion -2t (cos kx + cos ky)", 0, LM_ANY},
    [RA_LR] = {"lambda_R", 0.05, "Rashba coupling (eV), lambda_R (s_x sin ky - s_y sin kx)", 0, LM_ANY},
    [RA_A] = LM_LATT(1.0),
    [RA_LAYOUT] = LM_LAYOUT,
};

typedef int (*lm_builder)(const double *p, const char *spec, tb_model **out, bs_err *err);

static const lm_info LM_MODELS[] = {
    {"graphene", NULL, "honeycomb lattice, nearest-neighbour hopping, spinless",
     "Rev. Mod. Phys. 81, 109 (2009)", 2, 0, "semimetal, Dirac points at K and K'", GR_N, GR_PARAMS},
    {"haldane", NULL, "honeycomb Chern insulator, spinless", "Phys. Rev. Lett. 61, 2015 (1988)", 2, 0,
     "Chern insulator, |C| = 1 (|M| < 3 sqrt3 |t2 sin phi|)", HA_N, HA_PARAMS},
    {"kane_mele", NULL, "honeycomb lattice with spin-orbit, Rashba and staggered potential",
     "Phys. Rev. Lett. 95, 226801 (2005); 95, 146802 (2005)", 2, 1,
     "2D topological insulator, Z2 = 1 (lambda_v < 3 sqrt3 lambda_SO at lambda_R = 0)", KM_N, KM_PARAMS},
    {"bhz", NULL, "square-lattice BHZ quantum-well model, 4 bands", "Science 314, 1757 (2006)", 2, 1,
     "2D topological insulator, Z2 = 1 (0 < M/B < 8)", BHZ_N, BHZ_PARAMS},
    {"fkm", NULL, "Fu-Kane-Mele diamond lattice with spin-orbit coupling",
     "Phys. Rev. Lett. 98, 106803 (2007)", 3, 1, "strong topological insulator (1;111) (dt > 0)", FKM_N,
     FKM_PARAMS},
    {"weyl", NULL, "two-band cubic Weyl semimetal, time reversal broken",
     "common practice form; Phys. Rev. B 83, 205101 (2011)", 3, 0,
     "Weyl semimetal, nodes (+-1/4,0,0) with chirality -1/+1", WE_N, WE_PARAMS},
    {"nodal_line", NULL, "two-band cubic nodal-line semimetal (mirror-protected loop)",
     "common practice form", 3, 0, "nodal line: k3 = 0, cos kx + cos ky = 1", NL_N, NL_PARAMS},
    {"atomic", "trivial", "two-sublattice atomic-limit insulator, spinful", "common practice form", 0, 1,
     "trivial insulator, gap 2 delta = 4 eV", AT_N, AT_PARAMS},
    {"metal", NULL, "two overlapping bands at half filling", "common practice form", 0, 0,
     "metal (bands overlap, Fermi surface)", ME_N, ME_PARAMS},
    {"rocksalt_tci", NULL, "rock-salt p-orbital model of a topological crystalline insulator, spinful",
     "Nat. Commun. 3, 982 (2012) (parameters from memory)", 3, 1,
     "topological crystalline insulator: Z2 = 0;000, |mirror Chern| = 2 on {110}", RS_N, RS_PARAMS},
    {"rashba", NULL, "square-lattice two-dimensional electron gas with Rashba spin-orbit coupling",
     "Phys. Rev. Lett. 92, 126603 (2004)", 2, 1,
     "metal; spin Hall conductivity e/8pi with both spin-split bands occupied", RA_N, RA_PARAMS},
};

static const lm_builder LM_BUILDERS[] = {
    lm_build_graphene, lm_build_haldane,      lm_build_kane_mele,  lm_build_bhz,
    lm_build_fkm,      lm_build_weyl,         lm_build_nodal_line, lm_build_atomic,
    lm_build_metal,    lm_build_rocksalt_tci, lm_build_rashba,
};

#define LM_COUNT ((int)(sizeof LM_MODELS / sizeof LM_MODELS[0]))
_Static_assert(sizeof LM_MODELS / sizeof LM_MODELS[0] == sizeof LM_BUILDERS / sizeof LM_BUILDERS[0],
               "one builder per catalogue entry");

/* Longest spec accepted: it becomes the model id (tb_model.id holds 127 characters). */
#define LM_SPEC_MAX   127
#define LM_MAX_PARAMS 16

const lm_info *lm_catalogue(int *count)
{
    *count = LM_COUNT;
    return LM_MODELS;
}

static int lm_index(const char *name, size_t len)
{
    for (int i = 0; i < LM_COUNT; i++) {
        const char *al = LM_MODELS[i].alias;
        if ((strlen(LM_MODELS[i].name) == len && strncmp(LM_MODELS[i].name, name, len) == 0) ||
            (al && strlen(al) == len && strncmp(al, name, len) == 0))
            return i;
    }
    return -1;
}

const lm_info *lm_find(const char *name)
{
    int i = lm_index(name, strlen(name));
    return i < 0 ? NULL : &LM_MODELS[i];
}

/* Parses one "key=value" item of len characters into vals (seen marks keys already given). */
static int lm_parse_item(const char *spec, const lm_info *info, const char *item, size_t len, double *vals,
                         int *seen, bs_err *err)
{
    const char *eq = memchr(item, '=', len);
    if (!eq)
        return bs_fail(err, BS_EINVAL, "model spec '%s': expected key=value, found '%.*s'", spec, (int)len,
                       item);
    size_t klen = (size_t)(eq - item);
    int j = 0;
    while (j < info->nparam &&
           !(strlen(info->params[j].key) == klen && strncmp(info->params[j].key, item, klen) == 0))
        j++;
    if (j == info->nparam)
        return bs_fail(err, BS_EINVAL, "model spec '%s': model %s has no parameter '%.*s'", spec, info->name,
                       (int)klen, item);
    if (seen[j])
        return bs_fail(err, BS_EINVAL, "model spec '%s': parameter %s given twice", spec,
                       info->params[j].key);
    char text[64];
    size_t vlen = len - klen - 1;
    char *end = NULL;
    double v = NAN;
    if (vlen > 0 && vlen < sizeof text) {
        memcpy(text, eq + 1, vlen);
        text[vlen] = '\0';
        errno = 0;
        v = strtod(text, &end);
    }
    if (vlen == 0 || vlen >= sizeof text || *end != '\0' || errno != 0 || !isfinite(v))
        return bs_fail(err, BS_EINVAL, "model spec '%s': parameter %s needs a finite number, found '%.*s'",
                       spec, info->params[j].key, (int)vlen, eq + 1);
    const lm_param *pr = &info->params[j];
    if (pr->is_int && v != floor(v))
        return bs_fail(err, BS_EINVAL, "model spec '%s': parameter %s must be an integer, found %s", spec,
                       pr->key, text);
    if (v < pr->lo || v > pr->hi)
        return bs_fail(err, BS_EINVAL, "model spec '%s': parameter %s = %s outside %g..%g", spec, pr->key,
                       text, pr->lo, pr->hi);
    vals[j] = v;
    seen[j] = 1;
    return 0;
}

int lm_build(const char *spec, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (!spec || !*spec) return bs_fail(err, BS_EINVAL, "model spec is empty");
    if (strlen(spec) > LM_SPEC_MAX)
        return bs_fail(err, BS_EINVAL, "model spec '%.40s...' longer than %d characters", spec, LM_SPEC_MAX);
    const char *colon = strchr(spec, ':');
    size_t nlen = colon ? (size_t)(colon - spec) : strlen(spec);
    int idx = lm_index(spec, nlen);
    if (idx < 0)
        return bs_fail(err, BS_EINVAL, "model spec '%s': unknown model '%.*s' (bandsieve models lists them)",
                       spec, (int)nlen, spec);
    const lm_info *info = &LM_MODELS[idx];
    double vals[LM_MAX_PARAMS];
    int seen[LM_MAX_PARAMS] = {0};
    for (int j = 0; j < info->nparam; j++)
        vals[j] = info->params[j].def;
    if (colon) {
        const char *item = colon + 1;
        for (;;) {
            const char *comma = strchr(item, ',');
            size_t len = comma ? (size_t)(comma - item) : strlen(item);
            int rc = lm_parse_item(spec, info, item, len, vals, seen, err);
            if (rc != 0) return rc;
            if (!comma) break;
            item = comma + 1;
        }
    }
    return LM_BUILDERS[idx](vals, spec, out, err);
}
