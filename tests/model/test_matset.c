/* Tests of the material-set HDF5 file: write then read several models bit for bit, the index and
 * metadata, broken and error entries, files that are not sets, tampered entries, concurrent
 * read-only opens by several processes, and write failures. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <complex.h>
#include <hdf5.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/wait.h>
#include <unistd.h>

#include "bandsieve/card.h"
#include "bandsieve/matset.h"
#include "bandsieve/model.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "matset");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

/* A random Hermitian spinful 3D model, 3 orbitals (6 states), R in {-1,0,1}^3, interleaved. */
static tb_model *random_model(const char *id, uint64_t seed)
{
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(6, 27, 1, &m, &err), 0);
    snprintf(m->id, sizeof m->id, "%s", id);
    snprintf(m->formula, sizeof m->formula, "X3");
    m->spin_layout = TB_SPIN_INTERLEAVED;
    m->nocc = 2;
    for (int i = 0; i < 3; i++) {
        for (int d = 0; d < 3; d++)
            m->lattice[i][d] = (i == d ? 4.0 : 0.0) + bs_test_uniform(&seed) * 0.1;
        for (int d = 0; d < 3; d++)
            m->orb_pos[i][d] = bs_test_uniform(&seed);
        m->orb_l[i] = i;
    }
    int n = 6, r = 0;
    for (int a = -1; a <= 1; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -1; c <= 1; c++, r++) {
                m->R[r][0] = a, m->R[r][1] = b, m->R[r][2] = c;
                m->deg[r] = 1 + abs(a + b + c) % 2;
            }
    for (r = 0; r < 27; r++) {
        int mr = 26 - r; /* the grid is symmetric: index 26 - r holds -R */
        if (mr < r) continue;
        for (int i = 0; i < n; i++)
            for (int j = 0; j < n; j++) {
                double complex h = CMPLX(bs_test_uniform(&seed) - 0.5, bs_test_uniform(&seed) - 0.5);
                if (r == mr && i == j) h = creal(h);
                if (r == mr && j < i) continue;
                m->H[((size_t)r * n + i) * n + j] = h;
                m->H[((size_t)mr * n + j) * n + i] = conj(h);
            }
    }
    return m;
}

static tb_model *load_card(const char *path, int flags)
{
    bs_err err;
    bs_err_clear(&err);
    tb_model *m = NULL;
    if (card_read_opts(path, flags, &m, &err) != 0) fail_msg("%s", err.msg);
    return m;
}

/* Writes the standard test set: two fixtures, two random models, a broken model, an error entry. */
static void write_set(const char *path, tb_model **models)
{
    models[0] = load_card(BS_TEST_DATA "/good/graphene_gap.json", 0);
    models[1] = load_card(BS_TEST_DATA "/good/graphene_spinful.json", 0);
    models[2] = random_model("random-1", 11);
    models[3] = random_model("random-2", 12);
    models[1]->magnetism = TB_MAG_NONE; /* the statement survives the set (stored as an attribute) */
    models[3]->magnetism = TB_MAG_MAGNETIC;
    tb_model *broken = load_card(BS_TEST_DATA "/broken/nonhermitian.json", CARD_NO_VALIDATE);
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    assert_int_equal(ms_create(path, &s, &err), 0);
    assert_int_equal(ms_set_meta(s, "test set: two fixtures, two random models (invented)", 1, &err), 0);
    for (int i = 0; i < 4; i++)
        if (ms_add(s, models[i], &err) != 0) fail_msg("%s", err.msg);
    /* A model that fails validation is refused by ms_add and taken by ms_add_broken. */
    assert_int_equal(ms_add(s, broken, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(ms_add_broken(s, broken, &err), 0);
    assert_int_equal(
        ms_add_error(s, "unreadable", BS_EPARSE, "cards/unreadable.json:3: JSON syntax error", &err), 0);
    /* Duplicate and bad ids are refused. */
    assert_int_equal(ms_add(s, models[0], &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "already in the set"));
    bs_err_clear(&err);
    assert_int_equal(ms_add_error(s, "bad/id", BS_EPARSE, "x", &err), BS_EINVAL);
    bs_err_clear(&err);
    /* Nothing appears under the final name before ms_close. */
    assert_int_not_equal(access(path, F_OK), 0);
    assert_int_equal(ms_close(s, &err), 0);
    ms_free(s);
    tb_model_free(broken);
}

static void test_round_trip(void **state)
{
    (void)state;
    char path[320];
    snprintf(path, sizeof path, "%s/set.h5", tmpdir);
    tb_model *models[4];
    write_set(path, models);
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    assert_int_equal(ms_open(path, &s, &err), 0);
    assert_int_equal(ms_count(s), 6);
    assert_string_equal(ms_description(s), "test set: two fixtures, two random models (invented)");
    assert_int_equal(ms_invented(s), 1);
    for (int i = 0; i < 4; i++) {
        const ms_entry *e = ms_entry_at(s, i);
        assert_string_equal(e->id, models[i]->id);
        assert_int_equal(e->norb, models[i]->norb);
        assert_int_equal(e->nR, models[i]->nR);
        assert_int_equal(e->status, MS_STATUS_OK);
        double n = models[i]->norb;
        assert_true(e->cost == n * n * n + models[i]->nR * n * n); /* the documented estimate */
        tb_model *back = NULL;
        if (ms_read(s, i, &back, &err) != 0) fail_msg("%s", err.msg);
        bs_test_expect_same_model(models[i], back);
        tb_model_free(back);
    }
    assert_int_equal(ms_entry_at(s, 4)->status, MS_STATUS_BROKEN);
    assert_int_equal(ms_entry_at(s, 5)->status, MS_STATUS_ERROR);
    assert_int_equal(ms_find(s, "random-2"), 3);
    assert_int_equal(ms_find(s, "nope"), -1);
    assert_null(ms_entry_at(s, 6));
    ms_free(s);
    for (int i = 0; i < 4; i++)
        tb_model_free(models[i]);
}

/* An entry larger than one stored chunk is read a chunk at a time and folded while read: 64
 * states (64 KiB a block, 16 blocks a chunk) and 45 lattice vectors, so the three chunks split
 * pairs R, -R between them. Three pairs are Hermitian only to round-off (H(-R) = H(R)^dagger
 * + 1e-13), which must be kept as stored; every value read back is the one written, bit for bit,
 * and the kept blocks are one per exact pair, R = 0, and both blocks of each inexact pair. */
static void test_large_entry_folded(void **state)
{
    (void)state;
    const int n = 64, nR = 45;
    tb_model *m = NULL;
    bs_err err;
    bs_err_clear(&err);
    assert_int_equal(tb_model_create(n, nR, 0, &m, &err), 0);
    snprintf(m->id, sizeof m->id, "large-64");
    snprintf(m->formula, sizeof m->formula, "X64");
    m->nocc = 32;
    uint64_t seed = 2026;
    for (int i = 0; i < 3; i++)
        m->lattice[i][i] = 5.0;
    for (int i = 0; i < m->nspatial; i++)
        for (int d = 0; d < 3; d++)
            m->orb_pos[i][d] = bs_test_uniform(&seed);
    int r = 0;
    for (int a = -2; a <= 2; a++)
        for (int b = -1; b <= 1; b++)
            for (int c = -1; c <= 1; c++, r++) {
                m->R[r][0] = a, m->R[r][1] = b, m->R[r][2] = c;
                m->deg[r] = 1;
            }
    int inexact = 0;
    for (r = 0; r < nR; r++) {
        int mr = nR - 1 - r; /* the grid is symmetric: index nR - 1 - r holds -R */
        if (mr < r) continue;
        int perturb = r == 1 || r == 9 || r == 20; /* partners in the third, third and second chunk */
        inexact += perturb;
        for (int i = 0; i < n; i++)
            for (int j = 0; j < n; j++) {
                if (r == mr && j < i) continue;
                double complex h = CMPLX(bs_test_uniform(&seed) - 0.5, bs_test_uniform(&seed) - 0.5);
                if (r == mr && i == j) h = creal(h);
                m->H[((size_t)r * n + i) * n + j] = h;
                m->H[((size_t)mr * n + j) * n + i] = conj(h) + (perturb && i == 3 && j == 5 ? 1e-13 : 0.0);
            }
    }
    char path[320];
    snprintf(path, sizeof path, "%s/large.h5", tmpdir);
    ms_set *s = NULL;
    assert_int_equal(ms_create(path, &s, &err), 0);
    assert_int_equal(ms_set_meta(s, "one large random model (invented)", 1, &err), 0);
    if (ms_add(s, m, &err) != 0) fail_msg("%s", err.msg);
    assert_int_equal(ms_close(s, &err), 0);
    ms_free(s);
    s = NULL;
    assert_int_equal(ms_open(path, &s, &err), 0);
    tb_model *back = NULL;
    if (ms_read(s, 0, &back, &err) != 0) fail_msg("%s", err.msg);
    bs_test_expect_same_model(m, back);
    assert_non_null(back->hsrc);
    int kept = 0;
    for (r = 0; r < nR; r++)
        kept += back->hsrc[r] >= 0;
    assert_int_equal(kept, (nR - 1) / 2 + 1 + inexact);
    tb_model_free(back);
    ms_free(s);
    tb_model_free(m);
}

static void test_broken_entries(void **state)
{
    (void)state;
    char path[320];
    snprintf(path, sizeof path, "%s/broken.h5", tmpdir);
    tb_model *models[4];
    write_set(path, models);
    for (int i = 0; i < 4; i++)
        tb_model_free(models[i]);
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    assert_int_equal(ms_open(path, &s, &err), 0);
    tb_model *m = NULL;
    char want[400];
    snprintf(want, sizeof want, "%s:/materials/nonhermitian: not Hermitian", path);
    assert_int_equal(ms_read_id(s, "nonhermitian", &m, &err), BS_EINVAL);
    if (!strstr(err.msg, want)) fail_msg("message: %s", err.msg);
    assert_null(m);
    bs_err_clear(&err);
    assert_int_equal(ms_read_id(s, "unreadable", &m, &err), BS_EPARSE);
    snprintf(want, sizeof want, "%s:/materials/unreadable: stored as broken: cards/unreadable.json:3:", path);
    if (!strstr(err.msg, want)) fail_msg("message: %s", err.msg);
    bs_err_clear(&err);
    assert_int_equal(ms_read_id(s, "nope", &m, &err), BS_EINVAL);
    bs_err_clear(&err);
    assert_int_equal(ms_read(s, 99, &m, &err), BS_EINVAL);
    ms_free(s);
}

/* Deletes /materials/random-1/H behind the library's back: the reader names the dataset. */
static void test_tampered(void **state)
{
    (void)state;
    char path[320];
    snprintf(path, sizeof path, "%s/tamper.h5", tmpdir);
    tb_model *models[4];
    write_set(path, models);
    for (int i = 0; i < 4; i++)
        tb_model_free(models[i]);
    hid_t f = H5Fopen(path, H5F_ACC_RDWR, H5P_DEFAULT);
    assert_true(f >= 0);
    assert_true(H5Ldelete(f, "/materials/random-1/H", H5P_DEFAULT) >= 0);
    hid_t g = H5Gopen2(f, "/materials/random-2", H5P_DEFAULT);
    assert_true(H5Adelete(g, "nR") >= 0);
    int huge = 2000000000;
    hid_t sp = H5Screate(H5S_SCALAR);
    hid_t a = H5Acreate2(g, "nR", H5T_NATIVE_INT, sp, H5P_DEFAULT, H5P_DEFAULT);
    assert_true(H5Awrite(a, H5T_NATIVE_INT, &huge) >= 0);
    H5Aclose(a);
    H5Sclose(sp);
    H5Gclose(g);
    H5Fclose(f);
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    assert_int_equal(ms_open(path, &s, &err), 0);
    tb_model *m = NULL;
    assert_int_equal(ms_read_id(s, "random-1", &m, &err), BS_EPARSE);
    if (!strstr(err.msg, ":/materials/random-1/H: dataset missing")) fail_msg("message: %s", err.msg);
    bs_err_clear(&err);
    /* An absurd size is refused before anything is allocated. */
    assert_int_equal(ms_read_id(s, "random-2", &m, &err), BS_EINVAL);
    if (!strstr(err.msg, ":/materials/random-2: sizes")) fail_msg("message: %s", err.msg);
    ms_free(s);
}

static void test_not_a_set(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    assert_int_equal(ms_open(BS_TEST_DATA "/good/graphene_gap.json", &s, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "graphene_gap.json: not an HDF5 file"));
    assert_null(s);
    char path[320];
    snprintf(path, sizeof path, "%s/other.h5", tmpdir);
    hid_t f = H5Fcreate(path, H5F_ACC_TRUNC, H5P_DEFAULT, H5P_DEFAULT);
    assert_true(f >= 0);
    H5Fclose(f);
    bs_err_clear(&err);
    assert_int_equal(ms_open(path, &s, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "not a bandsieve material set"));
    bs_err_clear(&err);
    assert_int_equal(ms_open("/nonexistent-folder-bs/set.h5", &s, &err), BS_EIO);
    assert_non_null(strstr(err.msg, "/nonexistent-folder-bs/set.h5"));
}

/* Several processes open and read the same set at once (as screen's ranks do). */
static void test_concurrent_readers(void **state)
{
    (void)state;
    char path[320];
    snprintf(path, sizeof path, "%s/shared.h5", tmpdir);
    tb_model *models[4];
    write_set(path, models);
    pid_t kids[3];
    for (int k = 0; k < 3; k++) {
        kids[k] = fork();
        assert_true(kids[k] >= 0);
        if (kids[k] == 0) {
            bs_err err;
            bs_err_clear(&err);
            ms_set *s = NULL;
            int bad = ms_open(path, &s, &err) != 0;
            for (int rep = 0; rep < 20 && !bad; rep++)
                for (int i = 0; i < 4 && !bad; i++) {
                    tb_model *m = NULL;
                    bad = ms_read(s, i, &m, &err) != 0 || !bs_test_same_hops(m, models[i]);
                    tb_model_free(m);
                }
            ms_free(s);
            _exit(bad);
        }
    }
    /* And two handles in this process at the same time. */
    bs_err err;
    bs_err_clear(&err);
    ms_set *a = NULL, *b = NULL;
    assert_int_equal(ms_open(path, &a, &err), 0);
    assert_int_equal(ms_open(path, &b, &err), 0);
    tb_model *m = NULL;
    assert_int_equal(ms_read(b, 2, &m, &err), 0);
    tb_model_free(m);
    ms_free(a);
    ms_free(b);
    for (int k = 0; k < 3; k++) {
        int status = 0;
        assert_int_equal(waitpid(kids[k], &status, 0), kids[k]);
        assert_true(WIFEXITED(status) && WEXITSTATUS(status) == 0);
    }
    for (int i = 0; i < 4; i++)
        tb_model_free(models[i]);
}

static void test_writer_failures(void **state)
{
    (void)state;
    bs_err err;
    bs_err_clear(&err);
    ms_set *s = NULL;
    /* Fault injection: the output folder does not exist. */
    assert_int_equal(ms_create("/nonexistent-folder-bs/set.h5", &s, &err), BS_EHDF5);
    assert_non_null(strstr(err.msg, "/nonexistent-folder-bs/set.h5.partial"));
    assert_null(s);
    /* A writer freed without ms_close leaves nothing behind. */
    char path[320], partial[340];
    snprintf(path, sizeof path, "%s/abandoned.h5", tmpdir);
    snprintf(partial, sizeof partial, "%s.partial", path);
    bs_err_clear(&err);
    assert_int_equal(ms_create(path, &s, &err), 0);
    assert_int_equal(access(partial, F_OK), 0);
    ms_free(s);
    assert_int_not_equal(access(partial, F_OK), 0);
    assert_int_not_equal(access(path, F_OK), 0);
    /* An empty set is a valid set. */
    assert_int_equal(ms_create(path, &s, &err), 0);
    assert_int_equal(ms_close(s, &err), 0);
    ms_free(s);
    assert_int_equal(ms_open(path, &s, &err), 0);
    assert_int_equal(ms_count(s), 0);
    assert_string_equal(ms_description(s), "");
    tb_model *m = NULL;
    assert_int_equal(ms_read(s, 0, &m, &err), BS_EINVAL);
    ms_free(s);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),      cmocka_unit_test(test_large_entry_folded),
        cmocka_unit_test(test_broken_entries),  cmocka_unit_test(test_tampered),
        cmocka_unit_test(test_not_a_set),       cmocka_unit_test(test_concurrent_readers),
        cmocka_unit_test(test_writer_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
