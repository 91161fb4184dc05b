/* `bandsieve symmetry`: the crystal symmetry of one material (space group of its sites, the
 * operations its Hamiltonian keeps), symmetry eigenvalues of the bands at given k, and with
 * --indices the Z4 indicator and mirror Chern numbers. */
#include <complex.h>
#include <getopt.h>
#include <lapacke.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "bandsieve/crystal.h"
#include "bandsieve/crystalline.h"
#include "bandsieve/hk.h"
#include "bandsieve/parity.h"
#include "bandsieve/source.h"
#include "bandsieve/symmetry.h"
#include "cliutil.h"
#include "commands.h"

static void symmetry_help(FILE *out)
{
    fprintf(out,
            "usage: bandsieve symmetry SOURCE [--k k1,k2,k3 ...] [--indices] [--json]\n"
            "                          [--site-tol A] [--tol T]\n\n"
            "The crystal symmetry of SOURCE: the space group of the structure its orbital centres\n"
            "describe (orbitals within --site-tol Angstrom of each other are one site; sites with the\n"
            "same list of l are one species), then every operation checked on H(k): only those the\n"
            "Hamiltonian keeps (relative residual <= --tol) are 'kept'.\n"
            "With --k, the little group of each k-point and the eigenvalues of its operations on each\n"
            "band multiplet (bands degenerate within 1e-6 eV). With --indices, the Z4 indicator from\n"
            "inversion parities (3D, time reversal and inversion) and the mirror Chern number of every\n"
            "invariant plane of a kept mirror.\n"
            "Orbitals of a shell are taken in the order of their card's \"shape\" names or, without\n"
            "them, pz px py; dz2 dxz dyz dx2-y2 dxy; fz3 fxz2 fyz2 fz(x2-y2) fxyz fx(x2-3y2) fy(3x2-y2).\n"
            "SOURCE is a card (path.json), SET.h5:ID, or model:NAME[:key=val,...].\n\n"
            "  --k K          a reduced k-point, repeatable\n"
            "  --indices      Z4 and mirror Chern numbers\n"
            "  --json         one JSON object\n"
            "  --site-tol A   site tolerance in Angstrom (default 0.05)\n"
            "  --tol T        largest relative residual of a kept operation (default 1e-6)\n"
            "  -h, --help     this text\n");
}

static cJSON *op_json(const cry_op *op)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddStringToObject(o, "kind", op->kind);
    cJSON_AddItemToObject(o, "axis", cJSON_CreateDoubleArray(op->axis, 3));
    cJSON *W = cJSON_AddArrayToObject(o, "W");
    for (int i = 0; i < 3; i++)
        cJSON_AddItemToArray(W, cJSON_CreateIntArray(op->W[i], 3));
    cJSON_AddItemToObject(o, "t", cJSON_CreateDoubleArray(op->t, 3));
    cJSON_AddBoolToObject(o, "kept", op->verified);
    cJSON_AddNumberToObject(o, "residual", op->residual);
    return o;
}

/* Band multiplets at k and the eigenvalues of every little-group operation on each. */
static int kpoint_report(const tb_model *m, const cry_info *c, const double k[3], cJSON *arr, int json,
                         bs_err *err)
{
    int n = m->norb, *lg = malloc((size_t)cry_nops(c) * sizeof *lg);
    double *w = malloc((size_t)n * sizeof *w);
    double complex *H = malloc((size_t)n * n * sizeof *H), *ev = malloc((size_t)n * sizeof *ev);
    if (!lg || !w || !H || !ev) {
        free(lg), free(w), free(H), free(ev);
        return bs_fail(err, BS_ENOMEM, "out of memory");
    }
    int nl = cry_little_group(c, k, lg), rc = 0;
    hk_build_direct(m, k, H);
    if (LAPACKE_zheevd(LAPACK_COL_MAJOR, 'N', 'U', n, H, n, w) != 0)
        rc = bs_fail(err, BS_ENUMERIC, "zheevd failed");
    cJSON *kj = cJSON_CreateObject();
    cJSON_AddItemToObject(kj, "k", cJSON_CreateDoubleArray(k, 3));
    cJSON_AddItemToObject(kj, "little_group", cJSON_CreateIntArray(lg, nl));
    cJSON *mults = cJSON_AddArrayToObject(kj, "multiplets");
    if (!json) printf("\nk = (%g, %g, %g): little group of %d kept operations\n", k[0], k[1], k[2], nl);
    for (int b = 0; rc == 0 && b < n;) {
        int e = b + 1;
        while (e < n && w[e] - w[b] < 1e-6)
            e++;
        cJSON *mj = cJSON_CreateObject();
        int bands[2] = {b + 1, e};
        cJSON_AddItemToObject(mj, "bands", cJSON_CreateIntArray(bands, 2));
        cJSON_AddNumberToObject(mj, "energy_eV", w[b]);
        cJSON *evs = cJSON_AddObjectToObject(mj, "eigenvalues");
        if (!json)
            printf("  bands %d-%d at %.6f eV%s\n", b + 1, e, w[b],
                   b < m->nocc && e > m->nocc ? " (split by the filling)" : "");
        for (int i = 0; rc == 0 && i < nl; i++) {
            const cry_op *op = cry_get_op(c, lg[i]);
            if (!strcmp(op->kind, "1")) continue;
            rc = cry_band_eigenvalues(m, c, lg[i], k, b, e - b, ev, err);
            if (rc != 0) break;
            char key[16];
            snprintf(key, sizeof key, "%d", lg[i]);
            cJSON *list = cJSON_AddArrayToObject(evs, key);
            if (!json) printf("    op %-3d %-3s", lg[i], op->kind);
            for (int q = 0; q < e - b; q++) {
                double re = fabs(creal(ev[q])) < 5e-10 ? 0.0 : creal(ev[q]);
                double im = fabs(cimag(ev[q])) < 5e-10 ? 0.0 : cimag(ev[q]);
                double pair[2] = {re, im};
                cJSON_AddItemToArray(list, cJSON_CreateDoubleArray(pair, 2));
                if (!json) printf(" %+.4f%+.4fi", re, im);
            }
            if (!json) printf("\n");
        }
        cJSON_AddItemToArray(mults, mj);
        b = e;
    }
    cJSON_AddItemToArray(arr, kj);
    free(lg), free(w), free(H), free(ev);
    return rc;
}

static int indices_report(const tb_model *m, const cry_info *c, cJSON *root, int json, bs_err *err)
{
    sym_info *s = NULL;
    int rc = sym_detect(m, NULL, &s, err);
    if (rc != 0) return rc;
    if (m->dim == 3 && s->inversion && s->time_reversal) {
        par_result pr;
        rc = par_z2(m, s, NULL, &pr, err);
        int kappa = -1;
        bs_err e2;
        bs_err_clear(&e2);
        if (rc == 0 && pr.status == PAR_DONE && cz_z4(&pr, &kappa, &e2) == 0) {
            cJSON_AddNumberToObject(root, "z4", kappa);
            if (!json)
                printf("\nZ4 indicator kappa = %d%s\n", kappa,
                       kappa == 2 && pr.z2[0] == 0 ? " (beyond Z2: higher-order or crystalline candidate)"
                                                   : "");
        } else if (!json)
            printf("\nZ4 indicator: not available (%s)\n", pr.reason[0] ? pr.reason : e2.msg);
    } else if (!json)
        printf("\nZ4 indicator: needs a 3D model with inversion and time reversal\n");
    sym_info_free(s);
    cJSON *mc = cJSON_AddArrayToObject(root, "mirror_chern");
    for (int i = 0; rc == 0 && i < cry_nops(c); i++) {
        const cry_op *op = cry_get_op(c, i);
        if (!op->verified || strcmp(op->kind, "m") != 0) continue;
        cz_mirror pl[2];
        int np = cz_mirror_planes(c, i, pl, err);
        if (np < 0) return np;
        for (int p = 0; p < np && rc == 0; p++) {
            rc = cz_mirror_chern(m, c, &pl[p], 24, 1e-6, err);
            if (rc != 0) break;
            cJSON *o = cJSON_CreateObject();
            cJSON_AddNumberToObject(o, "op", i);
            cJSON_AddItemToObject(o, "normal", cJSON_CreateDoubleArray(pl[p].normal, 3));
            cJSON_AddItemToObject(o, "k0", cJSON_CreateDoubleArray(pl[p].k0, 3));
            cJSON_AddStringToObject(o, "status", pl[p].status == CZ_DONE ? "done" : "ambiguous");
            if (pl[p].status == CZ_DONE) {
                cJSON_AddNumberToObject(o, "c_plus", pl[p].c_plus);
                cJSON_AddNumberToObject(o, "c_minus", pl[p].c_minus);
                cJSON_AddNumberToObject(o, "mirror_chern", pl[p].mirror_chern);
            }
            cJSON_AddStringToObject(o, "reason", pl[p].reason);
            cJSON_AddItemToArray(mc, o);
            if (!json) {
                if (pl[p].status == CZ_DONE)
                    printf("mirror op %d, normal (%.3f, %.3f, %.3f), plane through (%g, %g, %g): C+ = %d, C- "
                           "= %d, "
                           "mirror Chern %d\n",
                           i, pl[p].normal[0], pl[p].normal[1], pl[p].normal[2], pl[p].k0[0], pl[p].k0[1],
                           pl[p].k0[2], pl[p].c_plus, pl[p].c_minus, pl[p].mirror_chern);
                else
                    printf("mirror op %d, plane through (%g, %g, %g): undetermined (%s)\n", i, pl[p].k0[0],
                           pl[p].k0[1], pl[p].k0[2], pl[p].reason);
            }
        }
    }
    return rc;
}

int cmd_symmetry(int argc, char **argv)
{
    static const struct option longopts[] = {{"k", required_argument, NULL, 'k'},
                                             {"indices", no_argument, NULL, 'i'},
                                             {"json", no_argument, NULL, 'j'},
                                             {"site-tol", required_argument, NULL, 's'},
                                             {"tol", required_argument, NULL, 't'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    int json = 0, indices = 0, nk = 0, cap = 0, status = 1, c;
    double *k = NULL;
    tb_model *m = NULL;
    cry_info *ci = NULL;
    cJSON *root = NULL;
    cry_opts o;
    cry_opts_default(&o);
    bs_err err;
    bs_err_clear(&err);
    optind = 1;
    while ((c = getopt_long(argc, argv, "h", longopts, NULL)) != -1) {
        if (c == 'h') {
            symmetry_help(stdout);
            status = 0;
            goto done;
        }
        if (c == 'j') {
            json = 1;
            continue;
        }
        if (c == 'i') {
            indices = 1;
            continue;
        }
        if (c == 's' || c == 't') {
            double v;
            if (cli_parse_double(optarg, &v) != 0 || !(v > 0) || v > 1.0) {
                fprintf(stderr, "bandsieve symmetry: --%s expects a number in (0, 1], got '%s'\n",
                        c == 's' ? "site-tol" : "tol", optarg);
                status = 2;
                goto done;
            }
            if (c == 's')
                o.site_tol_ang = v;
            else
                o.tol = v;
            continue;
        }
        if (c != 'k') {
            symmetry_help(stderr);
            status = 2;
            goto done;
        }
        if (nk == cap) {
            cap = cap ? 2 * cap : 8;
            double *p = realloc(k, 3 * (size_t)cap * sizeof *k);
            if (!p) {
                fprintf(stderr, "bandsieve symmetry: out of memory\n");
                goto done;
            }
            k = p;
        }
        if (cli_parse_vec3(optarg, k + 3 * nk) != 0 || fabs(k[3 * nk]) > 1e3 || fabs(k[3 * nk + 1]) > 1e3 ||
            fabs(k[3 * nk + 2]) > 1e3) {
            fprintf(stderr, "bandsieve symmetry: --k expects k1,k2[,k3] reduced coordinates, got '%s'\n",
                    optarg);
            status = 2;
            goto done;
        }
        nk++;
    }
    if (optind != argc - 1) {
        fprintf(stderr, "bandsieve symmetry: need one SOURCE\n");
        symmetry_help(stderr);
        status = 2;
        goto done;
    }
    if (src_load(argv[optind], &m, &err) != 0) {
        fprintf(stderr, "bandsieve symmetry: %s\n", err.msg);
        goto done;
    }
    o.shell_index = m->orb_shape;
    if (cry_detect(m, &o, &ci, &err) != 0) {
        fprintf(stderr, "bandsieve symmetry: %s: %s\n", m->id, err.msg);
        goto done;
    }
    root = cJSON_CreateObject();
    cJSON_AddStringToObject(root, "id", m->id);
    cJSON_AddNumberToObject(root, "spacegroup", cry_spacegroup(ci));
    cJSON_AddStringToObject(root, "spacegroup_symbol", cry_symbol(ci));
    cJSON_AddNumberToObject(root, "sites", cry_nsites(ci));
    cJSON_AddNumberToObject(root, "operations_kept", cry_nverified(ci));
    cJSON *ops = cJSON_AddArrayToObject(root, "operations");
    if (!json)
        printf("%s: the sites (%d) have space group %d (%s); the Hamiltonian keeps %d of its %d operations\n",
               m->id, cry_nsites(ci), cry_spacegroup(ci), cry_symbol(ci), cry_nverified(ci), cry_nops(ci));
    if (!json)
        printf("  op  kind  axis or normal (Cartesian)      translation (reduced)     residual  kept\n");
    for (int i = 0; i < cry_nops(ci); i++) {
        const cry_op *op = cry_get_op(ci, i);
        cJSON_AddItemToArray(ops, op_json(op));
        if (!json)
            printf("  %-3d %-4s (%6.3f, %6.3f, %6.3f)  (%6.3f, %6.3f, %6.3f)  %8.1e  %s\n", i, op->kind,
                   op->axis[0], op->axis[1], op->axis[2], op->t[0], op->t[1], op->t[2], op->residual,
                   op->verified ? "yes" : "no");
    }
    cJSON *karr = cJSON_AddArrayToObject(root, "kpoints");
    for (int q = 0; q < nk; q++)
        if (kpoint_report(m, ci, k + 3 * q, karr, json, &err) != 0) {
            fprintf(stderr, "bandsieve symmetry: %s: %s\n", m->id, err.msg);
            goto done;
        }
    if (indices && indices_report(m, ci, root, json, &err) != 0) {
        fprintf(stderr, "bandsieve symmetry: %s: %s\n", m->id, err.msg);
        goto done;
    }
    if (json) {
        char *text = cJSON_PrintUnformatted(root);
        if (text) printf("%s\n", text);
        free(text);
    }
    status = 0;
done:
    cJSON_Delete(root);
    cry_info_free(ci);
    tb_model_free(m);
    free(k);
    return status;
}
