/* Diagnosis of noisy fits (issue: real fits are never exactly symmetric). Every built-in model gets
 * random Hermitian noise of 1e-5 .. 1e-2 of its largest hopping on every H(R) plus tails on the next
 * shell of R (tests/noise.h), with several seeds. Wherever the noise bound is below a quarter of the
 * clean gap, the class, Z2 and |Chern| equal the clean model's: by Weyl's inequality for Hermitian
 * perturbations (common practice in numerical linear algebra; Horn and Johnson, Matrix Analysis, from
 * memory) the noisy H and the clean H0 are joined by a gapped path, and so are H and its symmetrised
 * model; above it no class may be confident (>= 0.8) and wrong. The clean classes are those of the
 * published models (journal references in lattice_models.h and test_diagnosis.c). Magnetic models
 * (Haldane: Phys. Rev. Lett. 61, 2015 (1988); the time-reversal-broken Weyl model) keep their answer at
 * every level; Kane-Mele with an exchange field comparable to its gap is no Z2 insulator. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"
#include "noise.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/demo.h"
#include "bandsieve/diagnosis.h"
#include "bandsieve/symfit.h"

static void run(const tb_model *m, const diag_opts *o, res_diag *r)
{
    bs_err err;
    bs_err_clear(&err);
    res_init(r);
    diag_opts d = {0};
    d.seed = 1;
    if (diag_run(m, o ? o : &d, r, &err) != 0) fail_msg("%s: %s", m->id, err.msg);
}

/* One clean model and how many seeds and levels it gets in the unit test (the 3D semimetals are
 * the slow ones: their node search runs at every level). */
typedef struct noisy_case {
    const char *spec;
    int nseed;
    int first_level; /* index into levels[] */
    int magnetic;    /* the class must survive every level */
} noisy_case;

static const double levels[] = {1e-5, 1e-4, 1e-3, 1e-2};

static const noisy_case cases[] = {
    {"graphene", 2, 0, 0},
    {"haldane", 3, 0, 1},
    {"haldane:M=1", 2, 0, 1},
    {"kane_mele", 3, 0, 0},
    {"kane_mele:lambda_R=0,lambda_v=0", 2, 0, 0},
    {"kane_mele:lambda_v=0.4,lambda_R=0", 2, 0, 0},
    {"bhz", 2, 0, 0},
    {"bhz:M=-1", 2, 0, 0},
    {"bhz:delta=0.3", 2, 0, 0},
    {"fkm", 2, 0, 0},
    {"fkm:dt=-0.4", 2, 0, 0},
    {"weyl", 2, 0, 1},
    {"nodal_line", 1, 3, 0},
    {"atomic", 1, 0, 0},
    {"atomic:dim=2", 2, 0, 0},
    {"metal", 1, 0, 0},
    {"metal:dim=2", 2, 0, 0},
    /* The mirror Chern number rests on the crystal's mirrors, kept as approximate and averaged
     * when broken by fit noise below the gap (crystal.c). */
    {"rocksalt_tci", 1, 1, 0},
};

static int same_z2(const res_diag *a, const res_diag *b)
{
    if (a->z2_status != b->z2_status) return 0;
    return a->z2_status != RES_DONE || memcmp(a->z2, b->z2, (a->dim == 2 ? 1 : 4) * sizeof(int)) == 0;
}

static void check_case(const noisy_case *nc)
{
    tb_model *clean = bs_test_build(nc->spec);
    res_diag r0;
    run(clean, NULL, &r0);
    for (int seed = 1; seed <= nc->nseed; seed++)
        for (int l = nc->first_level; l < 4; l++) {
            tb_model *m = NULL;
            double nb = 0;
            assert_int_equal(bs_noise_model(clean, levels[l], (uint64_t)seed * 7919, &m, &nb), 0);
            res_diag r;
            run(m, NULL, &r);
            int same = r.cls == r0.cls;
            if (nc->magnetic && !same)
                fail_msg("%s, noise %g seed %d: magnetic model became '%s' (%s)", nc->spec, levels[l], seed,
                         res_class_name(r.cls), r.reason);
            if (nb < r0.gap_direct_ev / 4) {
                if (!same || !same_z2(&r, &r0) || abs(r.chern) != abs(r0.chern))
                    fail_msg("%s, noise %g (bound %.3g eV < gap/4 = %.3g) seed %d: '%s' z2 %d chern %d, "
                             "clean '%s' z2 %d "
                             "chern %d (%s; space group %d, %d operations, crystal symmetrised %d, "
                             "breaking %.3g eV, mirror Chern %d status %s)",
                             nc->spec, levels[l], nb, r0.gap_direct_ev / 4, seed, res_class_name(r.cls),
                             r.z2[0], r.chern, res_class_name(r0.cls), r0.z2[0], r0.chern, r.reason,
                             r.spacegroup, r.symmetry_ops, r.crystal_symmetrised, r.crystal_breaking_ev,
                             r.mirror_chern, res_status_name(r.mirror_chern_status));
            } else if (!same && r.confidence >= 0.8) {
                fail_msg("%s, noise %g seed %d: confident (%.2f) '%s', clean '%s' (%s)", nc->spec, levels[l],
                         seed, r.confidence, res_class_name(r.cls), res_class_name(r0.cls), r.reason);
            }
            res_clear(&r);
            tb_model_free(m);
        }
    res_clear(&r0);
    tb_model_free(clean);
}

static void test_every_model_noisy(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof cases / sizeof cases[0]; i++)
        check_case(&cases[i]);
}

/* Kane-Mele (lambda_R = 0, lambda_v = 0.1) with an exchange field m s_z of 0.3 x its gap: time
 * reversal is broken by 2m at every k (a coherent breaking, both bounds equal), comparable to the
 * gap; the model is no Z2 insulator, with or without fit noise on top. */
static void test_exchange_not_z2(void **state)
{
    (void)state;
    tb_model *clean = bs_test_build("kane_mele:lambda_R=0,lambda_v=0.1");
    bs_err err;
    res_diag r0, r;
    run(clean, NULL, &r0);
    double m_ev = 0.3 * r0.gap_direct_ev;
    for (int noisy = 0; noisy < 2; noisy++) {
        tb_model *m = NULL;
        if (noisy)
            assert_int_equal(bs_noise_model(clean, 1e-4, 3, &m, NULL), 0);
        else
            assert_int_equal(tb_model_copy(clean, &m, &err), 0);
        bs_noise_exchange(m, m_ev);
        run(m, NULL, &r);
        if (strstr(res_class_name(r.cls), "topological insulator"))
            fail_msg("exchange %.3g eV: called '%s' (%s)", m_ev, res_class_name(r.cls), r.reason);
        assert_int_equal(r.tr_verdict, RES_SYM_BROKEN);
        assert_int_equal(r.time_reversal, 0);
        assert_true(fabs(r.tr_break_lower_ev - 2 * m_ev) < 2e-3);
        res_clear(&r);
        tb_model_free(m);
    }
    res_clear(&r0);
    tb_model_free(clean);
}

/* The user's statement beats detection. Noise of 3e-2 on Kane-Mele breaks time reversal by more
 * than the gap (between the regimes: no label, both readings); the card saying non-magnetic
 * restores it (the 2D TI of the clean model, with a low confidence and a warning); saying magnetic
 * gives no Z2. The run's override (diag_opts.magnetism) acts as the card key does. */
static void test_magnetism_statement(void **state)
{
    (void)state;
    tb_model *clean = bs_test_build("kane_mele"), *m = NULL;
    assert_int_equal(bs_noise_model(clean, 3e-2, 1, &m, NULL), 0);
    res_diag r;
    run(m, NULL, &r);
    assert_string_equal(res_class_name(r.cls), "undetermined");
    assert_non_null(strstr(r.reason, "if fit error"));
    assert_non_null(strstr(r.reason, "if physical"));
    res_clear(&r);

    m->magnetism = TB_MAG_NONE;
    run(m, NULL, &r);
    assert_string_equal(res_class_name(r.cls), "2D topological insulator");
    assert_true(r.confidence < 0.8);
    assert_true(r.restored & RES_RESTORED_TR);
    assert_non_null(strstr(r.reason, "non-magnetic"));
    res_clear(&r);

    diag_opts o = {0};
    o.seed = 1;
    o.magnetism = 1 + TB_MAG_MAGNETIC;
    run(m, &o, &r);
    assert_string_equal(r.magnetism, "magnetic");
    assert_int_equal(r.z2_status, RES_NA);
    assert_int_equal(r.time_reversal, 0);
    assert_string_equal(res_class_name(r.cls), "trivial insulator");
    res_clear(&r);

    o.magnetism = 1 + TB_MAG_UNKNOWN; /* overrides the card's "none" */
    run(m, &o, &r);
    assert_string_equal(res_class_name(r.cls), "undetermined");
    res_clear(&r);
    tb_model_free(m);
    tb_model_free(clean);
}

/* The rule of the README's sweep: on the Fu-Kane-Mele strong TI (Phys. Rev. Lett. 98, 106803
 * (2007)), from noise 1e-6 to 1e-1 the confidence never rises as the margin falls, and no margin
 * below 2 carries a confidence of 0.8 or more. */
static void test_confidence_falls_with_margin(void **state)
{
    (void)state;
    tb_model *clean = bs_test_build("fkm");
    double prev_conf = 1.0;
    for (double lv = 1e-6; lv < 0.2; lv *= sqrt(10.0)) {
        tb_model *m = NULL;
        assert_int_equal(bs_noise_model(clean, lv, 5, &m, NULL), 0);
        res_diag r;
        run(m, NULL, &r);
        double margin = r.restored ? r.margin : (strstr(res_class_name(r.cls), "insulator") ? INFINITY : 0);
        if (margin < SYMFIT_MARGIN_SAFE && r.confidence >= 0.8)
            fail_msg("noise %g: margin %.3g with confidence %.2f ('%s')", lv, margin, r.confidence,
                     res_class_name(r.cls));
        if (r.confidence > prev_conf + 1e-12)
            fail_msg("noise %g: confidence rose to %.3f from %.3f (margin %.3g)", lv, r.confidence, prev_conf,
                     margin);
        prev_conf = r.confidence;
        res_clear(&r);
        tb_model_free(m);
    }
    tb_model_free(clean);
}

/* A copy of m with its states read as spinless orbitals (positions and l of the spatial orbital
 * of each state): what a card saying "spinful": false makes of a spinful table. */
static tb_model *as_spinless(const tb_model *m)
{
    tb_model *c = NULL;
    bs_err err;
    assert_int_equal(tb_model_copy(m, &c, &err), 0);
    double(*pos)[3] = malloc((size_t)m->norb * sizeof *pos);
    int *l = malloc((size_t)m->norb * sizeof *l);
    for (int i = 0; i < m->norb; i++) {
        memcpy(pos[i], m->orb_pos[tb_state_orbital(m, i)], sizeof pos[i]);
        l[i] = m->orb_l[tb_state_orbital(m, i)];
    }
    free(c->orb_pos);
    free(c->orb_l);
    free(c->orb_shape);
    c->orb_shape = NULL;
    c->orb_pos = pos;
    c->orb_l = l;
    c->spinful = 0;
    c->spin_layout = TB_SPIN_NONE;
    c->nspatial = m->norb;
    return c;
}

static void expect_layout_refused(tb_model *m, const char *looks)
{
    res_diag r;
    res_init(&r);
    diag_opts o = {0};
    bs_err err;
    bs_err_clear(&err);
    int rc = diag_run(m, &o, &r, &err);
    if (rc != BS_EINVAL || !strstr(err.msg, looks))
        fail_msg("%s: rc %d, message '%s' (want '%s'); class '%s'", m->id, rc, err.msg, looks,
                 res_class_name(r.cls));
    res_clear(&r);
}

/* A wrong spin layout on the card (issue: a strong TI became "trivial insulator (0.85)"): the
 * entry is refused, naming the layout the table looks like. Kane-Mele written interleaved but
 * declared blocks, Fu-Kane-Mele declared spinless; the noisy versions too. */
static void test_wrong_spin_layout(void **state)
{
    (void)state;
    bs_err err;
    for (int noisy = 0; noisy < 2; noisy++) {
        tb_model *km = bs_test_build("kane_mele:layout=1"), *m = NULL;
        if (noisy)
            assert_int_equal(bs_noise_model(km, 1e-3, 2, &m, NULL), 0);
        else
            assert_int_equal(tb_model_copy(km, &m, &err), 0);
        m->spin_layout = TB_SPIN_BLOCKS;
        expect_layout_refused(m, "looks interleaved");
        tb_model_free(m);
        tb_model_free(km);
    }
    tb_model *fkm = bs_test_build("fkm"), *s = as_spinless(fkm);
    expect_layout_refused(s, "looks blocks");
    tb_model_free(s);
    tb_model_free(fkm);
    /* A collinear magnet without spin-orbit coupling passes spinless time reversal but not i s_y K:
     * that is no evidence of a wrong card, and the entry is diagnosed. */
    tb_model *at = bs_test_build("atomic:dim=2");
    bs_noise_exchange(at, 0.5);
    res_diag r;
    run(at, NULL, &r);
    assert_int_not_equal(r.tr_verdict, RES_SYM_EXACT);
    assert_string_equal(res_class_name(r.cls), "trivial insulator");
    res_clear(&r);
    tb_model_free(at);
}

/* The invented demo set's entries with invented fit noise (demo.h) keep the class of their clean
 * model wherever the noise bound is below a quarter of the clean gap, and are never confidently
 * wrong elsewhere (the rule of test_every_model_noisy). */
static void test_demo_noisy_entries(void **state)
{
    (void)state;
    const int count = 40;
    int nnoisy = 0;
    for (int i = 0; i < count; i++) {
        char spec[256], formula[32];
        int broken;
        double rel;
        uint64_t nseed;
        demo_entry(i, count, 11, spec, sizeof spec, formula, sizeof formula, &broken, &rel, &nseed);
        if (broken || rel == 0) continue;
        nnoisy++;
        tb_model *clean = bs_test_build(spec), *m = NULL;
        bs_err err;
        assert_int_equal(demo_model(i, count, 11, &m, &err), 0);
        assert_non_null(strstr(m->source, "invented fit noise"));
        tb_model *again = NULL;
        double nb = 0;
        assert_int_equal(bs_noise_model(clean, rel, nseed, &again, &nb), 0);
        assert_memory_equal(again->H, m->H, (size_t)m->nR * m->norb * m->norb * sizeof *m->H);
        res_diag r0, r;
        run(clean, NULL, &r0);
        run(m, NULL, &r);
        int same = r.cls == r0.cls;
        if (nb < r0.gap_direct_ev / 4 ? !same : (!same && r.confidence >= 0.8))
            fail_msg("demo %d (%s, noise %.1e, bound %.3g, clean gap %.3g): '%s' (%.2f), clean '%s' (%s)",
                     i + 1, spec, rel, nb, r0.gap_direct_ev, res_class_name(r.cls), r.confidence,
                     res_class_name(r0.cls), r.reason);
        res_clear(&r0);
        res_clear(&r);
        tb_model_free(again);
        tb_model_free(m);
        tb_model_free(clean);
    }
    assert_true(nnoisy >= 5);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_every_model_noisy),   cmocka_unit_test(test_exchange_not_z2),
        cmocka_unit_test(test_magnetism_statement), cmocka_unit_test(test_confidence_falls_with_margin),
        cmocka_unit_test(test_wrong_spin_layout),   cmocka_unit_test(test_demo_noisy_entries),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
