/* Tests of the hopping-table reader and writer: the good fixture's values, exact round trips,
 * agreement of the fast number parser with the C library's strtod (the external reference), and
 * one broken file per failure with its error code and "file:line" in the message. */
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
#include <unistd.h>

#include "bandsieve/config.h"
#include "bandsieve/hopfile.h"
#include "bandsieve/model.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "hopfile");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

/* A random model (not Hermitian: the table layer does not care) with norb states and nR vectors. */
static tb_model *random_model(int norb, int nR, uint64_t seed)
{
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(norb, nR, 0, &m, &err), 0);
    for (int r = 0; r < nR; r++) {
        m->R[r][0] = r - nR / 2;
        m->R[r][1] = (r * 7) % 5 - 2;
        m->R[r][2] = -(r % 3);
        m->deg[r] = 1 + r % 4;
    }
    for (size_t i = 0; i < (size_t)nR * norb * norb; i++) {
        double re = (bs_test_uniform(&seed) - 0.5) * pow(10.0, (int)(bs_test_uniform(&seed) * 12) - 6);
        m->H[i] = CMPLX(re, bs_test_uniform(&seed) - 0.5);
    }
    return m;
}

static void expect_same_model(const tb_model *a, const tb_model *b)
{
    assert_int_equal(a->norb, b->norb);
    assert_int_equal(a->nR, b->nR);
    assert_memory_equal(a->R, b->R, (size_t)a->nR * sizeof *a->R);
    assert_memory_equal(a->deg, b->deg, (size_t)a->nR * sizeof *a->deg);
    assert_true(bs_test_same_hops(a, b));
}

static void test_good_fixture(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    assert_int_equal(hop_read(BS_TEST_DATA "/good/graphene_gap_hop.dat", 0, &m, &err), 0);
    assert_int_equal(m->norb, 2);
    assert_int_equal(m->nR, 5);
    /* Values written into the fixture by hand (tests/data/good/README.md): exact decimals. */
    int R1[3] = {-1, 0, 0};
    int r0 = tb_model_find_R(m, (int[3]){0, 0, 0}), r1 = tb_model_find_R(m, R1);
    assert_true(r0 >= 0 && r1 >= 0);
    assert_true(creal(tb_hop(m, r0, 0, 0)) == 0.5);  /* A on-site */
    assert_true(creal(tb_hop(m, r0, 1, 1)) == -0.5); /* B on-site */
    assert_true(creal(tb_hop(m, r0, 0, 1)) == -2.7); /* row A, column B */
    assert_true(creal(tb_hop(m, r1, 0, 1)) == -2.7); /* <A,0|H|B,(-1,0,0)> */
    assert_true(creal(tb_hop(m, r1, 1, 0)) == 0.0);  /* <B,0|H|A,(-1,0,0)>: no bond */
    for (int r = 0; r < m->nR; r++)
        assert_int_equal(m->deg[r], 1);
    tb_model_free(m);

    bs_err_clear(&err);
    assert_int_equal(hop_read(BS_TEST_DATA "/good/graphene_spinful_hop.dat", 1, &m, &err), 0);
    assert_int_equal(m->norb, 4);
    assert_int_equal(m->nspatial, 2);
    assert_int_equal(m->deg[1], 2);
    /* Row 3 (A down), column 1 (A up) at R = 0 is -0.05i in the fixture. */
    assert_true(cimag(tb_hop(m, 0, 2, 0)) == -0.05);
    tb_model_free(m);
}

/* The reader stores H_R and H_-R once when H_-R = H_R^dagger bit for bit (tb_model_fold), and every
 * value read back, folded or not, is the file's bit for bit (exact by construction: folding may
 * never change a value; common practice for a lossless storage change). Pairs: (1,0,0) generic;
 * (0,1,0) with zero imaginary parts written as +0 on both sides (folds); (1,1,0) with one element
 * of H_-R carrying -0 where the adjoint gives +0 (kept apart, so -0 survives). */
static void test_folded_storage(void **state)
{
    (void)state;
    const int n = 3, nR = 7;
    static const int Rs[7][3] = {{0, 0, 0},  {1, 0, 0}, {-1, 0, 0}, {0, 1, 0},
                                 {0, -1, 0}, {1, 1, 0}, {-1, -1, 0}};
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(n, nR, 0, &m, &err), 0);
    uint64_t seed = 7;
    for (int r = 0; r < nR; r++)
        memcpy(m->R[r], Rs[r], sizeof Rs[r]);
    size_t nn = (size_t)n * n;
    for (int r = 0; r < nR; r += r == 0 ? 1 : 2)
        for (int a = 0; a < n; a++)
            for (int b = 0; b < n; b++) {
                double re = bs_test_uniform(&seed) - 0.5, im = r == 3 ? 0.0 : bs_test_uniform(&seed) - 0.5;
                if (r == 0 && b < a) continue;
                if (r == 0 && a == b) im = 0.0;
                m->H[r * nn + (size_t)a * n + b] = CMPLX(re, im);
                int q = r == 0 ? 0 : r + 1;
                if (r == 0 && a == b) continue;
                m->H[q * nn + (size_t)b * n + a] = CMPLX(re, 0.0 - im);
            }
    m->H[6 * nn + 1] = CMPLX(creal(m->H[6 * nn + 1]), -0.0);
    m->H[5 * nn + 3] = CMPLX(creal(m->H[5 * nn + 3]), 0.0);
    char path[512];
    snprintf(path, sizeof path, "%s/folded_hop.dat", tmpdir);
    assert_int_equal(hop_write(path, m, "folded storage test (invented values)", &err), 0);
    tb_model *back = NULL, *copy = NULL;
    assert_int_equal(hop_read(path, 0, &back, &err), 0);
    assert_true(bs_test_same_hops(back, m));
    assert_non_null(back->hsrc);
    int stored = 0;
    for (int r = 0; r < nR; r++)
        stored += back->hsrc[r] >= 0;
    assert_int_equal(stored, 5); /* R = 0, the three pairs once, and the -0 block of (-1,-1,0) */
    assert_true(back->hsrc[2] < 0 && back->hsrc[4] < 0 && back->hsrc[6] >= 0);
    double complex buf[9];
    assert_null(tb_hop_block(back, 2, NULL));
    assert_ptr_equal(tb_hop_block(back, 2, buf), buf);
    assert_memory_equal(buf, m->H + 2 * nn, sizeof buf);
    double complex z = tb_hop(back, 6, 0, 1);
    assert_true(signbit(cimag(z)));
    /* Copies keep the folding; unfolding gives one block per vector and the same values. */
    assert_int_equal(tb_model_copy(back, &copy, &err), 0);
    assert_true(bs_test_same_hops(copy, m));
    assert_int_equal(tb_model_unfold(copy, &err), 0);
    assert_null(copy->hsrc);
    assert_memory_equal(copy->H, m->H, (size_t)nR * nn * sizeof *m->H);
    tb_model_free(copy);
    tb_model_free(back);
    tb_model_free(m);
}

static void test_round_trip(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    char path[320];
    snprintf(path, sizeof path, "%s/rt_hop.dat", tmpdir);
    tb_model *m = random_model(5, 33, 42), *back = NULL;
    assert_int_equal(hop_write(path, m, "round trip\nwith a newline", &err), 0);
    assert_int_equal(hop_read(path, 0, &back, &err), 0);
    /* %.17g and a correctly rounded reader: every double comes back bit for bit (common practice). */
    expect_same_model(m, back);
    tb_model_free(back);
    tb_model_free(m);

    bs_err_clear(&err);
    tb_model *g = NULL;
    assert_int_equal(hop_read(BS_TEST_DATA "/good/graphene_spinful_hop.dat", 1, &g, &err), 0);
    assert_int_equal(hop_write(path, g, NULL, &err), 0);
    assert_int_equal(hop_read(path, 1, &back, &err), 0);
    expect_same_model(g, back);
    tb_model_free(back);
    tb_model_free(g);
}

/* Writes a table with values printed in format fmt and checks every parsed value equals strtod's
 * reading of the same text, bit for bit: the library's correctly rounded conversion is the reference. */
static void check_against_strtod(const char *fmt, uint64_t seed)
{
    char path[320];
    snprintf(path, sizeof path, "%s/fmt_hop.dat", tmpdir);
    int n = 4, nR = 25;
    tb_model *m = random_model(n, nR, seed);
    FILE *fp = fopen(path, "w");
    assert_non_null(fp);
    fprintf(fp, "format %s\n%d\n%d\n", fmt, n, nR);
    for (int r = 0; r < nR; r++)
        fprintf(fp, "%5d%s", m->deg[r], (r % 15 == 14 || r == nR - 1) ? "\n" : "");
    double *want = malloc((size_t)nR * n * n * 2 * sizeof *want);
    char buf[64];
    for (int r = 0; r < nR; r++)
        for (int c = 0; c < n; c++)
            for (int a = 0; a < n; a++) {
                double complex h = m->H[((size_t)r * n + a) * n + c];
                size_t k = (((size_t)r * n + a) * n + c) * 2;
                fprintf(fp, "%d %d %d %d %d", m->R[r][0], m->R[r][1], m->R[r][2], a + 1, c + 1);
                snprintf(buf, sizeof buf, fmt, creal(h));
                fprintf(fp, " %s", buf);
                want[k] = strtod(buf, NULL);
                snprintf(buf, sizeof buf, fmt, cimag(h));
                fprintf(fp, "\t%s\r\n", buf); /* tabs and CRLF endings are accepted */
                want[k + 1] = strtod(buf, NULL);
            }
    fclose(fp);
    bs_err err;
    bs_err_clear(&err);
    tb_model *back = NULL;
    assert_int_equal(hop_read(path, 0, &back, &err), 0);
    for (int r = 0; r < nR; r++)
        for (int a = 0; a < n; a++)
            for (int c = 0; c < n; c++) {
                double complex h = tb_hop(back, r, a, c);
                assert_memory_equal(&h, want + (((size_t)r * n + a) * n + c) * 2, sizeof h);
            }
    free(want);
    tb_model_free(back);
    tb_model_free(m);
}

static void test_parser_matches_strtod(void **state)
{
    (void)state;
    check_against_strtod("%12.6f", 1); /* the usual Wannier output: fast path */
    check_against_strtod("%.15g", 2);  /* 15 significant digits: fast path limit */
    check_against_strtod("%.16e", 3);  /* 17 digits with exponent: slow path */
    check_against_strtod("%+.3E", 4);  /* explicit sign, upper-case exponent */
    check_against_strtod("%.0f", 5);   /* integers without a decimal point */
    check_against_strtod("%.10f", 6);
}

/* Reads a broken table and checks the code and that the message holds "name:line:". */
static void expect_broken(const char *name, int spinful, int code, const char *where, const char *what)
{
    char path[512];
    snprintf(path, sizeof path, "%s/broken/%s", BS_TEST_DATA, name);
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    int rc = hop_read(path, spinful, &m, &err);
    if (rc != code || !strstr(err.msg, where) || (what && !strstr(err.msg, what)))
        fail_msg("%s: code %d (want %d), message: %s (want '%s', '%s')", name, rc, code, err.msg, where,
                 what ? what : "");
    assert_null(m);
}

static void test_broken_tables(void **state)
{
    (void)state;
    expect_broken("truncated_hop.dat", 0, BS_EPARSE, "truncated_hop.dat:14:", "9 of 20");
    expect_broken("nonnumeric_hop.dat", 0, BS_EPARSE, "nonnumeric_hop.dat:10:", "-2.7x0000");
    expect_broken("weights_count_hop.dat", 0, BS_EPARSE, "weights_count_hop.dat:4:", "degeneracy");
    expect_broken("extra_lines_hop.dat", 0, BS_EPARSE, "extra_lines_hop.dat:21:", "after the last");
    expect_broken("index_range_hop.dat", 0, BS_EINVAL, "index_range_hop.dat:10:", "outside 1..2");
    expect_broken("index_order_hop.dat", 0, BS_EPARSE, "index_order_hop.dat:9:", "out of order");
    expect_broken("nan_hop.dat", 0, BS_EPARSE, "nan_hop.dat:18:", "not finite");
    expect_broken("absurd_header_hop.dat", 0, BS_EINVAL, "absurd_header_hop.dat:2:", "2000000000");
    expect_broken("field_count_hop.dat", 0, BS_EPARSE, "field_count_hop.dat:7:", "found 6");
    expect_broken("deg_zero_hop.dat", 0, BS_EINVAL, "deg_zero_hop.dat:4:", "degeneracy weight 0");
    expect_broken("duplicate_R_hop.dat", 0, BS_EINVAL, "duplicate_R_hop.dat:9:", "appears twice");
    expect_broken("odd3_hop.dat", 1, BS_EINVAL, "odd3_hop.dat:2:", "even");
    expect_broken("no_such_file_hop.dat", 0, BS_EIO, "no_such_file_hop.dat", "cannot open");
}

/* Header sizes past config.h limits are refused before allocation, including their product. */
static void test_absurd_product(void **state)
{
    (void)state;
    char path[320];
    snprintf(path, sizeof path, "%s/product_hop.dat", tmpdir);
    FILE *fp = fopen(path, "w");
    assert_non_null(fp);
    fprintf(fp, "each size below its limit, the product above\n%d\n%d\n", BS_MAX_NORB, BS_MAX_NR);
    fclose(fp);
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    assert_int_equal(hop_read(path, 0, &m, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "product_hop.dat:3:"));

    fp = fopen(path, "w");
    fprintf(fp, "comment\n99999999999999999999\n1\n");
    fclose(fp);
    bs_err_clear(&err);
    assert_int_equal(hop_read(path, 0, &m, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "product_hop.dat:2:"));

    fp = fopen(path, "w");
    fclose(fp);
    bs_err_clear(&err);
    assert_int_equal(hop_read(path, 0, &m, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "product_hop.dat:1:"));
}

/* Fault injection: an output folder that does not exist, and a device that is always full. */
static void test_write_failures(void **state)
{
    (void)state;
    tb_model *m = random_model(3, 4, 7);
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(hop_write("/nonexistent-folder-bs/x_hop.dat", m, NULL, &err), BS_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent-folder-bs/x_hop.dat"));
    if (access("/dev/full", W_OK) == 0) {
        bs_err_clear(&err);
        assert_int_equal(hop_write("/dev/full", m, NULL, &err), BS_EIO);
        assert_non_null(strstr(err.msg, "/dev/full"));
    }
    tb_model_free(m);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_good_fixture),   cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_folded_storage), cmocka_unit_test(test_parser_matches_strtod),
        cmocka_unit_test(test_broken_tables),  cmocka_unit_test(test_absurd_product),
        cmocka_unit_test(test_write_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
