/* Material-set HDF5 file: writer (pack, demo-set) and read-only reader (screen workers).
 * Every HDF5 call runs with HDF5's automatic error printing off (H5E_BEGIN_TRY), since library
 * code never prints; the deepest HDF5 message is copied into ours instead. */
#include "bandsieve/matset.h"

#include <errno.h>
#include <hdf5.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <unistd.h>

#include "bandsieve/card.h"
#include "bandsieve/config.h"
#include "bandsieve/content.h"

#define MS_FORMAT         "bandsieve-material-set"
#define MS_FORMAT_VERSION 1
#define MS_MAX_ENTRIES    1000000 /* an index larger than this is not ours (160 MB in memory) */
#define MS_MAX_TEXT       4096    /* description and error texts */

struct ms_set {
    hid_t file;
    int writer, closed;
    char path[4096];
    char partial[4200];
    ms_entry *entries;
    int n, cap;
    int *by_id; /* reader: entry indices in strcmp order of their ids, for ms_find */
    char description[MS_MAX_TEXT];
    int invented;
};

static herr_t h5_walk(unsigned n, const H5E_error2_t *e, void *data)
{
    (void)n;
    if (e->desc && *e->desc) snprintf(data, 256, "%s", e->desc);
    return 0;
}

/* Fails with BS_EHDF5 and the deepest message on HDF5's error stack. A checksum mismatch (the
 * Fletcher32 filter on the datasets or the metadata checksums of the file format) says the entry is
 * corrupt, in those words, so that a row and a user can tell damage from a bug. */
static int h5_fail(bs_err *err, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static int h5_fail(bs_err *err, const char *fmt, ...)
{
    char what[300], deep[256] = "";
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_DOWNWARD, h5_walk, deep);
    int corrupt = 0;
    for (const char *p = deep; *p && !corrupt; p++)
        corrupt = strncasecmp(p, "checksum", 8) == 0;
    if (corrupt) return bs_fail(err, BS_EPARSE, "%s: the file is corrupt (HDF5: %s)", what, deep);
    if (deep[0]) return bs_fail(err, BS_EHDF5, "%s (HDF5: %s)", what, deep);
    return bs_fail(err, BS_EHDF5, "%s", what);
}

/* A read failed with `code` and the message: unless HDF5's error stack shows a checksum mismatch
 * (damaged metadata looks like a missing attribute or group), then the entry is corrupt. */
static int read_fail(bs_err *err, int code, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static int read_fail(bs_err *err, int code, const char *fmt, ...)
{
    char what[600], deep[256] = "";
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(what, sizeof what, fmt, ap);
    va_end(ap);
    H5Ewalk2(H5E_DEFAULT, H5E_WALK_DOWNWARD, h5_walk, deep);
    for (const char *p = deep; *p; p++)
        if (strncasecmp(p, "checksum", 8) == 0 || strncasecmp(p, "signature", 9) == 0)
            return bs_fail(err, BS_EPARSE, "%s: the file is corrupt (HDF5: %s)", what, deep);
    return bs_fail(err, code, "%s", what);
}

/* ---- attributes ---- */

static int attr_write(hid_t loc, const char *name, hid_t type, const void *v)
{
    hid_t sp = H5Screate(H5S_SCALAR);
    hid_t a = sp < 0 ? -1 : H5Acreate2(loc, name, type, sp, H5P_DEFAULT, H5P_DEFAULT);
    herr_t st = a < 0 ? -1 : H5Awrite(a, type, v);
    if (a >= 0) H5Aclose(a);
    if (sp >= 0) H5Sclose(sp);
    return st < 0 ? -1 : 0;
}

static int attr_write_int(hid_t loc, const char *name, int v)
{
    return attr_write(loc, name, H5T_NATIVE_INT, &v);
}

static int attr_write_double(hid_t loc, const char *name, double v)
{
    return attr_write(loc, name, H5T_NATIVE_DOUBLE, &v);
}

static int attr_write_str(hid_t loc, const char *name, const char *v)
{
    hid_t t = H5Tcopy(H5T_C_S1);
    if (t < 0) return -1;
    int rc = H5Tset_size(t, strlen(v) + 1) < 0 || H5Tset_strpad(t, H5T_STR_NULLTERM) < 0
                 ? -1
                 : attr_write(loc, name, t, v);
    H5Tclose(t);
    return rc;
}

/* Opens attribute name of loc when it holds one value of type class cls and a size of at most
 * max_size bytes; -1 otherwise. What libhdf5 must decode for a scalar is then a few bytes, so a
 * damaged attribute is refused here instead of being converted. */
static hid_t attr_open_checked(hid_t loc, const char *name, H5T_class_t cls, size_t max_size)
{
    if (H5Aexists(loc, name) <= 0) return -1;
    hid_t a = H5Aopen(loc, name, H5P_DEFAULT);
    if (a < 0) return -1;
    hid_t sp = H5Aget_space(a), ft = H5Aget_type(a);
    int ok = sp >= 0 && ft >= 0 && H5Sget_simple_extent_npoints(sp) == 1 && H5Tget_class(ft) == cls &&
             H5Tget_size(ft) > 0 && H5Tget_size(ft) <= max_size;
    if (ok && cls == H5T_STRING) ok = H5Tis_variable_str(ft) == 0;
    if (ft >= 0) H5Tclose(ft);
    if (sp >= 0) H5Sclose(sp);
    if (!ok) {
        H5Aclose(a);
        return -1;
    }
    return a;
}

/* 0, or -1 when the attribute is missing or not one integer of at most 8 bytes. */
static int attr_read_int(hid_t loc, const char *name, int *v)
{
    hid_t a = attr_open_checked(loc, name, H5T_INTEGER, 8);
    if (a < 0) return -1;
    long long wide = 0;
    int ok = H5Aread(a, H5T_NATIVE_LLONG, &wide) >= 0 && wide >= -2147483647LL && wide <= 2147483647LL;
    H5Aclose(a);
    if (ok) *v = (int)wide;
    return ok ? 0 : -1;
}

/* 0, or -1 when the attribute is missing or not one float of 4 or 8 bytes. */
static int attr_read_double(hid_t loc, const char *name, double *v)
{
    hid_t a = attr_open_checked(loc, name, H5T_FLOAT, 8);
    if (a < 0) return -1;
    int ok = H5Aread(a, H5T_NATIVE_DOUBLE, v) >= 0;
    H5Aclose(a);
    return ok ? 0 : -1;
}

/* Reads a fixed-length string attribute into dst (capacity cap, truncated, NUL-terminated).
 * 0, or -1 when missing or not a fixed-length string. */
static int attr_read_str(hid_t loc, const char *name, char *dst, size_t cap)
{
    dst[0] = '\0';
    hid_t a = attr_open_checked(loc, name, H5T_STRING, MS_MAX_TEXT + 1);
    if (a < 0) return -1;
    hid_t ft = H5Aget_type(a);
    int rc = -1;
    if (ft >= 0) {
        size_t size = H5Tget_size(ft);
        char *buf = calloc(size + 1, 1);
        hid_t mt = H5Tcopy(ft);
        if (buf && mt >= 0 && H5Aread(a, mt, buf) >= 0) {
            snprintf(dst, cap, "%s", buf);
            rc = 0;
        }
        if (mt >= 0) H5Tclose(mt);
        free(buf);
    }
    if (ft >= 0) H5Tclose(ft);
    H5Aclose(a);
    return rc;
}

/* ---- datasets ---- */

/* Bytes per chunk of a stored dataset: each chunk carries its own Fletcher32 checksum, and a
 * reader decodes one chunk at a time; 1 MiB keeps both small (common practice for HDF5 chunks). */
#define MS_CHUNK_BYTES (1u << 20)

/* Dataset creation properties: chunks along the first dimension of at most MS_CHUNK_BYTES, with
 * HDF5's Fletcher32 checksum filter, so that a flipped bit in the numbers is found on reading
 * instead of changing a material's answer. H5P_DEFAULT for empty datasets (nothing to check). */
static hid_t checked_dcpl(int rank, const hsize_t *dims, size_t elem_size)
{
    hsize_t chunk[8], row = elem_size;
    for (int i = 0; i < rank; i++) {
        if (dims[i] == 0) return H5P_DEFAULT;
        chunk[i] = dims[i];
        if (i > 0) row *= dims[i];
    }
    hsize_t rows = row < MS_CHUNK_BYTES ? MS_CHUNK_BYTES / row : 1;
    if (chunk[0] > rows) chunk[0] = rows;
    hid_t p = H5Pcreate(H5P_DATASET_CREATE);
    if (p < 0) return -1;
    if (H5Pset_chunk(p, rank, chunk) < 0 || H5Pset_fletcher32(p) < 0) {
        H5Pclose(p);
        return -1;
    }
    return p;
}

static int dset_write(hid_t loc, const char *name, hid_t type, int rank, const hsize_t *dims, const void *buf)
{
    hid_t sp = H5Screate_simple(rank, dims, NULL);
    hid_t dcpl = rank <= 8 ? checked_dcpl(rank, dims, H5Tget_size(type)) : -1;
    hid_t d = sp < 0 || dcpl < 0 ? -1 : H5Dcreate2(loc, name, type, sp, H5P_DEFAULT, dcpl, H5P_DEFAULT);
    herr_t st = d < 0 ? -1 : H5Dwrite(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf);
    if (d >= 0) H5Dclose(d);
    if (dcpl >= 0 && dcpl != H5P_DEFAULT) H5Pclose(dcpl);
    if (sp >= 0) H5Sclose(sp);
    return st < 0 ? -1 : 0;
}

/* A damaged chunk index can give a chunk a stored size of gigabytes, which HDF5 allocates before
 * it reads and checksums the chunk (found by the set reader's fuzz test: a 4 GB allocation from a
 * 56 kB file). Every stored chunk must fit in the chunk's own bytes plus the Fletcher32 checksum
 * (with some slack for another writer's filters): returns 1 when all do or the dataset is not
 * chunked, 0 when one does not or the chunk layout cannot be read. */
static int chunks_plausible(hid_t d, hid_t type, int rank)
{
    hid_t dcpl = H5Dget_create_plist(d);
    if (dcpl < 0) return 0;
    int ok = 1;
    if (H5Pget_layout(dcpl) == H5D_CHUNKED) {
        hsize_t chunk[8] = {0};
        ok = H5Pget_chunk(dcpl, 8, chunk) == rank;
        hsize_t bytes = H5Tget_size(type);
        for (int i = 0; ok && i < rank; i++)
            bytes *= chunk[i];
#if H5_VERSION_GE(1, 10, 5)
        hsize_t nchunks = 0;
        hid_t space = H5Dget_space(d);
        ok = ok && space >= 0 && H5Dget_num_chunks(d, space, &nchunks) >= 0;
        for (hsize_t c = 0; ok && c < nchunks; c++) {
            hsize_t offset[8], size = 0;
            unsigned mask = 0;
            haddr_t addr = 0;
            ok = H5Dget_chunk_info(d, space, c, offset, &mask, &addr, &size) >= 0 && size <= bytes + 4096;
        }
        if (space >= 0) H5Sclose(space);
#endif
    }
    H5Pclose(dcpl);
    return ok;
}

/* Opens dataset name into *out after checking that it exists, has exactly the shape dims and
 * plausible chunks; the caller closes it. */
static int dset_open_checked(hid_t loc, const char *where, const char *name, hid_t type, int rank,
                             const hsize_t *dims, hid_t *out, bs_err *err)
{
    *out = -1;
    if (H5Lexists(loc, name, H5P_DEFAULT) <= 0)
        return read_fail(err, BS_EPARSE, "%s/%s: dataset missing", where, name);
    hid_t d = H5Dopen2(loc, name, H5P_DEFAULT);
    if (d < 0) return h5_fail(err, "%s/%s: cannot open dataset", where, name);
    int rc = 0;
    hid_t sp = H5Dget_space(d);
    hsize_t got[8] = {0};
    int r = sp < 0 ? -1 : H5Sget_simple_extent_ndims(sp);
    if (r != rank || r > 8 || H5Sget_simple_extent_dims(sp, got, NULL) < 0 ||
        memcmp(got, dims, (size_t)rank * sizeof *dims) != 0) {
        char want[96] = "", have[96] = "";
        for (int i = 0; i < rank; i++)
            snprintf(want + strlen(want), sizeof want - strlen(want), "%s%llu", i ? "," : "",
                     (unsigned long long)dims[i]);
        for (int i = 0; i < r && i < 8; i++)
            snprintf(have + strlen(have), sizeof have - strlen(have), "%s%llu", i ? "," : "",
                     (unsigned long long)got[i]);
        rc = bs_fail(err, BS_EPARSE, "%s/%s: shape (%s), expected (%s)", where, name, have, want);
    } else if (!chunks_plausible(d, type, rank)) {
        rc = bs_fail(err, BS_EPARSE, "%s/%s: damaged dataset (a stored chunk larger than its data)", where,
                     name);
    }
    if (sp >= 0) H5Sclose(sp);
    if (rc != 0)
        H5Dclose(d);
    else
        *out = d;
    return rc;
}

/* Reads dataset name of exactly the shape dims into buf, checking the shape before reading. */
static int dset_read(hid_t loc, const char *where, const char *name, hid_t type, int rank,
                     const hsize_t *dims, void *buf, bs_err *err)
{
    hid_t d;
    int rc = dset_open_checked(loc, where, name, type, rank, dims, &d, err);
    if (rc != 0) return rc;
    if (H5Dread(d, type, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0)
        rc = h5_fail(err, "%s/%s: cannot read dataset", where, name);
    H5Dclose(d);
    return rc;
}

/* Reads rows [first, first + count) of a dataset whose first dimension is rows (rank <= 8, dims the
 * whole shape) into buf. */
static int dset_read_rows(hid_t d, const char *where, const char *name, hid_t type, int rank,
                          const hsize_t *dims, hsize_t first, hsize_t count, void *buf, bs_err *err)
{
    hsize_t start[8] = {0}, cnt[8];
    for (int i = 0; i < rank; i++)
        cnt[i] = dims[i];
    start[0] = first;
    cnt[0] = count;
    hid_t fs = H5Dget_space(d), ms = H5Screate_simple(rank, cnt, NULL);
    herr_t st = fs < 0 || ms < 0 ? -1 : H5Sselect_hyperslab(fs, H5S_SELECT_SET, start, NULL, cnt, NULL);
    if (st >= 0) st = H5Dread(d, type, ms, fs, H5P_DEFAULT, buf);
    /* The message before any other HDF5 call, which would clear the error stack that names the
     * cause (a checksum mismatch: the file is corrupt). */
    int rc = st < 0 ? h5_fail(err, "%s/%s: cannot read dataset", where, name) : 0;
    if (ms >= 0) H5Sclose(ms);
    if (fs >= 0) H5Sclose(fs);
    return rc;
}

/* Rows of a dataset read at a time: one stored chunk (each chunk is decoded and checksummed
 * whole, so a read of whole chunks decodes each once), else MS_CHUNK_BYTES worth. */
static hsize_t dset_rows_per_read(hid_t d, int rank, hsize_t row_bytes)
{
    hsize_t rows = row_bytes < MS_CHUNK_BYTES ? MS_CHUNK_BYTES / row_bytes : 1;
    hid_t dcpl = H5Dget_create_plist(d);
    hsize_t chunk[8] = {0};
    if (dcpl >= 0 && H5Pget_layout(dcpl) == H5D_CHUNKED && H5Pget_chunk(dcpl, 8, chunk) == rank &&
        chunk[0] > 0)
        rows = chunk[0];
    if (dcpl >= 0) H5Pclose(dcpl);
    return rows;
}

/* The hoppings H (nR x norb x norb complex), folded while read (tb_model_fold_next): a chunk of
 * blocks is read where the next kept block goes, and a block equal to the adjoint of its -R's
 * is not kept, so the array's pages beyond the kept blocks and one chunk are never touched (a
 * 128-state entry of 729 lattice vectors peaks at about 96 MB instead of 191 MB). m->R and
 * m->deg are read first. Without room for the map it reads the array whole, unfolded. */
static int read_hoppings(hid_t g, const char *where, tb_model *m, bs_err *err)
{
    hsize_t dH[4] = {(hsize_t)m->nR, (hsize_t)m->norb, (hsize_t)m->norb, 2};
    hid_t d;
    int rc = dset_open_checked(g, where, "H", H5T_NATIVE_DOUBLE, 4, dH, &d, err);
    if (rc != 0) return rc;
    size_t nn = (size_t)m->norb * m->norb;
    m->hsrc = malloc((size_t)m->nR * sizeof *m->hsrc);
    if (!m->hsrc) {
        if (H5Dread(d, H5T_NATIVE_DOUBLE, H5S_ALL, H5S_ALL, H5P_DEFAULT, m->H) < 0)
            rc = h5_fail(err, "%s/H: cannot read dataset", where);
    } else {
        hsize_t per = dset_rows_per_read(d, 4, nn * sizeof *m->H);
        if (per > (hsize_t)m->nR) per = (hsize_t)m->nR;
        int nblock = 0;
        for (int r0 = 0; rc == 0 && r0 < m->nR; r0 += (int)per) {
            int count = m->nR - r0 < (int)per ? m->nR - r0 : (int)per, base = nblock;
            rc = dset_read_rows(d, where, "H", H5T_NATIVE_DOUBLE, 4, dH, (hsize_t)r0, (hsize_t)count,
                                m->H + (size_t)base * nn, err);
            /* Block j sits at base + j >= nblock: moved down to the next kept slot, then kept or not. */
            for (int j = 0; rc == 0 && j < count; j++) {
                if (base + j != nblock)
                    memmove(m->H + (size_t)nblock * nn, m->H + (size_t)(base + j) * nn, nn * sizeof *m->H);
                tb_model_fold_next(m, r0 + j, &nblock);
            }
        }
    }
    H5Dclose(d);
    return rc;
}

/* ---- the index table ---- */

/* The index's compound type; with_content 0 gives the type of sets written before content
 * hashes were stored (their index lacks the member "content"). */
static hid_t index_type_v(int with_content)
{
    hid_t t = H5Tcreate(H5T_COMPOUND, sizeof(ms_entry));
    hid_t s = H5Tcopy(H5T_C_S1);
    H5Tset_size(s, sizeof(((ms_entry *)0)->id));
    H5Tset_strpad(s, H5T_STR_NULLTERM);
    H5Tinsert(t, "id", HOFFSET(ms_entry, id), s);
    H5Tinsert(t, "dimension", HOFFSET(ms_entry, dim), H5T_NATIVE_INT);
    H5Tinsert(t, "norb", HOFFSET(ms_entry, norb), H5T_NATIVE_INT);
    H5Tinsert(t, "nR", HOFFSET(ms_entry, nR), H5T_NATIVE_INT);
    H5Tinsert(t, "nocc", HOFFSET(ms_entry, nocc), H5T_NATIVE_INT);
    H5Tinsert(t, "spinful", HOFFSET(ms_entry, spinful), H5T_NATIVE_INT);
    H5Tinsert(t, "status", HOFFSET(ms_entry, status), H5T_NATIVE_INT);
    H5Tinsert(t, "cost", HOFFSET(ms_entry, cost), H5T_NATIVE_DOUBLE);
    H5Tclose(s);
    if (with_content) {
        hid_t c = H5Tcopy(H5T_C_S1);
        H5Tset_size(c, sizeof(((ms_entry *)0)->content));
        H5Tset_strpad(c, H5T_STR_NULLTERM);
        H5Tinsert(t, "content", HOFFSET(ms_entry, content), c);
        H5Tclose(c);
    }
    return t;
}

static hid_t index_type(void)
{
    return index_type_v(1);
}

static int index_write(ms_set *s, bs_err *err)
{
    hid_t t = index_type();
    hsize_t dims[1] = {(hsize_t)s->n};
    hid_t sp = H5Screate_simple(1, dims, NULL);
    hid_t dcpl = checked_dcpl(1, dims, sizeof(ms_entry));
    hid_t d = dcpl < 0 ? -1 : H5Dcreate2(s->file, "index", t, sp, H5P_DEFAULT, dcpl, H5P_DEFAULT);
    if (dcpl >= 0 && dcpl != H5P_DEFAULT) H5Pclose(dcpl);
    int ok = t >= 0 && sp >= 0 && d >= 0 &&
             (s->n == 0 || H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, s->entries) >= 0);
    int rc = ok ? 0 : h5_fail(err, "%s:/index: cannot write the index", s->path);
    if (d >= 0) H5Dclose(d);
    if (sp >= 0) H5Sclose(sp);
    if (t >= 0) H5Tclose(t);
    return rc;
}

/* ms_find by binary search: a rescreen looks up every selected id, so a scan per id would make
 * its set-up quadratic (half an hour at 10^6 ids). qsort has no context argument, hence the
 * (index, id) pairs. */
typedef struct id_key {
    const char *id;
    int index;
} id_key;

static int id_key_cmp(const void *a, const void *b)
{
    const id_key *x = a, *y = b;
    int c = strcmp(x->id, y->id);
    return c ? c : (x->index > y->index) - (x->index < y->index);
}

static int sort_ids(ms_set *s, bs_err *err)
{
    id_key *keys = malloc(((size_t)s->n + 1) * sizeof *keys);
    s->by_id = malloc(((size_t)s->n + 1) * sizeof *s->by_id);
    if (!keys || !s->by_id) {
        free(keys);
        return bs_fail(err, BS_ENOMEM, "%s:/index: out of memory for the id order", s->path);
    }
    for (int i = 0; i < s->n; i++)
        keys[i] = (id_key){s->entries[i].id, i};
    qsort(keys, (size_t)s->n, sizeof *keys, id_key_cmp);
    for (int i = 0; i < s->n; i++)
        s->by_id[i] = keys[i].index;
    free(keys);
    return 0;
}

static int index_read(ms_set *s, bs_err *err)
{
    if (H5Lexists(s->file, "index", H5P_DEFAULT) <= 0)
        return read_fail(err, BS_EPARSE, "%s:/index: missing (the set was not completed)", s->path);
    hid_t d = H5Dopen2(s->file, "index", H5P_DEFAULT);
    if (d < 0) return h5_fail(err, "%s:/index: cannot open", s->path);
    /* Sets from before content hashes have no "content" member: read them with the old type
     * (ms_content computes the hash on demand). */
    hid_t ft = H5Dget_type(d);
    int has_content = ft >= 0 && H5Tget_class(ft) == H5T_COMPOUND && H5Tget_member_index(ft, "content") >= 0;
    if (ft >= 0) H5Tclose(ft);
    hid_t sp = H5Dget_space(d), t = index_type_v(has_content);
    hssize_t n = sp < 0 ? -1 : H5Sget_simple_extent_npoints(sp);
    int rc = 0;
    if (sp < 0 || H5Sget_simple_extent_ndims(sp) != 1 || n < 0 || n > MS_MAX_ENTRIES) {
        rc = bs_fail(err, BS_EPARSE, "%s:/index: expected a list of at most %d entries", s->path,
                     MS_MAX_ENTRIES);
        goto done;
    }
    s->entries = calloc(n > 0 ? (size_t)n : 1, sizeof *s->entries);
    if (!s->entries) {
        rc = bs_fail(err, BS_ENOMEM, "%s:/index: out of memory for %lld entries", s->path, (long long)n);
        goto done;
    }
    if (n > 0 && H5Dread(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, s->entries) < 0) {
        rc = h5_fail(err, "%s:/index: cannot read (not a bandsieve index?)", s->path);
        goto done;
    }
    s->n = s->cap = (int)n;
    for (int i = 0; i < s->n; i++) {
        s->entries[i].id[sizeof s->entries[i].id - 1] = '\0';
        s->entries[i].content[sizeof s->entries[i].content - 1] = '\0';
    }
    rc = sort_ids(s, err);
done:
    H5Tclose(t);
    if (sp >= 0) H5Sclose(sp);
    H5Dclose(d);
    return rc;
}

/* ---- writer ---- */

static int create_impl(const char *path, ms_set **out, bs_err *err)
{
    ms_set *s = calloc(1, sizeof *s);
    if (!s) return bs_fail(err, BS_ENOMEM, "out of memory for a material set");
    s->file = -1;
    s->writer = 1;
    int rc = 0;
    if (snprintf(s->path, sizeof s->path, "%s", path) >= (int)sizeof s->path) {
        rc = bs_fail(err, BS_EINVAL, "%s: path too long", path);
        goto done;
    }
    snprintf(s->partial, sizeof s->partial, "%s" MS_PARTIAL_SUFFIX, path);
    /* File format of HDF5 1.8 and later: the superblock, object headers (with the attributes)
     * and B-trees carry checksums, so damaged metadata is refused by the library instead of
     * being decoded (a flipped byte in an attribute message overran a heap buffer). */
    hid_t fapl = H5Pcreate(H5P_FILE_ACCESS);
    if (fapl >= 0 && H5Pset_libver_bounds(fapl, H5F_LIBVER_V18, H5F_LIBVER_LATEST) < 0) {
        H5Pclose(fapl);
        fapl = -1;
    }
    s->file = fapl < 0 ? -1 : H5Fcreate(s->partial, H5F_ACC_TRUNC, H5P_DEFAULT, fapl);
    if (fapl >= 0) H5Pclose(fapl);
    if (s->file < 0) {
        rc = h5_fail(err, "%s: cannot create the material set", s->partial);
        goto done;
    }
    hid_t g = H5Gcreate2(s->file, "materials", H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    if (g < 0 || attr_write_str(s->file, "format", MS_FORMAT) < 0 ||
        attr_write_int(s->file, "format_version", MS_FORMAT_VERSION) < 0 ||
        attr_write_str(s->file, "written_by", "bandsieve " BS_VERSION) < 0)
        rc = h5_fail(err, "%s: cannot write the set's header", s->partial);
    if (g >= 0) H5Gclose(g);
done:
    if (rc != 0)
        ms_free(s);
    else
        *out = s;
    return rc;
}

int ms_create(const char *path, ms_set **out, bs_err *err)
{
    *out = NULL;
    int rc;
    H5E_BEGIN_TRY
    {
        rc = create_impl(path, out, err);
    }
    H5E_END_TRY;
    return rc;
}

int ms_set_meta(ms_set *s, const char *description, int invented, bs_err *err)
{
    if (!s->writer || s->closed) return bs_fail(err, BS_EINVAL, "%s: not open for writing", s->path);
    if (strlen(description) >= sizeof s->description)
        return bs_fail(err, BS_EINVAL, "%s: description longer than %d bytes", s->path, MS_MAX_TEXT - 1);
    snprintf(s->description, sizeof s->description, "%s", description);
    s->invented = invented ? 1 : 0;
    return 0;
}

static int push_entry(ms_set *s, const ms_entry *e, bs_err *err)
{
    if (s->n == s->cap) {
        int cap = s->cap ? 2 * s->cap : 64;
        ms_entry *p = realloc(s->entries, (size_t)cap * sizeof *p);
        if (!p) return bs_fail(err, BS_ENOMEM, "out of memory for the index");
        s->entries = p;
        s->cap = cap;
    }
    s->entries[s->n++] = *e;
    return 0;
}

/* Opens a new group /materials/<id>, refusing bad or duplicate ids. */
static int new_group(ms_set *s, const char *id, hid_t *g, bs_err *err)
{
    *g = -1;
    if (!s->writer || s->closed) return bs_fail(err, BS_EINVAL, "%s: not open for writing", s->path);
    if (!card_id_ok(id)) return bs_fail(err, BS_EINVAL, "%s: '%s' is not a valid material id", s->path, id);
    char name[160];
    snprintf(name, sizeof name, "materials/%s", id);
    /* HDF5's group B-tree answers in log time; a scan of the index would make packing quadratic. */
    if (H5Lexists(s->file, name, H5P_DEFAULT) > 0)
        return bs_fail(err, BS_EINVAL, "%s: material id '%s' already in the set", s->path, id);
    *g = H5Gcreate2(s->file, name, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    if (*g < 0) return h5_fail(err, "%s:/materials/%s: cannot create group", s->path, id);
    return 0;
}

static int write_attrs(hid_t g, const tb_model *m, int status)
{
    int bad = attr_write_str(g, "id", m->id) < 0 || attr_write_str(g, "formula", m->formula) < 0 ||
              attr_write_str(g, "source", m->source) < 0 || attr_write_int(g, "status", status) < 0 ||
              attr_write_int(g, "dimension", m->dim) < 0 || attr_write_int(g, "norb", m->norb) < 0 ||
              attr_write_int(g, "nspatial", m->nspatial) < 0 || attr_write_int(g, "nR", m->nR) < 0 ||
              attr_write_int(g, "nocc", m->nocc) < 0 || attr_write_int(g, "spinful", m->spinful) < 0 ||
              attr_write_int(g, "spin_layout", m->spin_layout) < 0 ||
              attr_write_int(g, "has_fermi", m->has_fermi) < 0 ||
              attr_write_double(g, "fermi_ev", m->fermi_ev) < 0 ||
              attr_write_int(g, "has_inversion_op", m->has_inversion_op) < 0 ||
              attr_write_int(g, "magnetism", m->magnetism) < 0;
    if (!bad && m->has_family)
        bad = attr_write_str(g, "family", m->family) < 0 ||
              attr_write_str(g, "family_parameter", m->family_param) < 0 ||
              attr_write_str(g, "family_unit", m->family_unit) < 0 ||
              attr_write_double(g, "family_value", m->family_value) < 0;
    return bad ? -1 : 0;
}

/* The card text as a scalar fixed-length string dataset "card" (an attribute would be limited to
 * 64 kB, and cards with an inversion operator are larger). */
static int write_card(hid_t g, const char *json)
{
    if (!json) return 0;
    hid_t t = H5Tcopy(H5T_C_S1);
    if (t < 0) return -1;
    int rc = -1;
    if (H5Tset_size(t, strlen(json) + 1) >= 0 && H5Tset_strpad(t, H5T_STR_NULLTERM) >= 0) {
        hid_t sp = H5Screate(H5S_SCALAR);
        hid_t d = sp < 0 ? -1 : H5Dcreate2(g, "card", t, sp, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
        rc = d >= 0 && H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, json) >= 0 ? 0 : -1;
        if (d >= 0) H5Dclose(d);
        if (sp >= 0) H5Sclose(sp);
    }
    H5Tclose(t);
    return rc;
}

static int write_arrays(hid_t g, const tb_model *m)
{
    /* The set stores one block per lattice vector: a folded model is unfolded for the write. */
    size_t nn = (size_t)m->norb * m->norb;
    double complex *full = m->hsrc ? malloc((size_t)m->nR * nn * sizeof *full) : NULL;
    if (m->hsrc && !full) return -1;
    for (int r = 0; full && r < m->nR; r++) {
        const double complex *h = tb_hop_block(m, r, full + (size_t)r * nn);
        if (h != full + (size_t)r * nn) memcpy(full + (size_t)r * nn, h, nn * sizeof *full);
    }
    hsize_t d33[2] = {3, 3}, dR[2] = {(hsize_t)m->nR, 3}, dn[1] = {(hsize_t)m->nR};
    hsize_t dH[4] = {(hsize_t)m->nR, (hsize_t)m->norb, (hsize_t)m->norb, 2};
    hsize_t dpos[2] = {(hsize_t)m->nspatial, 3}, dl[1] = {(hsize_t)m->nspatial};
    /* C11 lays out double complex as double[2] (real, imaginary): H is written as it lies. */
    int bad = dset_write(g, "lattice", H5T_NATIVE_DOUBLE, 2, d33, m->lattice) < 0 ||
              dset_write(g, "R", H5T_NATIVE_INT, 2, dR, m->R) < 0 ||
              dset_write(g, "deg", H5T_NATIVE_INT, 1, dn, m->deg) < 0 ||
              dset_write(g, "H", H5T_NATIVE_DOUBLE, 4, dH, full ? full : m->H) < 0 ||
              dset_write(g, "orb_pos", H5T_NATIVE_DOUBLE, 2, dpos, m->orb_pos) < 0 ||
              dset_write(g, "orb_l", H5T_NATIVE_INT, 1, dl, m->orb_l) < 0 ||
              (m->orb_shape && dset_write(g, "orb_shape", H5T_NATIVE_INT, 1, dl, m->orb_shape) < 0);
    if (!bad && m->has_inversion_op) {
        hsize_t dv[1] = {(hsize_t)m->norb}, dsh[2] = {(hsize_t)m->norb, 3};
        bad = dset_write(g, "inv_perm", H5T_NATIVE_INT, 1, dv, m->inv_perm) < 0 ||
              dset_write(g, "inv_sign", H5T_NATIVE_DOUBLE, 1, dv, m->inv_sign) < 0 ||
              dset_write(g, "inv_shift", H5T_NATIVE_INT, 2, dsh, m->inv_shift) < 0;
    }
    free(full);
    return bad ? -1 : 0;
}

static void entry_of(const tb_model *m, int status, ms_entry *e)
{
    memset(e, 0, sizeof *e);
    snprintf(e->id, sizeof e->id, "%s", m->id);
    e->dim = m->dim;
    e->norb = m->norb;
    e->nR = m->nR;
    e->nocc = m->nocc;
    e->spinful = m->spinful;
    e->status = status;
    double n = m->norb;
    e->cost = n * n * n + (double)m->nR * n * n;
    tb_content_hash(m, e->content);
    if (m->has_family) {
        e->has_family = 1;
        snprintf(e->family, sizeof e->family, "%s", m->family);
        snprintf(e->family_param, sizeof e->family_param, "%s", m->family_param);
        snprintf(e->family_unit, sizeof e->family_unit, "%s", m->family_unit);
        e->family_value = m->family_value;
    }
    /* FNV-1a over what interpolation between members needs to agree on */
    unsigned long long h = 1469598103934665603ULL;
    int key[6] = {m->dim, m->norb, m->nspatial, m->spinful, m->spin_layout, m->nocc};
    for (int i = 0; i < 6; i++) {
        h ^= (unsigned long long)(unsigned)key[i];
        h *= 1099511628211ULL;
    }
    for (int o = 0; o < m->nspatial && m->orb_l; o++) {
        h ^= (unsigned long long)(unsigned)m->orb_l[o];
        h *= 1099511628211ULL;
    }
    e->basis = h;
}

/* Content hash of an error entry: its message stands for its content. */
static void error_content(const char *id, int code, const char *message, char hex[65])
{
    bs_sha256 h;
    bs_sha256_init(&h);
    char head[200];
    snprintf(head, sizeof head, "bandsieve-error-1 %s %d ", id, code);
    bs_sha256_update(&h, head, strlen(head));
    bs_sha256_update(&h, message, strlen(message));
    unsigned char d[BS_SHA256_BYTES];
    bs_sha256_final(&h, d);
    bs_sha256_hex(d, hex);
}

/* A family member must share the basis of the family's first member and take a new value. */
static int family_check(const ms_set *s, const ms_entry *e, bs_err *err)
{
    if (!e->has_family) return 0;
    for (int i = 0; i < s->n; i++) {
        const ms_entry *o = &s->entries[i];
        if (!o->has_family || strcmp(o->family, e->family) != 0) continue;
        if (strcmp(o->family_param, e->family_param) != 0)
            return bs_fail(err, BS_EINVAL,
                           "%s: members '%s' and '%s' of family %s give different parameters "
                           "('%s', '%s')",
                           s->path, o->id, e->id, e->family, o->family_param, e->family_param);
        if (o->basis != e->basis)
            return bs_fail(err, BS_EINVAL,
                           "%s: members '%s' and '%s' of family %s do not share a basis (states, "
                           "orbitals and their l, spin layout, filling)",
                           s->path, o->id, e->id, e->family);
        if (o->family_value == e->family_value)
            return bs_fail(err, BS_EINVAL, "%s: members '%s' and '%s' of family %s sit at the same value %g",
                           s->path, o->id, e->id, e->family, e->family_value);
    }
    return 0;
}

static int add_impl(ms_set *s, const tb_model *m, int status, bs_err *err)
{
    hid_t g;
    ms_entry pre;
    entry_of(m, status, &pre);
    int rc = family_check(s, &pre, err);
    if (rc != 0) return rc;
    rc = new_group(s, m->id, &g, err);
    if (rc != 0) return rc;
    if (write_attrs(g, m, status) < 0 || write_arrays(g, m) < 0 || write_card(g, m->card_json) < 0)
        rc = h5_fail(err, "%s:/materials/%s: cannot write", s->path, m->id);
    H5Gclose(g);
    ms_entry e;
    entry_of(m, status, &e);
    if (rc == 0) rc = push_entry(s, &e, err);
    return rc;
}

int ms_add(ms_set *s, const tb_model *m, bs_err *err)
{
    int rc = tb_model_validate(m, BS_HERMITIAN_TOL_EV, m->id, err);
    if (rc != 0) return rc;
    H5E_BEGIN_TRY
    {
        rc = add_impl(s, m, MS_STATUS_OK, err);
    }
    H5E_END_TRY;
    return rc;
}

int ms_add_broken(ms_set *s, const tb_model *m, bs_err *err)
{
    int rc;
    H5E_BEGIN_TRY
    {
        rc = add_impl(s, m, MS_STATUS_BROKEN, err);
    }
    H5E_END_TRY;
    return rc;
}

static int add_error_impl(ms_set *s, const char *id, int code, const char *message, bs_err *err)
{
    hid_t g;
    int rc = new_group(s, id, &g, err);
    if (rc != 0) return rc;
    char text[MS_MAX_TEXT];
    snprintf(text, sizeof text, "%s", message);
    if (attr_write_str(g, "id", id) < 0 || attr_write_int(g, "status", MS_STATUS_ERROR) < 0 ||
        attr_write_int(g, "error_code", code) < 0 || attr_write_str(g, "error", text) < 0)
        rc = h5_fail(err, "%s:/materials/%s: cannot write", s->path, id);
    H5Gclose(g);
    ms_entry e;
    memset(&e, 0, sizeof e);
    snprintf(e.id, sizeof e.id, "%s", id);
    e.status = MS_STATUS_ERROR;
    error_content(id, code, text, e.content);
    if (rc == 0) rc = push_entry(s, &e, err);
    return rc;
}

int ms_add_error(ms_set *s, const char *id, int code, const char *message, bs_err *err)
{
    if (code >= 0)
        return bs_fail(err, BS_EINVAL, "%s: error entry '%s' needs a negative error code", s->path, id);
    int rc;
    H5E_BEGIN_TRY
    {
        rc = add_error_impl(s, id, code, message, err);
    }
    H5E_END_TRY;
    return rc;
}

/* ---- /families: one row per family member ---- */

typedef struct ms_family_row {
    char id[128];
    char family[64];
    char parameter[32];
    char unit[16];
    double value;
} ms_family_row;

static hid_t family_type(void)
{
    hid_t t = H5Tcreate(H5T_COMPOUND, sizeof(ms_family_row));
    const char *names[4] = {"id", "family", "parameter", "unit"};
    size_t off[4] = {HOFFSET(ms_family_row, id), HOFFSET(ms_family_row, family),
                     HOFFSET(ms_family_row, parameter), HOFFSET(ms_family_row, unit)};
    size_t len[4] = {128, 64, 32, 16};
    for (int i = 0; i < 4; i++) {
        hid_t st = H5Tcopy(H5T_C_S1);
        H5Tset_size(st, len[i]);
        H5Tset_strpad(st, H5T_STR_NULLTERM);
        H5Tinsert(t, names[i], off[i], st);
        H5Tclose(st);
    }
    H5Tinsert(t, "value", HOFFSET(ms_family_row, value), H5T_NATIVE_DOUBLE);
    return t;
}

static int families_write(ms_set *s, bs_err *err)
{
    int n = 0;
    for (int i = 0; i < s->n; i++)
        n += s->entries[i].has_family;
    if (n == 0) return 0;
    ms_family_row *rows = calloc((size_t)n, sizeof *rows);
    if (!rows) return bs_fail(err, BS_ENOMEM, "%s:/families: out of memory", s->path);
    n = 0;
    for (int i = 0; i < s->n; i++) {
        const ms_entry *e = &s->entries[i];
        if (!e->has_family) continue;
        snprintf(rows[n].id, sizeof rows[n].id, "%s", e->id);
        snprintf(rows[n].family, sizeof rows[n].family, "%s", e->family);
        snprintf(rows[n].parameter, sizeof rows[n].parameter, "%s", e->family_param);
        snprintf(rows[n].unit, sizeof rows[n].unit, "%s", e->family_unit);
        rows[n].value = e->family_value;
        n++;
    }
    hid_t t = family_type();
    hsize_t dims[1] = {(hsize_t)n};
    hid_t sp = H5Screate_simple(1, dims, NULL);
    hid_t d = H5Dcreate2(s->file, "families", t, sp, H5P_DEFAULT, H5P_DEFAULT, H5P_DEFAULT);
    int ok = t >= 0 && sp >= 0 && d >= 0 && H5Dwrite(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, rows) >= 0;
    int rc = ok ? 0 : h5_fail(err, "%s:/families: cannot write", s->path);
    if (d >= 0) H5Dclose(d);
    if (sp >= 0) H5Sclose(sp);
    if (t >= 0) H5Tclose(t);
    free(rows);
    return rc;
}

/* Optional: sets that hold no family have no /families. */
static int families_read(ms_set *s, bs_err *err)
{
    if (H5Lexists(s->file, "families", H5P_DEFAULT) <= 0) return 0;
    hid_t d = H5Dopen2(s->file, "families", H5P_DEFAULT);
    if (d < 0) return h5_fail(err, "%s:/families: cannot open", s->path);
    hid_t sp = H5Dget_space(d), t = family_type();
    hssize_t n = sp < 0 ? -1 : H5Sget_simple_extent_npoints(sp);
    ms_family_row *rows = NULL;
    int rc = 0;
    if (sp < 0 || H5Sget_simple_extent_ndims(sp) != 1 || n < 0 || n > MS_MAX_ENTRIES) {
        rc = bs_fail(err, BS_EPARSE, "%s:/families: expected a list of at most %d rows", s->path,
                     MS_MAX_ENTRIES);
        goto done;
    }
    rows = calloc(n > 0 ? (size_t)n : 1, sizeof *rows);
    if (!rows) {
        rc = bs_fail(err, BS_ENOMEM, "%s:/families: out of memory", s->path);
        goto done;
    }
    if (n > 0 && H5Dread(d, t, H5S_ALL, H5S_ALL, H5P_DEFAULT, rows) < 0) {
        rc = h5_fail(err, "%s:/families: cannot read", s->path);
        goto done;
    }
    for (hssize_t r = 0; r < n; r++) {
        rows[r].id[sizeof rows[r].id - 1] = rows[r].family[sizeof rows[r].family - 1] = '\0';
        rows[r].parameter[sizeof rows[r].parameter - 1] = rows[r].unit[sizeof rows[r].unit - 1] = '\0';
        int i = ms_find(s, rows[r].id);
        if (i < 0) {
            rc = bs_fail(err, BS_EPARSE, "%s:/families: row %lld names '%s', which is not in /index", s->path,
                         (long long)r, rows[r].id);
            goto done;
        }
        ms_entry *e = &s->entries[i];
        e->has_family = 1;
        snprintf(e->family, sizeof e->family, "%s", rows[r].family);
        snprintf(e->family_param, sizeof e->family_param, "%s", rows[r].parameter);
        snprintf(e->family_unit, sizeof e->family_unit, "%s", rows[r].unit);
        e->family_value = rows[r].value;
    }
done:
    free(rows);
    H5Tclose(t);
    if (sp >= 0) H5Sclose(sp);
    H5Dclose(d);
    return rc;
}

int ms_families(const ms_set *s, const char **names, int cap)
{
    int n = 0;
    for (int i = 0; i < s->n; i++) {
        const ms_entry *e = &s->entries[i];
        if (!e->has_family) continue;
        int seen = 0;
        for (int j = 0; j < n && !seen; j++)
            seen = strcmp(names[j], e->family) == 0;
        if (!seen && n < cap) names[n++] = e->family;
    }
    return n;
}

static int close_impl(ms_set *s, bs_err *err)
{
    int rc = 0;
    if (s->writer) {
        rc = index_write(s, err);
        if (rc == 0) rc = families_write(s, err);
        if (rc == 0 && (attr_write_str(s->file, "description", s->description) < 0 ||
                        attr_write_int(s->file, "invented", s->invented) < 0))
            rc = h5_fail(err, "%s: cannot write the set's metadata", s->partial);
    }
    if (H5Fclose(s->file) < 0 && rc == 0)
        rc = h5_fail(err, "%s: cannot close", s->writer ? s->partial : s->path);
    s->file = -1;
    if (rc == 0 && s->writer && rename(s->partial, s->path) != 0)
        rc = bs_fail(err, BS_EIO, "%s: cannot rename %s onto it: %s", s->path, s->partial, strerror(errno));
    return rc;
}

int ms_close(ms_set *s, bs_err *err)
{
    if (s->closed || s->file < 0) return 0;
    int rc;
    H5E_BEGIN_TRY
    {
        rc = close_impl(s, err);
    }
    H5E_END_TRY;
    s->closed = rc == 0;
    return rc;
}

void ms_free(ms_set *s)
{
    if (!s) return;
    if (s->file >= 0) {
        H5E_BEGIN_TRY
        {
            H5Fclose(s->file);
        }
        H5E_END_TRY;
    }
    if (s->writer && !s->closed && s->partial[0]) unlink(s->partial);
    free(s->entries);
    free(s->by_id);
    free(s);
}

/* ---- reader ---- */

static int check_header(ms_set *s, bs_err *err)
{
    char format[64];
    if (attr_read_str(s->file, "format", format, sizeof format) < 0 || strcmp(format, MS_FORMAT) != 0)
        return read_fail(err, BS_EPARSE,
                         "%s: an HDF5 file but not a bandsieve material set (no format "
                         "attribute \"%s\")",
                         s->path, MS_FORMAT);
    int version = 0;
    if (attr_read_int(s->file, "format_version", &version) < 0 || version != MS_FORMAT_VERSION)
        return bs_fail(err, BS_EPARSE, "%s: material-set format version %d, this program reads version %d",
                       s->path, version, MS_FORMAT_VERSION);
    attr_read_str(s->file, "description", s->description, sizeof s->description);
    if (attr_read_int(s->file, "invented", &s->invented) < 0) s->invented = 0;
    return 0;
}

static int open_impl(const char *path, ms_set **out, bs_err *err)
{
    FILE *probe = fopen(path, "rb");
    if (!probe) return bs_fail(err, BS_EIO, "%s: cannot open material set: %s", path, strerror(errno));
    fclose(probe);
    if (H5Fis_hdf5(path) <= 0)
        return bs_fail(err, BS_EPARSE, "%s: not an HDF5 file, so not a bandsieve material set", path);
    ms_set *s = calloc(1, sizeof *s);
    if (!s) return bs_fail(err, BS_ENOMEM, "out of memory for a material set");
    s->file = -1;
    snprintf(s->path, sizeof s->path, "%s", path);
    int rc = 0;
    hid_t fapl = H5Pcreate(H5P_FILE_ACCESS);
#if H5_VERSION_GE(1, 10, 7)
    /* Readers never modify the file; locks would only fail on file systems without flock
     * (common on cluster scratch) when many ranks open the set at once. */
    if (fapl >= 0) H5Pset_file_locking(fapl, 0, 1);
#endif
    s->file = fapl < 0 ? -1 : H5Fopen(path, H5F_ACC_RDONLY, fapl);
    if (fapl >= 0) H5Pclose(fapl);
    if (s->file < 0) rc = h5_fail(err, "%s: cannot open material set", path);
    if (rc == 0) rc = check_header(s, err);
    if (rc == 0) rc = index_read(s, err);
    if (rc == 0) rc = families_read(s, err);
    if (rc != 0)
        ms_free(s);
    else
        *out = s;
    return rc;
}

int ms_open(const char *path, ms_set **out, bs_err *err)
{
    *out = NULL;
    int rc;
    H5E_BEGIN_TRY
    {
        rc = open_impl(path, out, err);
    }
    H5E_END_TRY;
    return rc;
}

int ms_count(const ms_set *s)
{
    return s->n;
}

const ms_entry *ms_entry_at(const ms_set *s, int i)
{
    return i >= 0 && i < s->n ? &s->entries[i] : NULL;
}

int ms_find(const ms_set *s, const char *id)
{
    if (!s->by_id) {
        /* A set being written (pack) has no order yet; it only looks up ids of its own it just added. */
        for (int i = 0; i < s->n; i++)
            if (strcmp(s->entries[i].id, id) == 0) return i;
        return -1;
    }
    /* The first of equal ids, as the scan found (ids are unique in a set pack wrote). */
    int lo = 0, hi = s->n;
    while (lo < hi) {
        int mid = lo + (hi - lo) / 2;
        if (strcmp(s->entries[s->by_id[mid]].id, id) < 0)
            lo = mid + 1;
        else
            hi = mid;
    }
    return lo < s->n && strcmp(s->entries[s->by_id[lo]].id, id) == 0 ? s->by_id[lo] : -1;
}

const char *ms_description(const ms_set *s)
{
    return s->description;
}
int ms_invented(const ms_set *s)
{
    return s->invented;
}
const char *ms_path(const ms_set *s)
{
    return s->path;
}

typedef struct ms_sizes {
    int norb, nspatial, nR, spinful, status;
} ms_sizes;

/* Sizes from the group's attributes, checked against config.h limits before anything is allocated. */
static int read_sizes(hid_t g, const char *where, ms_sizes *z, bs_err *err)
{
    static const char *const names[] = {"norb", "nspatial", "nR", "spinful"};
    int *dst[] = {&z->norb, &z->nspatial, &z->nR, &z->spinful};
    for (int i = 0; i < 4; i++)
        if (attr_read_int(g, names[i], dst[i]) < 0)
            return read_fail(err, BS_EPARSE, "%s: attribute '%s' missing or not an integer", where, names[i]);
    if (z->norb < 1 || z->norb > BS_MAX_NORB || z->nR < 1 || z->nR > BS_MAX_NR ||
        (long long)z->nR * z->norb * z->norb > BS_MAX_HR_ELEMENTS)
        return bs_fail(err, BS_EINVAL, "%s: sizes norb = %d, nR = %d outside the limits", where, z->norb,
                       z->nR);
    if (z->nspatial != (z->spinful ? z->norb / 2 : z->norb) || (z->spinful && z->norb % 2))
        return bs_fail(err, BS_EPARSE, "%s: nspatial = %d disagrees with norb = %d (spinful = %d)", where,
                       z->nspatial, z->norb, z->spinful);
    return 0;
}

static int read_model_attrs(hid_t g, const char *where, tb_model *m, bs_err *err)
{
    static const char *const names[] = {"dimension", "nocc", "spin_layout", "has_fermi", "has_inversion_op"};
    int *dst[] = {&m->dim, &m->nocc, &m->spin_layout, &m->has_fermi, &m->has_inversion_op};
    for (int i = 0; i < 5; i++)
        if (attr_read_int(g, names[i], dst[i]) < 0)
            return read_fail(err, BS_EPARSE, "%s: attribute '%s' missing or not an integer", where, names[i]);
    if (attr_read_double(g, "fermi_ev", &m->fermi_ev) < 0 ||
        attr_read_str(g, "id", m->id, sizeof m->id) < 0 ||
        attr_read_str(g, "formula", m->formula, sizeof m->formula) < 0 ||
        attr_read_str(g, "source", m->source, sizeof m->source) < 0)
        return read_fail(err, BS_EPARSE, "%s: attributes fermi_ev, id, formula or source missing", where);
    /* Sets written before the key existed have no magnetism attribute: the statement is unknown. */
    if (attr_read_int(g, "magnetism", &m->magnetism) < 0) m->magnetism = TB_MAG_UNKNOWN;
    if (m->magnetism < TB_MAG_UNKNOWN || m->magnetism > TB_MAG_MAGNETIC)
        return read_fail(err, BS_EPARSE, "%s: attribute 'magnetism' is %d, expected 0..2", where,
                         m->magnetism);
    if (H5Aexists(g, "family") > 0) {
        if (attr_read_str(g, "family", m->family, sizeof m->family) < 0 ||
            attr_read_str(g, "family_parameter", m->family_param, sizeof m->family_param) < 0 ||
            attr_read_str(g, "family_unit", m->family_unit, sizeof m->family_unit) < 0 ||
            attr_read_double(g, "family_value", &m->family_value) < 0)
            return read_fail(err, BS_EPARSE,
                             "%s: family attributes incomplete (family, family_parameter, family_unit, "
                             "family_value)",
                             where);
        m->has_family = 1;
    }
    int want = m->spinful ? (m->spin_layout == TB_SPIN_BLOCKS || m->spin_layout == TB_SPIN_INTERLEAVED)
                          : m->spin_layout == TB_SPIN_NONE;
    if (!want)
        return bs_fail(err, BS_EPARSE, "%s: spin_layout %d does not fit spinful = %d", where, m->spin_layout,
                       m->spinful);
    return 0;
}

static int read_model_arrays(hid_t g, const char *where, tb_model *m, bs_err *err)
{
    hsize_t d33[2] = {3, 3}, dR[2] = {(hsize_t)m->nR, 3}, dn[1] = {(hsize_t)m->nR};
    hsize_t dpos[2] = {(hsize_t)m->nspatial, 3}, dl[1] = {(hsize_t)m->nspatial};
    int rc = dset_read(g, where, "lattice", H5T_NATIVE_DOUBLE, 2, d33, m->lattice, err);
    if (rc == 0) rc = dset_read(g, where, "R", H5T_NATIVE_INT, 2, dR, m->R, err);
    if (rc == 0) rc = dset_read(g, where, "deg", H5T_NATIVE_INT, 1, dn, m->deg, err);
    if (rc == 0) rc = read_hoppings(g, where, m, err);
    if (rc == 0) rc = dset_read(g, where, "orb_pos", H5T_NATIVE_DOUBLE, 2, dpos, m->orb_pos, err);
    if (rc == 0) rc = dset_read(g, where, "orb_l", H5T_NATIVE_INT, 1, dl, m->orb_l, err);
    if (rc == 0 && H5Lexists(g, "orb_shape", H5P_DEFAULT) > 0) { /* optional: cards that name shapes */
        m->orb_shape = malloc((size_t)m->nspatial * sizeof *m->orb_shape);
        if (!m->orb_shape) return bs_fail(err, BS_ENOMEM, "%s: out of memory for orbital shapes", where);
        rc = dset_read(g, where, "orb_shape", H5T_NATIVE_INT, 1, dl, m->orb_shape, err);
        for (int i = 0; rc == 0 && i < m->nspatial; i++)
            if (m->orb_shape[i] < -1 || m->orb_shape[i] > 2 * m->orb_l[i])
                rc = bs_fail(err, BS_EINVAL, "%s/orb_shape: orbital %d has shape index %d for l = %d", where,
                             i + 1, m->orb_shape[i], m->orb_l[i]);
    }
    if (rc != 0 || !m->has_inversion_op) return rc;
    size_t n = (size_t)m->norb;
    m->inv_perm = malloc(n * sizeof *m->inv_perm);
    m->inv_sign = malloc(n * sizeof *m->inv_sign);
    m->inv_shift = malloc(n * sizeof *m->inv_shift);
    if (!m->inv_perm || !m->inv_sign || !m->inv_shift)
        return bs_fail(err, BS_ENOMEM, "%s: out of memory for the inversion operator", where);
    hsize_t dv[1] = {n}, dsh[2] = {n, 3};
    rc = dset_read(g, where, "inv_perm", H5T_NATIVE_INT, 1, dv, m->inv_perm, err);
    if (rc == 0) rc = dset_read(g, where, "inv_sign", H5T_NATIVE_DOUBLE, 1, dv, m->inv_sign, err);
    if (rc == 0) rc = dset_read(g, where, "inv_shift", H5T_NATIVE_INT, 2, dsh, m->inv_shift, err);
    for (size_t i = 0; rc == 0 && i < n; i++)
        if (m->inv_perm[i] < 0 || m->inv_perm[i] >= m->norb ||
            (m->inv_sign[i] != 1.0 && m->inv_sign[i] != -1.0))
            rc = bs_fail(err, BS_EINVAL, "%s/inv_perm: state %zu maps to %d with sign %g", where, i + 1,
                         m->inv_perm[i] + 1, m->inv_sign[i]);
    return rc;
}

static int read_stored_error(hid_t g, const char *where, bs_err *err)
{
    int code = BS_EINVAL;
    char text[MS_MAX_TEXT];
    if (attr_read_int(g, "error_code", &code) < 0 || code >= 0) code = BS_EINVAL;
    if (attr_read_str(g, "error", text, sizeof text) < 0)
        snprintf(text, sizeof text, "(no error text stored)");
    return bs_fail(err, code, "%s: stored as broken: %s", where, text);
}

/* Reads the entry named id; validate 0 skips tb_model_validate (for hashing broken entries). */
static int read_impl(const ms_set *s, const char *id, int validate, tb_model **out, bs_err *err)
{
    char where[4400], name[160];
    snprintf(where, sizeof where, "%s:/materials/%s", s->path, id);
    snprintf(name, sizeof name, "materials/%s", id);
    if (H5Lexists(s->file, "materials", H5P_DEFAULT) <= 0 || H5Lexists(s->file, name, H5P_DEFAULT) <= 0)
        return read_fail(err, BS_EPARSE, "%s: group missing", where);
    hid_t g = H5Gopen2(s->file, name, H5P_DEFAULT);
    if (g < 0) return h5_fail(err, "%s: cannot open group", where);
    tb_model *m = NULL;
    ms_sizes z;
    int rc = 0;
    if (attr_read_int(g, "status", &z.status) < 0) {
        rc = read_fail(err, BS_EPARSE, "%s: attribute 'status' missing", where);
        goto done;
    }
    if (z.status == MS_STATUS_ERROR) {
        rc = read_stored_error(g, where, err);
        goto done;
    }
    if ((rc = read_sizes(g, where, &z, err)) != 0) goto done;
    if ((rc = tb_model_create(z.norb, z.nR, z.spinful, &m, err)) != 0) goto done;
    if ((rc = read_model_attrs(g, where, m, err)) != 0) goto done;
    if (strcmp(m->id, id) != 0) {
        rc = bs_fail(err, BS_EPARSE, "%s: attribute id is '%s'", where, m->id);
        goto done;
    }
    if ((rc = read_model_arrays(g, where, m, err)) != 0) goto done;
    if (validate && (rc = tb_model_validate(m, BS_HERMITIAN_TOL_EV, where, err)) != 0) goto done;
    tb_model_fold(m);
    *out = m;
    m = NULL;
done:
    tb_model_free(m);
    H5Gclose(g);
    return rc;
}

int ms_read_id(const ms_set *s, const char *id, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (s->writer) return bs_fail(err, BS_EINVAL, "%s: open for writing, not reading", s->path);
    if (s->file < 0) return bs_fail(err, BS_EINVAL, "%s: closed", s->path);
    if (ms_find(s, id) < 0) return bs_fail(err, BS_EINVAL, "%s: no material '%s' in the set", s->path, id);
    int rc;
    H5E_BEGIN_TRY
    {
        rc = read_impl(s, id, 1, out, err);
    }
    H5E_END_TRY;
    return rc;
}

int ms_read(const ms_set *s, int i, tb_model **out, bs_err *err)
{
    *out = NULL;
    if (i < 0 || i >= s->n)
        return bs_fail(err, BS_EINVAL, "%s: entry %d outside 0..%d", s->path, i, s->n - 1);
    if (s->writer || s->file < 0) return bs_fail(err, BS_EINVAL, "%s: not open for reading", s->path);
    int rc;
    H5E_BEGIN_TRY
    {
        rc = read_impl(s, s->entries[i].id, 1, out, err);
    }
    H5E_END_TRY;
    return rc;
}

/* ---- content hashes, cards, copies ---- */

static int content_impl(const ms_set *s, int i, char hex[65], bs_err *err)
{
    const ms_entry *e = &s->entries[i];
    if (e->status == MS_STATUS_ERROR) {
        char name[160], where[4400], text[MS_MAX_TEXT];
        int code = BS_EINVAL;
        snprintf(name, sizeof name, "materials/%s", e->id);
        snprintf(where, sizeof where, "%s:/materials/%s", s->path, e->id);
        hid_t g = H5Lexists(s->file, name, H5P_DEFAULT) > 0 ? H5Gopen2(s->file, name, H5P_DEFAULT) : -1;
        if (g < 0) return bs_fail(err, BS_EPARSE, "%s: group missing", where);
        if (attr_read_int(g, "error_code", &code) < 0) code = BS_EINVAL;
        if (attr_read_str(g, "error", text, sizeof text) < 0) text[0] = '\0';
        H5Gclose(g);
        error_content(e->id, code, text, hex);
        return 0;
    }
    tb_model *m = NULL;
    int rc = read_impl(s, e->id, 0, &m, err);
    if (rc == 0) tb_content_hash(m, hex);
    tb_model_free(m);
    return rc;
}

int ms_content(const ms_set *s, int i, char hex[65], bs_err *err)
{
    hex[0] = '\0';
    if (i < 0 || i >= s->n)
        return bs_fail(err, BS_EINVAL, "%s: entry %d outside 0..%d", s->path, i, s->n - 1);
    if (s->entries[i].content[0]) {
        memcpy(hex, s->entries[i].content, 65);
        return 0;
    }
    if (s->writer || s->file < 0) return bs_fail(err, BS_EINVAL, "%s: not open for reading", s->path);
    int rc;
    H5E_BEGIN_TRY
    {
        rc = content_impl(s, i, hex, err);
    }
    H5E_END_TRY;
    /* Computed once per open set: the index is ours, and the hash cannot change while it is open. */
    if (rc == 0) memcpy(((ms_set *)s)->entries[i].content, hex, 65);
    return rc;
}

static int by_entry_id(const void *a, const void *b)
{
    const ms_entry *x = *(const ms_entry *const *)a, *y = *(const ms_entry *const *)b;
    return strcmp(x->id, y->id);
}

int ms_set_content(const ms_set *s, char hex[65], bs_err *err)
{
    hex[0] = '\0';
    const ms_entry **order = malloc(((size_t)s->n + 1) * sizeof *order);
    if (!order) return bs_fail(err, BS_ENOMEM, "%s: out of memory", s->path);
    int rc = 0;
    for (int i = 0; i < s->n && rc == 0; i++) {
        char h[65];
        rc = ms_content(s, i, h, err);
        order[i] = &s->entries[i];
    }
    if (rc == 0) {
        qsort(order, (size_t)s->n, sizeof *order, by_entry_id);
        bs_sha256 sh;
        bs_sha256_init(&sh);
        for (int i = 0; i < s->n; i++) {
            bs_sha256_update(&sh, order[i]->id, strlen(order[i]->id));
            bs_sha256_update(&sh, " ", 1);
            bs_sha256_update(&sh, order[i]->content, 64);
            bs_sha256_update(&sh, "\n", 1);
        }
        unsigned char d[BS_SHA256_BYTES];
        bs_sha256_final(&sh, d);
        bs_sha256_hex(d, hex);
    }
    free(order);
    return rc;
}

static int read_card_impl(const ms_set *s, const char *id, char **json, bs_err *err)
{
    char name[200];
    snprintf(name, sizeof name, "materials/%s/card", id);
    if (H5Lexists(s->file, "materials", H5P_DEFAULT) <= 0) return 0;
    char grp[160];
    snprintf(grp, sizeof grp, "materials/%s", id);
    if (H5Lexists(s->file, grp, H5P_DEFAULT) <= 0 || H5Lexists(s->file, name, H5P_DEFAULT) <= 0) return 0;
    hid_t d = H5Dopen2(s->file, name, H5P_DEFAULT);
    if (d < 0) return h5_fail(err, "%s:/%s: cannot open", s->path, name);
    hid_t ft = H5Dget_type(d);
    int rc = 0;
    size_t size = ft >= 0 && H5Tget_class(ft) == H5T_STRING && !H5Tis_variable_str(ft) ? H5Tget_size(ft) : 0;
    char *buf = size > 0 && size <= (size_t)(64L << 20) ? calloc(size + 1, 1) : NULL;
    if (!buf)
        rc = bs_fail(err, BS_EPARSE, "%s:/%s: expected a fixed-length string", s->path, name);
    else if (H5Dread(d, ft, H5S_ALL, H5S_ALL, H5P_DEFAULT, buf) < 0)
        rc = h5_fail(err, "%s:/%s: cannot read", s->path, name);
    if (ft >= 0) H5Tclose(ft);
    H5Dclose(d);
    if (rc == 0)
        *json = buf;
    else
        free(buf);
    return rc;
}

int ms_read_card(const ms_set *s, int i, char **json, bs_err *err)
{
    *json = NULL;
    if (i < 0 || i >= s->n)
        return bs_fail(err, BS_EINVAL, "%s: entry %d outside 0..%d", s->path, i, s->n - 1);
    if (s->writer || s->file < 0) return bs_fail(err, BS_EINVAL, "%s: not open for reading", s->path);
    /* An error entry is only an error text (add_error_impl writes no card): no look-up in the
     * file, which a screen's set-up would otherwise pay once per such entry. */
    if (s->entries[i].status == MS_STATUS_ERROR) return 0;
    int rc;
    H5E_BEGIN_TRY
    {
        rc = read_card_impl(s, s->entries[i].id, json, err);
    }
    H5E_END_TRY;
    return rc;
}

static int copy_impl(ms_set *dst, const ms_set *src, int i, bs_err *err)
{
    ms_entry e = src->entries[i];
    if (!dst->writer || dst->closed) return bs_fail(err, BS_EINVAL, "%s: not open for writing", dst->path);
    char name[160];
    snprintf(name, sizeof name, "materials/%s", e.id);
    if (H5Lexists(dst->file, name, H5P_DEFAULT) > 0)
        return bs_fail(err, BS_EINVAL, "%s: material id '%s' already in the set", dst->path, e.id);
    if (H5Ocopy(src->file, name, dst->file, name, H5P_DEFAULT, H5P_DEFAULT) < 0)
        return h5_fail(err, "%s:/%s: cannot copy into %s", src->path, name, dst->partial);
    return push_entry(dst, &e, err);
}

int ms_copy_entry(ms_set *dst, const ms_set *src, int i, bs_err *err)
{
    if (i < 0 || i >= src->n)
        return bs_fail(err, BS_EINVAL, "%s: entry %d outside 0..%d", src->path, i, src->n - 1);
    char hex[65];
    int rc = ms_content(src, i, hex, err);
    if (rc != 0) return rc;
    H5E_BEGIN_TRY
    {
        rc = copy_impl(dst, src, i, err);
    }
    H5E_END_TRY;
    return rc;
}
