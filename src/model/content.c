/* Content hash of a model (content.h): a fixed, platform-independent byte stream through SHA-256. */
#include "bandsieve/content.h"

#include <complex.h>
#include <string.h>

static void put_i64(bs_sha256 *s, long long v)
{
    unsigned char b[8];
    unsigned long long u = (unsigned long long)v;
    for (int i = 0; i < 8; i++)
        b[i] = (unsigned char)(u >> (8 * i));
    bs_sha256_update(s, b, 8);
}

static void put_f64(bs_sha256 *s, double v)
{
    if (v == 0.0) v = 0.0; /* -0.0 and +0.0 give the same model */
    unsigned long long u;
    memcpy(&u, &v, 8);
    unsigned char b[8];
    for (int i = 0; i < 8; i++)
        b[i] = (unsigned char)(u >> (8 * i));
    bs_sha256_update(s, b, 8);
}

static void put_model_head(bs_sha256 *s, const tb_model *m)
{
    static const char tag[] = "bandsieve-content-1";
    bs_sha256_update(s, tag, sizeof tag);
    put_i64(s, m->dim);
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            put_f64(s, m->lattice[i][j]);
    put_i64(s, m->norb);
    put_i64(s, m->nspatial);
    put_i64(s, m->spinful);
    put_i64(s, m->spin_layout);
    put_i64(s, m->nocc);
    for (int o = 0; o < m->nspatial; o++) {
        for (int d = 0; d < 3; d++)
            put_f64(s, m->orb_pos[o][d]);
        put_i64(s, m->orb_l[o]);
    }
    /* Orbital shapes fix the symmetry representations (crystalline invariants); a model without
     * them hashes as before, one with them adds a marked block. */
    if (m->orb_shape) {
        static const char mark[] = "orbital-shapes";
        bs_sha256_update(s, mark, sizeof mark);
        for (int o = 0; o < m->nspatial; o++)
            put_i64(s, m->orb_shape[o]);
    }
    put_i64(s, m->has_fermi);
    put_f64(s, m->has_fermi ? m->fermi_ev : 0.0);
    put_i64(s, m->has_inversion_op);
    for (int i = 0; m->has_inversion_op && i < m->norb; i++) {
        put_i64(s, m->inv_perm[i]);
        put_f64(s, m->inv_sign[i]);
        for (int d = 0; d < 3; d++)
            put_i64(s, m->inv_shift[i][d]);
    }
}

void tb_content_hash(const tb_model *m, char hex[BS_SHA256_HEX])
{
    bs_sha256 s;
    bs_sha256_init(&s);
    put_model_head(&s, m);
    put_i64(&s, m->nR);
    size_t nn = (size_t)m->norb * (size_t)m->norb;
    for (int r = 0; r < m->nR; r++) {
        for (int d = 0; d < 3; d++)
            put_i64(&s, m->R[r][d]);
        put_i64(&s, m->deg[r]);
        for (size_t k = 0; k < nn; k++) {
            double complex h = tb_hop(m, r, (int)(k / (size_t)m->norb), (int)(k % (size_t)m->norb));
            put_f64(&s, creal(h));
            put_f64(&s, cimag(h));
        }
    }
    unsigned char d[BS_SHA256_BYTES];
    bs_sha256_final(&s, d);
    bs_sha256_hex(d, hex);
}
