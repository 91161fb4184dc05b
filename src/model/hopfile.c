/* Reader and writer of the plain-text hopping table. The reader is a line scanner over a large
 * read buffer with its own number parser, because a 256-orbital, 1000-vector table is 65 million
 * lines and the C library's strtod would then dominate the load time of a screen. */
#include "bandsieve/hopfile.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "bandsieve/config.h"

#define HOP_BUF_BYTES (4u << 20) /* one read buffer; also the longest line accepted */
#define HOP_MAX_R     1000000    /* |R_i| above this is not a lattice vector of any real table */
#define HOP_MAX_DEG   1000000    /* a Wigner-Seitz weight is at most a few dozen in practice */
#define HOP_PER_LINE  15         /* degeneracy weights per line, fixed by the format */

typedef struct hop_reader {
    FILE *fp;
    const char *path;
    char *buf;
    size_t len, pos;
    int eof;
    long line; /* number of the line last returned, 1-based */
} hop_reader;

/* Returns 1 with [*s, *e) the next line (without the newline), 0 at end of file, or an error code. */
static int rd_line(hop_reader *r, const char **s, const char **e, bs_err *err)
{
    for (;;) {
        char *start = r->buf + r->pos;
        char *nl = memchr(start, '\n', r->len - r->pos);
        if (nl) {
            *s = start;
            *e = nl;
            r->pos = (size_t)(nl - r->buf) + 1;
            r->line++;
            return 1;
        }
        if (r->eof) {
            if (r->pos == r->len) return 0;
            *s = start;
            *e = r->buf + r->len;
            r->pos = r->len;
            r->line++;
            return 1;
        }
        size_t rest = r->len - r->pos;
        if (rest == HOP_BUF_BYTES)
            return bs_fail(err, BS_EPARSE, "%s:%ld: line longer than %u bytes", r->path, r->line + 1,
                           HOP_BUF_BYTES);
        memmove(r->buf, start, rest);
        r->len = rest;
        r->pos = 0;
        size_t got = fread(r->buf + rest, 1, HOP_BUF_BYTES - rest, r->fp);
        r->len += got;
        if (got < HOP_BUF_BYTES - rest) {
            if (ferror(r->fp))
                return bs_fail(err, BS_EIO, "%s:%ld: read error: %s", r->path, r->line + 1, strerror(errno));
            r->eof = 1;
        }
    }
}

static int is_space(char c)
{
    return c == ' ' || c == '\t' || c == '\r' || c == '\f' || c == '\v';
}

static const char *skip_space(const char *p, const char *e)
{
    while (p < e && is_space(*p))
        p++;
    return p;
}

static const char *token_end(const char *p, const char *e)
{
    while (p < e && !is_space(*p))
        p++;
    return p;
}

static int count_fields(const char *p, const char *e)
{
    int n = 0;
    for (p = skip_space(p, e); p < e; p = skip_space(token_end(p, e), e))
        n++;
    return n;
}

enum { TOK_OK = 0, TOK_NONE = 1, TOK_BAD = 2, TOK_NONFINITE = 3, TOK_BAD_INT = 4 };

/* Parses a decimal integer token at *p (after blanks); advances *p past it. */
static int tok_int(const char **p, const char *e, long long *v)
{
    const char *q = skip_space(*p, e);
    if (q == e) return TOK_NONE;
    const char *end = token_end(q, e);
    *p = end;
    int neg = 0;
    if (*q == '+' || *q == '-') neg = *q++ == '-';
    if (q == end || end - q > 18) return TOK_BAD_INT;
    long long x = 0;
    for (; q < end; q++) {
        if (*q < '0' || *q > '9') return TOK_BAD_INT;
        x = x * 10 + (*q - '0');
    }
    *v = neg ? -x : x;
    return TOK_OK;
}

static const double hop_pow10[23] = {1e0,  1e1,  1e2,  1e3,  1e4,  1e5,  1e6,  1e7,  1e8,  1e9,  1e10, 1e11,
                                     1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22};

/* Slow path: the C library's correctly rounded conversion of a NUL-terminated copy. */
static int tok_double_libc(const char *q, const char *end, double *v)
{
    char tmp[128];
    size_t len = (size_t)(end - q);
    if (len >= sizeof tmp) return TOK_BAD;
    memcpy(tmp, q, len);
    tmp[len] = '\0';
    char *stop = NULL;
    *v = strtod(tmp, &stop);
    if (stop != tmp + len) return TOK_BAD;
    return isfinite(*v) ? TOK_OK : TOK_NONFINITE;
}

/* Parses a floating-point token. Fast path (Clinger's, Proc. ACM SIGPLAN PLDI 1990, p. 92): when
 * the significand has at most 15 digits and the decimal exponent is within +-22, significand and
 * power of ten are exact doubles and one IEEE multiplication or division rounds correctly, so the
 * result equals strtod's. Everything else (17-digit round-trip output, nan, inf) goes to strtod. */
static int tok_double(const char **p, const char *e, double *v)
{
    const char *q = skip_space(*p, e);
    if (q == e) return TOK_NONE;
    const char *end = token_end(q, e);
    *p = end;
    const char *s = q;
    int neg = 0;
    if (*s == '+' || *s == '-') neg = *s++ == '-';
    uint64_t mant = 0;
    int nsig = 0, exp10 = 0, ndig = 0, slow = 0;
    for (; s < end && *s >= '0' && *s <= '9'; s++, ndig++) {
        if (mant == 0 && *s == '0') continue;
        if (nsig >= 15) {
            slow = 1;
            continue;
        }
        mant = mant * 10 + (uint64_t)(*s - '0');
        nsig++;
    }
    if (s < end && *s == '.') {
        for (s++; s < end && *s >= '0' && *s <= '9'; s++, ndig++) {
            if (mant == 0 && *s == '0') {
                exp10--;
                continue;
            }
            if (nsig >= 15) {
                slow = 1;
                continue;
            }
            mant = mant * 10 + (uint64_t)(*s - '0');
            nsig++;
            exp10--;
        }
    }
    if (ndig > 0 && s < end && (*s == 'e' || *s == 'E')) {
        s++;
        int eneg = 0;
        if (s < end && (*s == '+' || *s == '-')) eneg = *s++ == '-';
        int ex = 0, nex = 0;
        for (; s < end && *s >= '0' && *s <= '9'; s++, nex++)
            if (ex < 100000) ex = ex * 10 + (*s - '0');
        if (nex == 0) return TOK_BAD;
        exp10 += eneg ? -ex : ex;
    }
    if (ndig == 0 || s != end || slow || exp10 < -22 || exp10 > 22) return tok_double_libc(q, end, v);
    double x = (double)mant;
    x = exp10 >= 0 ? x * hop_pow10[exp10] : x / hop_pow10[-exp10];
    *v = neg ? -x : x;
    return TOK_OK;
}

/* Message fragment for a token that failed to parse: the text itself, truncated. */
static void token_text(const char *line_s, const char *line_e, int field, char *out, size_t cap)
{
    const char *p = skip_space(line_s, line_e);
    for (int i = 0; i < field && p < line_e; i++)
        p = skip_space(token_end(p, line_e), line_e);
    const char *q = token_end(p, line_e);
    size_t len = (size_t)(q - p);
    if (len >= cap) len = cap - 1;
    memcpy(out, p, len);
    out[len] = '\0';
}

static int fail_token(hop_reader *r, int tok, const char *s, const char *e, int field, const char *what,
                      bs_err *err)
{
    char text[40];
    token_text(s, e, field, text, sizeof text);
    if (tok == TOK_NONFINITE)
        return bs_fail(err, BS_EPARSE, "%s:%ld: field %d (%s) is not finite: '%s'", r->path, r->line,
                       field + 1, what, text);
    return bs_fail(err, BS_EPARSE, "%s:%ld: field %d (%s): expected %s, found '%s'", r->path, r->line,
                   field + 1, what, tok == TOK_BAD_INT ? "an integer" : "a number", text);
}

/* Reads one header line holding a single integer. */
static int read_header_int(hop_reader *r, const char *what, long long *v, bs_err *err)
{
    const char *s, *e;
    int rc = rd_line(r, &s, &e, err);
    if (rc < 0) return rc;
    if (rc == 0)
        return bs_fail(err, BS_EPARSE, "%s:%ld: file ends before the %s line", r->path, r->line + 1, what);
    int nf = count_fields(s, e);
    if (nf != 1)
        return bs_fail(err, BS_EPARSE, "%s:%ld: expected 1 field (%s), found %d", r->path, r->line, what, nf);
    const char *p = s;
    int tok = tok_int(&p, e, v);
    if (tok != TOK_OK) return fail_token(r, TOK_BAD_INT, s, e, 0, what, err);
    return 0;
}

static int read_header(hop_reader *r, int spinful, int *norb, int *nR, bs_err *err)
{
    const char *s, *e;
    int rc = rd_line(r, &s, &e, err);
    if (rc < 0) return rc;
    if (rc == 0) return bs_fail(err, BS_EPARSE, "%s:1: empty file, expected a comment line", r->path);
    long long n = 0, nr = 0;
    if ((rc = read_header_int(r, "number of orbitals", &n, err)) != 0) return rc;
    if (n < 1 || n > BS_MAX_NORB)
        return bs_fail(err, BS_EINVAL, "%s:2: number of orbitals %lld outside 1..%d", r->path, n,
                       BS_MAX_NORB);
    if (spinful && n % 2 != 0)
        return bs_fail(err, BS_EINVAL, "%s:2: spinful model needs an even number of orbitals, found %lld",
                       r->path, n);
    if ((rc = read_header_int(r, "number of lattice vectors", &nr, err)) != 0) return rc;
    if (nr < 1 || nr > BS_MAX_NR)
        return bs_fail(err, BS_EINVAL, "%s:3: number of lattice vectors %lld outside 1..%d", r->path, nr,
                       BS_MAX_NR);
    if (nr * n * n > BS_MAX_HR_ELEMENTS)
        return bs_fail(err, BS_EINVAL,
                       "%s:3: %lld lattice vectors x %lld^2 orbitals exceeds the limit of "
                       "%lld hopping elements",
                       r->path, nr, n, (long long)BS_MAX_HR_ELEMENTS);
    *norb = (int)n;
    *nR = (int)nr;
    return 0;
}

static int read_weights(hop_reader *r, tb_model *m, bs_err *err)
{
    int done = 0;
    while (done < m->nR) {
        const char *s, *e;
        int rc = rd_line(r, &s, &e, err);
        if (rc < 0) return rc;
        if (rc == 0)
            return bs_fail(err, BS_EPARSE, "%s:%ld: file ends after %d of %d degeneracy weights", r->path,
                           r->line + 1, done, m->nR);
        int want = m->nR - done < HOP_PER_LINE ? m->nR - done : HOP_PER_LINE;
        int nf = count_fields(s, e);
        if (nf != want)
            return bs_fail(err, BS_EPARSE,
                           "%s:%ld: expected %d degeneracy weights on this line (15 per "
                           "line, %d in all), found %d fields",
                           r->path, r->line, want, m->nR, nf);
        const char *p = s;
        for (int i = 0; i < want; i++) {
            long long w = 0;
            if (tok_int(&p, e, &w) != TOK_OK) return fail_token(r, TOK_BAD_INT, s, e, i, "degeneracy", err);
            if (w < 1 || w > HOP_MAX_DEG)
                return bs_fail(err, BS_EINVAL,
                               "%s:%ld: degeneracy weight %lld of lattice vector %d "
                               "outside 1..%d",
                               r->path, r->line, w, done + 1, HOP_MAX_DEG);
            m->deg[done++] = (int)w;
        }
    }
    return 0;
}

static const char *const hop_field_names[7] = {"R1", "R2", "R3", "m", "n", "Re", "Im"};

/* Parses one hopping line into R, the orbital pair and the value. A wrong field count is reported
 * before a bad number, since a missing field shifts every other one. */
static int parse_hop_line(hop_reader *r, const char *s, const char *e, long long v[5], double *re, double *im,
                          bs_err *err)
{
    const char *p = s;
    int f = 0, tok = TOK_OK;
    for (; f < 5 && tok == TOK_OK; f++)
        tok = tok_int(&p, e, &v[f]);
    if (tok == TOK_OK) tok = tok_double(&p, e, re), f = 6;
    if (tok == TOK_OK) tok = tok_double(&p, e, im), f = 7;
    if (tok == TOK_OK && skip_space(p, e) == e) return 0;
    int nf = count_fields(s, e);
    if (nf != 7)
        return bs_fail(err, BS_EPARSE, "%s:%ld: expected 7 fields (R1 R2 R3 m n Re Im), found %d", r->path,
                       r->line, nf);
    return fail_token(r, tok, s, e, f - 1, hop_field_names[f - 1], err);
}

static long block_line(long first, int r, int n)
{
    return first + (long)r * n * n;
}

static int check_hop_fields(hop_reader *r, tb_model *m, int ir, int row, int col, const long long v[5],
                            long first_line, bs_err *err)
{
    int n = m->norb;
    for (int d = 0; d < 3; d++)
        if (v[d] < -HOP_MAX_R || v[d] > HOP_MAX_R)
            return bs_fail(err, BS_EINVAL, "%s:%ld: lattice-vector component %lld outside -%d..%d", r->path,
                           r->line, v[d], HOP_MAX_R, HOP_MAX_R);
    if (row == 0 && col == 0) {
        for (int d = 0; d < 3; d++)
            m->R[ir][d] = (int)v[d];
    } else if (v[0] != m->R[ir][0] || v[1] != m->R[ir][1] || v[2] != m->R[ir][2]) {
        return bs_fail(err, BS_EPARSE,
                       "%s:%ld: R = (%lld,%lld,%lld) inside the block of R = (%d,%d,%d) "
                       "that starts at line %ld; expected n^2 = %d lines per R",
                       r->path, r->line, v[0], v[1], v[2], m->R[ir][0], m->R[ir][1], m->R[ir][2],
                       block_line(first_line, ir, n), n * n);
    }
    if (v[3] < 1 || v[3] > n || v[4] < 1 || v[4] > n)
        return bs_fail(err, BS_EINVAL, "%s:%ld: orbital index m = %lld, n = %lld outside 1..%d", r->path,
                       r->line, v[3], v[4], n);
    if (v[3] != row + 1 || v[4] != col + 1)
        return bs_fail(err, BS_EPARSE,
                       "%s:%ld: orbital indices out of order: expected m = %d, n = %d "
                       "(m varies fastest), found m = %lld, n = %lld",
                       r->path, r->line, row + 1, col + 1, v[3], v[4]);
    return 0;
}

/* The table lists each block column by column; the model stores it row by row. Writing the
 * values in file order and transposing each block in place afterwards (in tiles, to stay in
 * cache) avoids a store with a stride of n elements per line, which for n = 256 is a cache and
 * TLB miss on every line. */
static void transpose_block(double complex *A, int n)
{
    enum { TILE = 32 };
    for (int i0 = 0; i0 < n; i0 += TILE)
        for (int j0 = i0; j0 < n; j0 += TILE)
            for (int i = i0; i < i0 + TILE && i < n; i++)
                for (int j = (j0 == i0 ? i + 1 : j0); j < j0 + TILE && j < n; j++) {
                    double complex t = A[(size_t)i * n + j];
                    A[(size_t)i * n + j] = A[(size_t)j * n + i];
                    A[(size_t)j * n + i] = t;
                }
}

/* The hot loop: N_R*n*n lines, one hopping each. */
static int read_hoppings(hop_reader *r, tb_model *m, long *first_line, bs_err *err)
{
    int n = m->norb;
    *first_line = r->line + 1;
    long long total = (long long)m->nR * n * n, done = 0;
    /* Folded while read (tb_model_fold_next): a block equal to the adjoint of its -R's is not kept,
     * so the pages of the array past the kept blocks are never touched (a 128-state table of 729
     * vectors peaks at 96 MB instead of 191 MB). Without room for the map it reads unfolded. */
    int nblock = 0;
    m->hsrc = malloc((size_t)m->nR * sizeof *m->hsrc);
    for (int ir = 0; ir < m->nR; ir++) {
        double complex *H = m->H + (size_t)(m->hsrc ? nblock : ir) * n * n;
        for (int col = 0; col < n; col++)
            for (int row = 0; row < n; row++, done++) {
                const char *s, *e;
                int rc = rd_line(r, &s, &e, err);
                if (rc < 0) return rc;
                if (rc == 0)
                    return bs_fail(err, BS_EPARSE,
                                   "%s:%ld: file ends after %lld of %lld hopping lines "
                                   "(N_R = %d x n^2 = %d)",
                                   r->path, r->line + 1, done, total, m->nR, n * n);
                long long v[5] = {0, 0, 0, 0, 0};
                double re = 0.0, im = 0.0;
                if ((rc = parse_hop_line(r, s, e, v, &re, &im, err)) != 0) return rc;
                if ((rc = check_hop_fields(r, m, ir, row, col, v, *first_line, err)) != 0) return rc;
                H[(size_t)col * n + row] = CMPLX(re, im);
            }
        transpose_block(H, n);
        if (m->hsrc) tb_model_fold_next(m, ir, &nblock);
    }
    return 0;
}

typedef struct hop_rkey {
    int R[3];
    int index;
} hop_rkey;

static int rkey_cmp(const void *pa, const void *pb)
{
    const hop_rkey *a = pa, *b = pb;
    for (int d = 0; d < 3; d++)
        if (a->R[d] != b->R[d]) return a->R[d] < b->R[d] ? -1 : 1;
    return a->index < b->index ? -1 : a->index > b->index;
}

/* Duplicate R blocks by sorting (N_R log N_R), reporting the later block's first line. */
static int check_duplicates(const hop_reader *r, const tb_model *m, long first_line, bs_err *err)
{
    hop_rkey *keys = malloc((size_t)m->nR * sizeof *keys);
    if (!keys) return bs_fail(err, BS_ENOMEM, "%s: out of memory checking lattice vectors", r->path);
    for (int i = 0; i < m->nR; i++) {
        memcpy(keys[i].R, m->R[i], sizeof keys[i].R);
        keys[i].index = i;
    }
    qsort(keys, (size_t)m->nR, sizeof *keys, rkey_cmp);
    int rc = 0;
    for (int i = 1; i < m->nR && rc == 0; i++)
        if (memcmp(keys[i].R, keys[i - 1].R, sizeof keys[i].R) == 0)
            rc = bs_fail(err, BS_EINVAL, "%s:%ld: R = (%d,%d,%d) appears twice (blocks at lines %ld and %ld)",
                         r->path, block_line(first_line, keys[i].index, m->norb), keys[i].R[0], keys[i].R[1],
                         keys[i].R[2], block_line(first_line, keys[i - 1].index, m->norb),
                         block_line(first_line, keys[i].index, m->norb));
    free(keys);
    return rc;
}

static int check_trailing(hop_reader *r, bs_err *err)
{
    const char *s, *e;
    int rc;
    while ((rc = rd_line(r, &s, &e, err)) == 1)
        if (skip_space(s, e) != e)
            return bs_fail(err, BS_EPARSE, "%s:%ld: unexpected content after the last hopping line", r->path,
                           r->line);
    return rc;
}

int hop_read(const char *path, int spinful, tb_model **out, bs_err *err)
{
    *out = NULL;
    hop_reader r = {.path = path};
    tb_model *m = NULL;
    int rc = 0;
    /* O_NONBLOCK: opening a FIFO for reading would otherwise wait for a writer forever; the
     * table must be a regular file (its size bounds what is read). */
    int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
    if (fd < 0) return bs_fail(err, BS_EIO, "%s: cannot open hopping table: %s", path, strerror(errno));
    struct stat st;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        close(fd);
        return bs_fail(err, BS_EIO, "%s: the hopping table is not a regular file (a FIFO, device or folder)",
                       path);
    }
    fcntl(fd, F_SETFL, fcntl(fd, F_GETFL) & ~O_NONBLOCK);
    r.fp = fdopen(fd, "rb");
    if (!r.fp) {
        close(fd);
        return bs_fail(err, BS_EIO, "%s: cannot open hopping table: %s", path, strerror(errno));
    }
    r.buf = malloc(HOP_BUF_BYTES);
    if (!r.buf) {
        rc = bs_fail(err, BS_ENOMEM, "%s: out of memory for the read buffer", path);
        goto done;
    }
    int norb = 0, nR = 0;
    long first_line = 0;
    if ((rc = read_header(&r, spinful, &norb, &nR, err)) != 0) goto done;
    if ((rc = tb_model_create(norb, nR, spinful, &m, err)) != 0) {
        bs_err_context(err, "%s: ", path);
        goto done;
    }
    if ((rc = read_weights(&r, m, err)) != 0) goto done;
    if ((rc = read_hoppings(&r, m, &first_line, err)) != 0) goto done;
    if ((rc = check_trailing(&r, err)) != 0) goto done;
    if ((rc = check_duplicates(&r, m, first_line, err)) != 0) goto done;
    tb_model_fold(m);
    *out = m;
    m = NULL;
done:
    tb_model_free(m);
    free(r.buf);
    fclose(r.fp);
    return rc;
}

static void write_comment(FILE *fp, const char *comment)
{
    if (!comment || !*comment) comment = "hopping table written by bandsieve";
    for (const char *c = comment; *c; c++)
        fputc(*c == '\n' || *c == '\r' ? ' ' : *c, fp);
    fputc('\n', fp);
}

int hop_write(const char *path, const tb_model *m, const char *comment, bs_err *err)
{
    FILE *fp = fopen(path, "wb");
    if (!fp) return bs_fail(err, BS_EIO, "%s: cannot create hopping table: %s", path, strerror(errno));
    int n = m->norb;
    write_comment(fp, comment);
    fprintf(fp, "%d\n%d\n", n, m->nR);
    for (int r = 0; r < m->nR; r++)
        fprintf(fp, "%5d%s", m->deg[r], (r % HOP_PER_LINE == HOP_PER_LINE - 1 || r == m->nR - 1) ? "\n" : "");
    for (int r = 0; r < m->nR && !ferror(fp); r++) {
        for (int col = 0; col < n; col++)
            for (int row = 0; row < n; row++) {
                double complex h = tb_hop(m, r, row, col);
                fprintf(fp, "%4d %4d %4d %5d %5d %.17g %.17g\n", m->R[r][0], m->R[r][1], m->R[r][2], row + 1,
                        col + 1, creal(h), cimag(h));
            }
    }
    int bad = ferror(fp);
    int saved = errno;
    if (fclose(fp) != 0 && !bad) {
        bad = 1;
        saved = errno;
    }
    if (bad) return bs_fail(err, BS_EIO, "%s: write failed: %s", path, strerror(saved));
    return 0;
}
