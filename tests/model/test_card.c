/* Tests of the material-card reader and writer: the good fixtures' fields, a write-read round trip,
 * and one broken card per failure with its code and a message naming the card and the key or line. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/model.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "card");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

static tb_model *read_ok(const char *path)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = card_read(path, &m, &err);
    if (rc != 0) fail_msg("%s: %s", path, err.msg);
    return m;
}

static void test_good_spinless(void **state)
{
    (void)state;
    tb_model *m = read_ok(BS_TEST_DATA "/good/graphene_gap.json");
    /* The fixture's values (tests/data/good/README.md). */
    assert_string_equal(m->id, "graphene_gap");
    assert_string_equal(m->formula, "C2 (test fixture)");
    assert_int_equal(m->dim, 2);
    assert_int_equal(m->norb, 2);
    assert_int_equal(m->nocc, 1);
    assert_int_equal(m->spinful, 0);
    assert_int_equal(m->spin_layout, TB_SPIN_NONE);
    assert_true(m->lattice[1][0] == 1.23 && m->lattice[2][2] == 20.0);
    assert_true(m->orb_pos[1][0] == 2.0 / 3.0); /* JSON printed 17 digits: exact */
    assert_int_equal(m->orb_l[0], 1);
    assert_int_equal(m->has_fermi, 1);
    assert_int_equal(m->has_inversion_op, 0);
    tb_model_free(m);
}

static void test_good_spinful_inversion(void **state)
{
    (void)state;
    tb_model *m = read_ok(BS_TEST_DATA "/good/graphene_spinful.json");
    assert_int_equal(m->norb, 4);
    assert_int_equal(m->nspatial, 2);
    assert_int_equal(m->spin_layout, TB_SPIN_BLOCKS);
    assert_true(m->fermi_ev == -0.25);
    assert_int_equal(m->has_inversion_op, 1);
    /* maps_to 2,1,4,3 (1-based) in the card: 1,0,3,2 stored 0-based; shift (-1,-1,0). */
    const int want[4] = {1, 0, 3, 2};
    for (int i = 0; i < 4; i++) {
        assert_int_equal(m->inv_perm[i], want[i]);
        assert_true(m->inv_sign[i] == 1.0);
        assert_int_equal(m->inv_shift[i][0], -1);
        assert_int_equal(m->inv_shift[i][2], 0);
    }
    tb_model_free(m);
}

static void test_round_trip(void **state)
{
    (void)state;
    const char *cards[] = {BS_TEST_DATA "/good/graphene_gap.json",
                           BS_TEST_DATA "/good/graphene_spinful.json"};
    for (int c = 0; c < 2; c++) {
        tb_model *m = read_ok(cards[c]);
        /* Values no decimal text holds exactly, so that the round trip is exercised at 17 digits. */
        m->lattice[0][1] = 1.0 / 3.0;
        m->fermi_ev = M_PI;
        m->magnetism = c == 0 ? TB_MAG_NONE : TB_MAG_MAGNETIC;
        char path[512];
        bs_err err;
        bs_err_clear(&err);
        assert_int_equal(card_write(m, tmpdir, path, sizeof path, &err), 0);
        tb_model *back = read_ok(path);
        bs_test_expect_same_model(m, back);
        tb_model_free(back);
        tb_model_free(m);
    }
}

/* Reads a broken card; checks the code and that the message holds every needle given. */
static void expect_broken(const char *name, int code, const char *n1, const char *n2)
{
    char path[512];
    snprintf(path, sizeof path, "%s/broken/%s", BS_TEST_DATA, name);
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = card_read(path, &m, &err);
    if (rc != code || !strstr(err.msg, n1) || (n2 && !strstr(err.msg, n2)))
        fail_msg("%s: code %d (want %d), message: %s (want '%s', '%s')", name, rc, code, err.msg, n1,
                 n2 ? n2 : "");
    assert_null(m);
}

static void test_broken_cards(void **state)
{
    (void)state;
    expect_broken("nonhermitian.json", BS_EINVAL, "nonhermitian.json", "nonhermitian_hop.dat: not Hermitian");
    expect_broken("missing_minus_R.json", BS_EINVAL, "missing_minus_R.json", "-R missing");
    expect_broken("missing_key.json", BS_EPARSE, "missing_key.json", "missing key 'occupied_bands'");
    expect_broken("mistyped_key.json", BS_EPARSE, "mistyped_key.json:5: key 'dimension'", "found a string");
    expect_broken("nocc_range.json", BS_EINVAL, "nocc_range.json:24: key 'occupied_bands'", "found 2");
    expect_broken("spinful_odd.json", BS_EINVAL, "spinful_odd.json:23: key 'hoppings'", "odd3_hop.dat:2:");
    expect_broken("missing_table.json", BS_EIO, "missing_table.json:23: key 'hoppings'",
                  "no_such_table_hop.dat");
    expect_broken("bad_json.json", BS_EPARSE, "bad_json.json:6:", "JSON syntax");
    expect_broken("orbital_count.json", BS_EINVAL, "orbital_count.json:26: key 'orbitals'", "has 2");
    expect_broken("bad_spin_layout.json", BS_EINVAL, "bad_spin_layout.json:47: key 'spin_layout'",
                  "sideways");
    expect_broken("unknown_key.json", BS_EPARSE, "unknown_key.json:47: key 'ocupied_bands'", "unknown key");
    /* Regression, review of 2026-12-02: a repeated key was accepted and the first one won. */
    expect_broken("duplicate_key.json", BS_EPARSE, "duplicate_key.json:6: key 'dimension'", "given twice");
    expect_broken("inversion_shift.json", BS_EINVAL, "inversion_shift.json:51: key 'inversion[1]'", "shift");
    expect_broken("orbital_l.json", BS_EINVAL, "orbital_l.json:42: key 'orbitals[2].l'", "found 4");
    expect_broken("lattice_singular.json", BS_EINVAL, "lattice_singular.json:6: key 'lattice'", "dependent");
    expect_broken("table_truncated.json", BS_EPARSE, "table_truncated.json:23:", "truncated_hop.dat:14:");
    expect_broken("bad_magnetism.json", BS_EINVAL, "bad_magnetism.json:47: key 'magnetism'",
                  "another string");
    expect_broken("no_such_card.json", BS_EIO, "no_such_card.json", "cannot open");
}

/* The NO_VALIDATE mode returns a structurally sound but non-Hermitian model; validation still fails. */
static void test_no_validate(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    assert_int_equal(card_read_opts(BS_TEST_DATA "/broken/nonhermitian.json", CARD_NO_VALIDATE, &m, &err), 0);
    assert_int_equal(m->norb, 2);
    assert_int_equal(tb_model_validate(m, 1e-5, "x", &err), BS_EINVAL);
    tb_model_free(m);
    bs_err_clear(&err);
    assert_int_equal(card_read_opts(BS_TEST_DATA "/broken/missing_key.json", CARD_NO_VALIDATE, &m, &err),
                     BS_EPARSE);
    assert_null(m);
}

static void test_ids_and_write_failures(void **state)
{
    (void)state;
    assert_true(card_id_ok("Bi2Se3_mp-541837"));
    assert_false(card_id_ok(""));
    assert_false(card_id_ok("a/b"));
    assert_false(card_id_ok("a:b"));
    assert_false(card_id_ok(".hidden"));
    assert_false(card_id_ok("with space"));
    tb_model *m = read_ok(BS_TEST_DATA "/good/graphene_gap.json");
    bs_err err;
    bs_err_clear(&err);
    /* Fault injection: the output folder does not exist. */
    assert_int_equal(card_write(m, "/nonexistent-folder-bs", NULL, 0, &err), BS_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent-folder-bs/graphene_gap_hop.dat"));
    bs_err_clear(&err);
    snprintf(m->id, sizeof m->id, "bad/id");
    assert_int_equal(card_write(m, tmpdir, NULL, 0, &err), BS_EINVAL);
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_good_spinless), cmocka_unit_test(test_good_spinful_inversion),
        cmocka_unit_test(test_round_trip),    cmocka_unit_test(test_broken_cards),
        cmocka_unit_test(test_no_validate),   cmocka_unit_test(test_ids_and_write_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
