/* Content identity in the model layer: what the hash covers and ignores, the card keys that came
 * with it (meta, electrons, spin_layout on spinless cards, suggestions for misspelt keys), and the
 * set's stored hashes, cards and copies, including sets written before hashes were stored. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "testutil.h"

#include <cjson/cJSON.h>
#include <complex.h>
#include <hdf5.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "bandsieve/card.h"
#include "bandsieve/content.h"
#include "bandsieve/matset.h"
#include "bandsieve/model.h"

static char tmpdir[256];

static int setup(void **state)
{
    (void)state;
    return bs_test_tmpdir(tmpdir, sizeof tmpdir, "identity");
}

static int teardown(void **state)
{
    (void)state;
    return bs_test_rmtree(tmpdir);
}

/* The good spinless fixture as a cJSON object with its table named by absolute path. */
static cJSON *fixture(const char *name)
{
    char path[512];
    snprintf(path, sizeof path, "%s/good/%s.json", BS_TEST_DATA, name);
    FILE *fp = fopen(path, "rb");
    assert_non_null(fp);
    static char text[1 << 16];
    size_t n = fread(text, 1, sizeof text - 1, fp);
    fclose(fp);
    text[n] = '\0';
    cJSON *j = cJSON_Parse(text);
    assert_non_null(j);
    char table[600];
    snprintf(table, sizeof table, "%s/good/%s", BS_TEST_DATA,
             cJSON_GetObjectItem(j, "hoppings")->valuestring);
    cJSON_ReplaceItemInObject(j, "hoppings", cJSON_CreateString(table));
    return j;
}

/* Writes j (consumed) as <tmpdir>/<name>.json and reads it; returns the code, model and notes. */
static int read_card_json(cJSON *j, const char *name, tb_model **m, char *notes, size_t cap, bs_err *err)
{
    char path[512];
    snprintf(path, sizeof path, "%s/%s.json", tmpdir, name);
    char *text = cJSON_Print(j);
    cJSON_Delete(j);
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    fputs(text, fp);
    fclose(fp);
    free(text);
    bs_err_clear(err);
    return card_read_notes(path, 0, m, notes, cap, err);
}

static void test_hash_covers_the_answer_only(void **state)
{
    (void)state;
    tb_model *m = bs_test_build("haldane");
    char h0[65], h1[65];
    tb_content_hash(m, h0);
    assert_int_equal(strlen(h0), 64);
    /* Provenance does not change the hash. */
    snprintf(m->formula, sizeof m->formula, "other");
    snprintf(m->source, sizeof m->source, "elsewhere");
    snprintf(m->id, sizeof m->id, "renamed");
    tb_content_hash(m, h1);
    assert_string_equal(h0, h1);
    /* -0.0 and +0.0 give the same H(k): the same hash. */
    size_t nh = (size_t)m->nR * m->norb * m->norb, k = 0;
    while (k < nh && creal(m->H[k]) != 0)
        k++;
    assert_true(k < nh);
    m->H[k] = CMPLX(-0.0, cimag(m->H[k]));
    tb_content_hash(m, h1);
    assert_string_equal(h0, h1);
    /* Each field that changes the answer changes the hash. */
    double keep = creal(m->H[1]);
    m->H[1] += 1e-9;
    tb_content_hash(m, h1);
    assert_string_not_equal(h0, h1);
    m->H[1] = keep + I * cimag(m->H[1]);
    tb_content_hash(m, h1);
    assert_string_equal(h0, h1);
    m->nocc = m->nocc == 1 ? 2 : 1;
    tb_content_hash(m, h1);
    assert_string_not_equal(h0, h1);
    m->nocc = m->nocc == 1 ? 2 : 1;
    m->deg[0] += 1;
    tb_content_hash(m, h1);
    assert_string_not_equal(h0, h1);
    m->deg[0] -= 1;
    m->lattice[2][2] *= 1.5;
    tb_content_hash(m, h1);
    assert_string_not_equal(h0, h1);
    m->lattice[2][2] /= 1.5;
    /* Orbital shapes (symmetry representations) count when given, and which shape matters. */
    char h2[65];
    m->orb_shape = calloc((size_t)m->nspatial, sizeof *m->orb_shape);
    assert_non_null(m->orb_shape);
    tb_content_hash(m, h1);
    assert_string_not_equal(h0, h1);
    m->orb_shape[0] = -1;
    tb_content_hash(m, h2);
    assert_string_not_equal(h1, h2);
    tb_model_free(m);
}

static void test_card_meta_and_card_text(void **state)
{
    (void)state;
    cJSON *j = fixture("graphene_gap");
    cJSON *meta = cJSON_AddObjectToObject(j, "meta");
    cJSON_AddStringToObject(meta, "doi_note", "any text");
    cJSON_AddItemToObject(meta, "nested", cJSON_CreateIntArray((const int[]){1, 2, 3}, 3));
    cJSON_AddStringToObject(j, "comment", "kept as given");
    tb_model *m = NULL;
    bs_err err;
    char notes[512];
    assert_int_equal(read_card_json(j, "meta", &m, notes, sizeof notes, &err), 0);
    assert_string_equal(notes, "");
    assert_non_null(m->card_json);
    cJSON *back = cJSON_Parse(m->card_json);
    assert_string_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(back, "meta"), "doi_note")->valuestring,
                        "any text");
    assert_string_equal(cJSON_GetObjectItem(back, "comment")->valuestring, "kept as given");
    cJSON_Delete(back);
    tb_model_free(m);
    /* meta must be an object. */
    j = fixture("graphene_gap");
    cJSON_AddStringToObject(j, "meta", "not an object");
    assert_int_equal(read_card_json(j, "meta_bad", &m, notes, sizeof notes, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "key 'meta': expected an object"));
}

static void test_card_misspelt_keys(void **state)
{
    (void)state;
    tb_model *m = NULL;
    bs_err err;
    char notes[512];
    const char *typos[][2] = {{"ocupied_bands", "occupied_bands"},
                              {"dimensoin", "dimension"},
                              {"spin_layuot", "spin_layout"},
                              {"Formula", "formula"}};
    for (int i = 0; i < 4; i++) {
        cJSON *j = fixture("graphene_gap");
        cJSON_AddNumberToObject(j, typos[i][0], 1);
        assert_int_equal(read_card_json(j, "typo", &m, notes, sizeof notes, &err), BS_EPARSE);
        char want[100];
        snprintf(want, sizeof want, "did you mean '%s'?", typos[i][1]);
        if (!strstr(err.msg, want)) fail_msg("%s: %s (want %s)", typos[i][0], err.msg, want);
    }
    /* A key far from every allowed one gets no guess, but the pointer to meta. */
    cJSON *j = fixture("graphene_gap");
    cJSON_AddNumberToObject(j, "colour", 1);
    assert_int_equal(read_card_json(j, "far", &m, notes, sizeof notes, &err), BS_EPARSE);
    assert_null(strstr(err.msg, "did you mean"));
    assert_non_null(strstr(err.msg, "'meta'"));
}

static void test_card_electrons_and_spin_layout_note(void **state)
{
    (void)state;
    tb_model *m = NULL;
    bs_err err;
    char notes[512];
    /* Spinless: two electrons per band, so 2 electrons fill one of the two bands. */
    cJSON *j = fixture("graphene_gap");
    cJSON_DeleteItemFromObject(j, "occupied_bands");
    cJSON_AddNumberToObject(j, "electrons", 2);
    assert_int_equal(read_card_json(j, "el2", &m, notes, sizeof notes, &err), 0);
    assert_int_equal(m->nocc, 1);
    tb_model_free(m);
    j = fixture("graphene_gap");
    cJSON_DeleteItemFromObject(j, "occupied_bands");
    cJSON_AddNumberToObject(j, "electrons", 1);
    assert_int_equal(read_card_json(j, "el1", &m, notes, sizeof notes, &err), BS_EINVAL);
    assert_non_null(strstr(err.msg, "half filled"));
    j = fixture("graphene_gap");
    cJSON_AddNumberToObject(j, "electrons", 2);
    assert_int_equal(read_card_json(j, "both", &m, notes, sizeof notes, &err), BS_EPARSE);
    assert_non_null(strstr(err.msg, "not both"));
    /* Spinful: one electron per band. */
    j = fixture("graphene_spinful");
    int nocc = cJSON_GetObjectItem(j, "occupied_bands")->valueint;
    cJSON_DeleteItemFromObject(j, "occupied_bands");
    cJSON_AddNumberToObject(j, "electrons", nocc);
    assert_int_equal(read_card_json(j, "elsf", &m, notes, sizeof notes, &err), 0);
    assert_int_equal(m->nocc, nocc);
    tb_model_free(m);
    /* A layout on a spinless card: accepted, ignored, said. */
    j = fixture("graphene_gap");
    cJSON_AddStringToObject(j, "spin_layout", "blocks");
    assert_int_equal(read_card_json(j, "layout", &m, notes, sizeof notes, &err), 0);
    assert_int_equal(m->spin_layout, TB_SPIN_NONE);
    assert_non_null(strstr(notes, "layout.json:"));
    assert_non_null(strstr(notes, "key 'spin_layout': ignored"));
    tb_model_free(m);
}

static void add_ok(ms_set *s, tb_model *m)
{
    bs_err err;
    bs_err_clear(&err);
    if (ms_add(s, m, &err) != 0) fail_msg("ms_add: %s", err.msg);
}

/* Rewrites the set's index without the "content" member, as sets were written before. */
static void strip_content(const char *path)
{
    hid_t f = H5Fopen(path, H5F_ACC_RDWR, H5P_DEFAULT);
    assert_true(f >= 0);
    hid_t d = H5Dopen2(f, "index", H5P_DEFAULT);
    hid_t ft = H5Dget_type(d), sp = H5Dget_space(d);
    hssize_t n = H5Sget_simple_extent_npoints(sp);
    ms_entry *e = calloc((size_t)n, sizeof *e);
    hid_t t = H5Tcreate(H5T_COMPOUND, sizeof(ms_entry));
    hid_t str = H5Tcopy(H5T_C_S1);
    H5Tset_size(str, sizeof e->id);
    H5Tinsert(t, "id", HOFFSET(ms_entry, id), str);
    H5Tinsert(t, "dimension", HOFFSET(ms_entry, dim), H5T_NATIVE_INT);
    H5Tinsert(t, "norb", HOFFSET(ms_entry, norb), H5T_NATIVE_INT);
    H5Tinsert(t, "nR", HOFFSET(ms_entry, nR), H5T_NATIVE_INT);
    H5Tinsert(t, "nocc", HOFFSET(ms_entry, nocc), H5T_NATIVE_INT);
    H5Tinsert(t, "spinful", HOFFSET(ms_entry, spinful), H5T_NATIVE_INT);
    H5Tinsert(t, "status", HOFFSET(ms_entry, status), H5T_NATIVE_INT);
    H5Tinsert(t, "cost", HOFFSET(ms_entry, cost), H5T_NATIVE_DOUBLE);
    assert_true(H5Dread(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, e) >= 0);
    H5Dclose(d);
    assert_true(H5Ldelete(f, "index", H5P_DEFAULT) >= 0);
    d = H5Dcreate2(f, "index", t, sp, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    assert_true(H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, e) >= 0);
    H5Dclose(d);
    H5Tclose(str);
    H5Tclose(t);
    H5Tclose(ft);
    H5Sclose(sp);
    H5Fclose(f);
    free(e);
}

static void test_set_hashes_cards_and_copies(void **state)
{
    (void)state;
    char a[400], b[400], c[400];
    snprintf(a, sizeof a, "%s/a.h5", tmpdir);
    snprintf(b, sizeof b, "%s/b.h5", tmpdir);
    snprintf(c, sizeof c, "%s/c.h5", tmpdir);
    tb_model *m1 = bs_test_build("haldane"), *m2 = bs_test_build("kane_mele");
    snprintf(m1->id, sizeof m1->id, "one");
    snprintf(m2->id, sizeof m2->id, "two");
    m1->card_json = strdup("{\"id\":\"one\",\"comment\":\"c1\"}");
    char h1[65], h2[65];
    tb_content_hash(m1, h1);
    tb_content_hash(m2, h2);
    bs_err err;
    bs_err_clear(&err);
    ms_set *w = NULL;
    assert_int_equal(ms_create(a, &w, &err), 0);
    add_ok(w, m1);
    add_ok(w, m2);
    assert_int_equal(ms_close(w, &err), 0);
    ms_free(w);
    /* The same models in the other order, in another file. */
    assert_int_equal(ms_create(b, &w, &err), 0);
    add_ok(w, m2);
    add_ok(w, m1);
    assert_int_equal(ms_close(w, &err), 0);
    ms_free(w);

    ms_set *ra = NULL, *rb = NULL;
    assert_int_equal(ms_open(a, &ra, &err), 0);
    assert_int_equal(ms_open(b, &rb, &err), 0);
    char got[65], sa[65], sb[65];
    assert_int_equal(ms_content(ra, 0, got, &err), 0);
    assert_string_equal(got, h1);
    assert_string_equal(ms_entry_at(ra, 1)->content, h2);
    /* The set's hash depends on ids and contents, not on the file or the order. */
    assert_int_equal(ms_set_content(ra, sa, &err), 0);
    assert_int_equal(ms_set_content(rb, sb, &err), 0);
    assert_string_equal(sa, sb);
    char *card = NULL;
    assert_int_equal(ms_read_card(ra, 0, &card, &err), 0);
    assert_string_equal(card, "{\"id\":\"one\",\"comment\":\"c1\"}");
    free(card);
    assert_int_equal(ms_read_card(ra, 1, &card, &err), 0);
    assert_null(card);
    /* Copies keep content and card. */
    assert_int_equal(ms_create(c, &w, &err), 0);
    assert_int_equal(ms_copy_entry(w, ra, 0, &err), 0);
    assert_int_not_equal(ms_copy_entry(w, ra, 0, &err), 0); /* the id is there already */
    assert_int_equal(ms_close(w, &err), 0);
    ms_free(w);
    ms_free(rb);
    ms_set *rc = NULL;
    assert_int_equal(ms_open(c, &rc, &err), 0);
    assert_string_equal(ms_entry_at(rc, 0)->content, h1);
    assert_int_equal(ms_read_card(rc, 0, &card, &err), 0);
    assert_non_null(card);
    free(card);
    ms_free(rc);
    ms_free(ra);

    /* A set from before hashes were stored: read, and the hash computed from the entry. */
    strip_content(a);
    assert_int_equal(ms_open(a, &ra, &err), 0);
    assert_string_equal(ms_entry_at(ra, 0)->content, "");
    assert_int_equal(ms_content(ra, 0, got, &err), 0);
    assert_string_equal(got, h1);
    assert_int_equal(ms_set_content(ra, sa, &err), 0);
    assert_string_equal(sa, sb);
    ms_free(ra);
    tb_model_free(m1);
    tb_model_free(m2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_hash_covers_the_answer_only),
        cmocka_unit_test(test_card_meta_and_card_text),
        cmocka_unit_test(test_card_misspelt_keys),
        cmocka_unit_test(test_card_electrons_and_spin_layout_note),
        cmocka_unit_test(test_set_hashes_cards_and_copies),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
