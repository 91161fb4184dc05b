/* `bandsieve screen` and `bandsieve rescreen`: option parsing, signal handling and the progress
 * display around the pipeline (src/pipeline). */
#include <getopt.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "bandsieve/model.h"
#include "bandsieve/config.h"
#include "bandsieve/pipeline.h"
#include "cliutil.h"
#include "commands.h"

/* Exit statuses of screen and rescreen (documented in --help and README.md). A run that
 * completed exits 0 whatever its entries' statuses: a batch system then marks the job done, and
 * the counts are in the last line and the catalogue. */
enum {
    SCREEN_EXIT_DONE = 0,        /* the run completed */
    SCREEN_EXIT_STRICT = 1,      /* --strict: the run completed, some entries are not ok */
    SCREEN_EXIT_USAGE = 2,       /* bad arguments; rescreen of a catalogue that does not exist */
    SCREEN_EXIT_JOB = 3,         /* the job itself failed: set, catalogue, MPI */
    SCREEN_EXIT_INTERRUPTED = 4, /* stopped early (signal or --max-seconds): run it again to resume */
};

/* Set by SIGTERM/SIGINT (a batch scheduler's warning before the kill): finish in-flight work. */
static volatile sig_atomic_t stop_requested = 0;
static volatile sig_atomic_t stop_signal = 0;

static void on_signal(int sig)
{
    stop_signal = sig;
    stop_requested = 1;
}

/* Plain progress lines (stderr not a terminal, as under mpirun or in a batch log): at 5, 10 and
 * 20 s, so a short job shows it is moving, then every 30 s; --progress-every S: every S seconds. */
typedef struct progress_state {
    int tty;
    double next_plain;
    double plain_every; /* 0: the default schedule */
    const char *what;
} progress_state;

static double next_plain_after(const progress_state *p, double elapsed)
{
    if (p->plain_every > 0) return elapsed + p->plain_every;
    static const double early[] = {5, 10, 20};
    for (size_t i = 0; i < sizeof early / sizeof early[0]; i++)
        if (elapsed < early[i]) return early[i];
    return 30.0 * (double)((long)(elapsed / 30.0) + 1);
}

static void format_classes(const pl_counts *c, char *buf, size_t len)
{
    static const char *const abbrev[RES_NCLASS] = {"triv", "STI",  "WTI",   "2DTI",  "CI",
                                                   "WSM",  "NLSM", "metal", "undet", "TCI"};
    size_t n = 0;
    buf[0] = '\0';
    for (int i = 0; i < RES_NCLASS && n < len; i++)
        if (c->by_class[i]) n += (size_t)snprintf(buf + n, len - n, " %s %d", abbrev[i], c->by_class[i]);
}

static void format_progress(const pl_counts *c, char *buf, size_t len)
{
    double rate = c->elapsed > 0 ? c->done / c->elapsed : 0;
    int left = c->total - c->done;
    double eta = rate > 0 ? left / rate : 0;
    int n = snprintf(buf, len, "%d/%d done", c->done, c->total);
    if (c->skipped) n += snprintf(buf + n, len - n, " (+%d resumed)", c->skipped);
    n += snprintf(buf + n, len - n, ", %.2f/s, %s %.0fs | ok %d invalid %d failed %d timeout %d |", rate,
                  left > 0 ? "left" : "took", left > 0 ? eta : c->elapsed, c->ok, c->invalid, c->failed,
                  c->timeout);
    if (n > 0 && (size_t)n < len) format_classes(c, buf + n, len - (size_t)n);
}

static void show_progress(void *ctx, const pl_counts *c, int final)
{
    progress_state *p = ctx;
    char line[512];
    /* The final counts go once, in the command's last line (screen_main), not here. */
    if (final) {
        if (p->tty) fputs("\r\033[K", stderr);
    } else if (p->tty) {
        format_progress(c, line, sizeof line);
        fprintf(stderr, "\r\033[K%s: %s", p->what, line);
    } else if (c->elapsed >= p->next_plain) {
        format_progress(c, line, sizeof line);
        fprintf(stderr, "%s: [%6.0fs] %s\n", p->what, c->elapsed, line);
        p->next_plain = next_plain_after(p, c->elapsed);
    }
    fflush(stderr);
}

static void announce(void *ctx, const pl_counts *c, const char *kind)
{
    progress_state *p = ctx;
    if (c->missing > 0)
        fprintf(stderr, "%s: warning: %d selected material%s not in the set, left out: %s%s\n", p->what,
                c->missing, c->missing == 1 ? " is" : "s are", c->missing_ids, c->missing > 5 ? ", ..." : "");
    if (c->note[0]) fprintf(stderr, "%s: %s\n", p->what, c->note);
    if (c->run_id == 0)
        fprintf(stderr, "%s: 0 materials to do, %d already done (nothing new, so no run is added)\n", p->what,
                c->skipped);
    else if (!strcmp(kind, "rescreen"))
        fprintf(stderr, "%s: %d materials selected (run %lld)\n", p->what, c->total + c->skipped, c->run_id);
    else
        fprintf(stderr, "%s: %d materials to do, %d already done (run %lld%s)\n", p->what, c->total,
                c->skipped, c->run_id, c->resumed ? ", resumed" : "");
    if (p->tty) fputc('\n', stderr);
}

static void announce_paths(void *ctx, const pl_counts *c)
{
    progress_state *p = ctx;
    fprintf(stderr, "%s: %d famil%s' paths to do, %d already done\n", p->what, c->paths_total,
            c->paths_total == 1 ? "y" : "ies", c->paths_skipped);
}

static void path_done(void *ctx, const pl_counts *c, const char *family, const char *status, double seconds)
{
    progress_state *p = ctx;
    if (p->tty) fputs("\r\033[K", stderr);
    fprintf(stderr, "%s: path %d/%d %s: %s (%.1f s)\n", p->what, c->paths_done, c->paths_total, family,
            status, seconds);
    fflush(stderr);
}

/* "4G", "500M", "64k" (powers of 1024) or a plain number of bytes; 0 or -1. */
static int parse_bytes(const char *text, double *out)
{
    char *end = NULL;
    double v = strtod(text, &end);
    if (end == text || !(v > 0) || v > 1e18) return -1;
    double unit = 1;
    if (*end == 'k' || *end == 'K')
        unit = 1024.0, end++;
    else if (*end == 'm' || *end == 'M')
        unit = 1024.0 * 1024, end++;
    else if (*end == 'g' || *end == 'G')
        unit = 1024.0 * 1024 * 1024, end++;
    else if (*end == 't' || *end == 'T')
        unit = 1024.0 * 1024 * 1024 * 1024, end++;
    if (*end == 'B' || *end == 'b') end++;
    if (*end) return -1;
    *out = v * unit;
    return 0;
}

static void screen_help(FILE *out, int rescreen)
{
    if (rescreen)
        fprintf(out,
                "usage: mpirun -n P bandsieve rescreen SET.h5 -c CAT.sqlite --where \"SQL condition\" "
                "[options]\n\n"
                "Reruns the materials whose row in the catalogue's summary view matches the condition,\n"
                "as a new run at a higher resolution; summary then shows the more resolved result.\n\n"
                "  --where COND        condition on the summary view, e.g. \"confidence < 0.7\"\n"
                "  --where-timeout S   stop selecting after S seconds (exit status 3); SIGTERM and\n"
                "                      SIGINT stop the selection at once in any case\n"
                "  --mesh N            k-mesh of the rerun (default: twice the mesh of each material's\n"
                "                      best result, so the rerun is always finer; twice the default mesh\n"
                "                      for a material without an ok result)\n"
                "  --rerun             start a new run even when the same rescreen was done before\n");
    else
        fprintf(out,
                "usage: mpirun -n P bandsieve screen SET.h5 -c CAT.sqlite [options]\n\n"
                "Diagnoses every material of the set into the catalogue. Rank 0 coordinates and writes\n"
                "the catalogue; ranks 1.. compute (P = 1 does everything in one process). Running it\n"
                "again on the same catalogue resumes: materials whose content already has a result\n"
                "with the same settings are skipped, whatever the set's path; changed ones are redone.\n\n"
                "  --mesh N            k-mesh per direction (default 36 in 2D, 14 in 3D; at most 4096\n"
                "                      in 2D and 256 in 3D: a larger one is refused when the set\n"
                "                      holds 3D materials)\n"
                "  --rerun             start a new run and redo every material (otherwise a screen\n"
                "                      resumes an unfinished run and skips what earlier runs with\n"
                "                      the same settings already did); an unfinished run that an\n"
                "                      earlier --rerun started is resumed, with a note\n");
    fprintf(out,
            "  -c, --catalogue F   the SQLite catalogue (created if missing)\n"
            "  --max-seconds S     wall-clock budget of the job: stop handing out work and\n"
            "                      leave the rest for a resumed run (status interrupted)\n"
            "  --material-seconds S  budget per material; over it the row is `timeout`\n"
            "  --material-memory M   memory one material may use (e.g. 4G; default: the node's\n"
            "                      memory divided by the ranks on it); an entry whose estimate\n"
            "                      is larger gets an `invalid` row saying so, before any work\n"
            "  --symmetry-tol T    relative residual under which time reversal and inversion are\n"
            "                      exact (default 1e-6); larger breakings are judged in eV\n"
            "                      against the gap (approximate: restored; broken: not)\n"
            "  --magnetism M       none | magnetic | unknown for every material, overriding the\n"
            "                      cards' \"magnetism\" key (default: each card's statement)\n"
            "  --position-tol A    Angstrom tolerance of the inversion map (default 0.05)\n"
            "  --transport         also the intrinsic anomalous and spin Hall conductivities\n"
            "                      (catalogue columns ahc_*, shc_xy; view top_spin_hall)\n"
            "  --surfaces          for nontrivial insulators, also the Fermi-level crossings of\n"
            "                      surface states on a default plane (view surfaces)\n"
            "  --verify            compute every method, also the Wannier-centre cross-check that\n"
            "                      decisive parities make optional for large 3D materials (rescreen\n"
            "                      always does)\n"
            "  --group-size G      the last G ranks form a group that diagonalises materials of\n"
            "                      at least --group-min-states states (default 800) together\n"
            "                      with ScaLAPACK; smaller ones go to the single ranks\n"
            "  --batch N           commit the catalogue every N results (default 1024) or 2 s\n"
            "  --progress-every S  seconds between progress lines when stderr is not a terminal\n"
            "                      (default: at 5, 10 and 20 s, then every 30 s)\n"
            "  --strict            exit 1 when any material is not ok (invalid, failed, timeout)\n"
            "  --paths             after the materials, the phase path of every family of the set\n"
            "                      (bandsieve path --family), one family per unit of work; stored in\n"
            "                      the tables paths and path_* and the view transitions. A family's\n"
            "                      path is redone only when its members change or a finer tolerance\n"
            "                      is asked; rescreen --paths refines the paths of the families with\n"
            "                      a member selected by --where, replacing the stored rows\n"
            "  --path-tol T        tolerance of closings in the parameter (default 1e-5; rescreen:\n"
            "                      a tenth of the stored path's)\n"
            "  --path-samples N    uniform gap samples per path (default 41)\n"
            "  --path-track-steps N  Weyl-node continuation steps per gapless interval (default 24)\n"
            "  -h, --help          this text\n\n"
            "Exit status: 0 the run completed, whatever the materials' statuses (counted in the\n"
            "last line and the catalogue); 1 with --strict, some material is not ok; 2 usage%s;\n"
            "3 the job itself failed (set, catalogue, MPI); 4 interrupted by a signal or by\n"
            "--max-seconds: run the same command again to resume.\n",
            rescreen ? " or no such catalogue" : "");
}

/* The one last line of a job (rank 0): the run's outcome and counts, and for an interrupted run
 * how to resume. Returns the exit status. */
static int final_line(const char *name, const pl_counts *c, const pl_opts *o, int strict)
{
    char classes[256];
    format_classes(c, classes, sizeof classes);
    int not_ok = c->done - c->ok;
    fprintf(stderr,
            "%s: run %lld %s: %d done (%d ok, %d invalid, %d failed, %d timeout), %d skipped as "
            "already done, %.1f s |%s\n",
            name, c->run_id, c->interrupted ? "interrupted" : "finished", c->done, c->ok, c->invalid,
            c->failed, c->timeout, c->skipped, c->elapsed, classes[0] ? classes : " -");
    if (o->paths)
        fprintf(stderr, "%s: paths: %d of %d stored (%d ok, %d not ok), %d already done\n", name,
                c->paths_done, c->paths_total, c->paths_ok, c->paths_failed, c->paths_skipped);
    if (c->interrupted) {
        char why[96];
        if (stop_signal)
            snprintf(why, sizeof why, "by signal %d (%s)", (int)stop_signal,
                     stop_signal == SIGTERM   ? "SIGTERM"
                     : stop_signal == SIGINT  ? "SIGINT"
                     : stop_signal == SIGUSR1 ? "SIGUSR1"
                                              : "signal");
        else
            snprintf(why, sizeof why, "by the --max-seconds budget of %g s", o->max_seconds);
        fprintf(stderr,
                "%s: stopped %s with %d material(s) left; to resume, run the same command again "
                "(exit status %d)\n",
                name, why, c->total - c->done, SCREEN_EXIT_INTERRUPTED);
        return SCREEN_EXIT_INTERRUPTED;
    }
    if (strict && not_ok > 0) {
        fprintf(stderr, "%s: --strict: %d material(s) not ok (exit status %d)\n", name, not_ok,
                SCREEN_EXIT_STRICT);
        return SCREEN_EXIT_STRICT;
    }
    return SCREEN_EXIT_DONE;
}

static int screen_main(int argc, char **argv, int rescreen)
{
    static const struct option longopts[] = {{"catalogue", required_argument, NULL, 'c'},
                                             {"mesh", required_argument, NULL, 'm'},
                                             {"max-seconds", required_argument, NULL, 't'},
                                             {"material-seconds", required_argument, NULL, 'T'},
                                             {"rerun", no_argument, NULL, 'r'},
                                             {"where", required_argument, NULL, 'w'},
                                             {"where-timeout", required_argument, NULL, 'W'},
                                             {"material-memory", required_argument, NULL, 'M'},
                                             {"batch", required_argument, NULL, 'b'},
                                             {"symmetry-tol", required_argument, NULL, 'y'},
                                             {"magnetism", required_argument, NULL, 'N'},
                                             {"position-tol", required_argument, NULL, 'P'},
                                             {"transport", no_argument, NULL, 'A'},
                                             {"surfaces", no_argument, NULL, 'S'},
                                             {"verify", no_argument, NULL, 'V'},
                                             {"group-size", required_argument, NULL, 'g'},
                                             {"group-min-states", required_argument, NULL, 'G'},
                                             {"progress-every", required_argument, NULL, 'p'},
                                             {"strict", no_argument, NULL, 's'},
                                             {"paths", no_argument, NULL, 'Q'},
                                             {"path-tol", required_argument, NULL, 'L'},
                                             {"path-samples", required_argument, NULL, 'X'},
                                             {"path-track-steps", required_argument, NULL, 'K'},
                                             {"help", no_argument, NULL, 'h'},
                                             {NULL, 0, NULL, 0}};
    const char *name = rescreen ? "bandsieve rescreen" : "bandsieve screen";
    pl_opts o;
    memset(&o, 0, sizeof o);
    o.kind = rescreen ? "rescreen" : "screen";
    o.version = BS_VERSION;
    progress_state ps = {isatty(2), 0, 0, name};
    int strict = 0;
    int c;
    optind = 1;
    while ((c = getopt_long(argc, argv, "c:h", longopts, NULL)) != -1) {
        long v;
        double d;
        switch (c) {
        case 'h':
            screen_help(stdout, rescreen);
            return 0;
        case 'c':
            o.catalogue_path = optarg;
            break;
        case 'r':
            o.rerun = 1;
            break;
        case 's':
            strict = 1;
            break;
        case 'A':
            o.transport = 1;
            break;
        case 'Q':
            o.paths = 1;
            break;
        case 'L':
            if (cli_parse_double(optarg, &d) || d <= 0 || d > 0.1) {
                fprintf(stderr, "%s: --path-tol expects a number in (0, 0.1], got '%s'\n", name, optarg);
                return 2;
            }
            o.path_tol = d;
            break;
        case 'X':
        case 'K':
            if (cli_parse_int(optarg, c == 'X' ? 3 : 2, 100000, &v)) {
                fprintf(stderr, "%s: --%s expects an integer %d..100000, got '%s'\n", name,
                        c == 'X' ? "path-samples" : "path-track-steps", c == 'X' ? 3 : 2, optarg);
                return 2;
            }
            if (c == 'X')
                o.path_samples = (int)v;
            else
                o.path_track_steps = (int)v;
            break;
        case 'S':
            o.surfaces = 1;
            break;
        case 'V':
            o.verify = 1;
            break;
        case 'g':
        case 'G':
            if (cli_parse_int(optarg, c == 'g' ? 2 : 2, 1 << 20, &v)) {
                fprintf(stderr, "%s: --%s expects an integer >= 2, got '%s'\n", name,
                        c == 'g' ? "group-size" : "group-min-states", optarg);
                return 2;
            }
            if (c == 'g')
                o.group_size = (int)v;
            else
                o.group_min_states = (int)v;
            break;
        case 'w':
            o.where_sql = optarg;
            break;
        case 'M':
            if (parse_bytes(optarg, &o.material_memory)) {
                fprintf(stderr,
                        "%s: --material-memory expects a size such as 4G, 500M or 2e9 (bytes), got '%s'\n",
                        name, optarg);
                return 2;
            }
            break;
        case 'm':
            if (cli_parse_int(optarg, 4, 4096, &v)) {
                fprintf(stderr, "%s: --mesh expects an integer 4..4096, got '%s'\n", name, optarg);
                return 2;
            }
            o.mesh = (int)v;
            break;
        case 'b':
            if (cli_parse_int(optarg, 1, 1000000, &v)) {
                fprintf(stderr, "%s: --batch expects a positive integer, got '%s'\n", name, optarg);
                return 2;
            }
            o.batch_rows = (int)v;
            break;
        case 'N': {
            int mag = tb_magnetism_parse(optarg);
            if (mag < 0) {
                fprintf(stderr, "%s: --magnetism expects none, magnetic or unknown, got '%s'\n", name,
                        optarg);
                return 2;
            }
            o.magnetism = 1 + mag;
            break;
        }
        case 'P':
            if (cli_parse_double(optarg, &d) || d <= 0 || d >= 1) {
                fprintf(stderr, "%s: --position-tol expects Angstrom in (0,1), got '%s'\n", name, optarg);
                return 2;
            }
            o.pos_tol_ang = d;
            break;
        case 'y':
            if (cli_parse_double(optarg, &d) || d <= 0 || d >= 1) {
                fprintf(stderr, "%s: --symmetry-tol expects a number in (0,1), got '%s'\n", name, optarg);
                return 2;
            }
            o.symmetry_tol = d;
            break;
        case 't':
        case 'T':
        case 'p':
        case 'W':
            if (cli_parse_double(optarg, &d) || d <= 0) {
                fprintf(stderr, "%s: --%s expects a positive number, got '%s'\n", name,
                        c == 't'   ? "max-seconds"
                        : c == 'T' ? "material-seconds"
                        : c == 'W' ? "where-timeout"
                                   : "progress-every",
                        optarg);
                return 2;
            }
            if (c == 'W')
                o.where_seconds = d;
            else if (c == 't')
                o.max_seconds = d;
            else if (c == 'T')
                o.material_seconds = d;
            else
                ps.plain_every = d;
            break;
        default:
            screen_help(stderr, rescreen);
            return 2;
        }
    }
    if (optind != argc - 1 || !o.catalogue_path) {
        fprintf(stderr, "%s: need one SET.h5 and -c CAT.sqlite\n", name);
        screen_help(stderr, rescreen);
        return 2;
    }
    if (rescreen && (!o.where_sql || !o.where_sql[0])) {
        fprintf(stderr, "%s: --where is required\n", name);
        return 2;
    }
    if (rescreen && o.mesh == 0) o.mesh_factor = 2;
    /* A rescreen is the second look at doubtful or promising entries: every cross-check runs. */
    if (rescreen) o.verify = 1;
    if (!o.paths && (o.path_tol > 0 || o.path_samples > 0 || o.path_track_steps > 0)) {
        fprintf(stderr, "%s: --path-tol, --path-samples and --path-track-steps need --paths\n", name);
        return 2;
    }
    ps.next_plain = next_plain_after(&ps, 0);
    /* Runs are matched by the set's content; the path is recorded in one canonical spelling. */
    char set_real[4096];
    o.set_path = realpath(argv[optind], set_real) ? set_real : argv[optind];
    /* The command line is recorded whole (a --where condition can be long). */
    size_t cmd_len = sizeof "bandsieve";
    for (int i = 0; i < argc; i++)
        cmd_len += strlen(argv[i]) + 1;
    char *cmdline = malloc(cmd_len);
    if (!cmdline) {
        fprintf(stderr, "%s: out of memory\n", name);
        return 3;
    }
    size_t used = (size_t)snprintf(cmdline, cmd_len, "bandsieve");
    for (int i = 0; i < argc; i++)
        used += (size_t)snprintf(cmdline + used, cmd_len - used, " %s", argv[i]);
    o.cmdline = cmdline;
    o.stop_flag = &stop_requested;
    o.progress = show_progress;
    o.path_done = path_done;
    o.announce = announce;
    o.announce_paths = announce_paths;
    o.progress_ctx = &ps;
    /* SIGUSR1 too: Open MPI's mpirun forwards it to the ranks, whereas on SIGTERM it ends them
     * itself; Slurm can send it ahead of the time limit (#SBATCH --signal=USR1@300). */
    signal(SIGTERM, on_signal);
    signal(SIGINT, on_signal);
    signal(SIGUSR1, on_signal);

    pl_counts counts;
    int is_root = 1;
    bs_err err;
    bs_err_clear(&err);
    if (MPI_Init(&argc, &argv) != MPI_SUCCESS) {
        fprintf(stderr, "%s: MPI_Init failed\n", name);
        free(cmdline);
        return SCREEN_EXIT_JOB;
    }
    /* rescreen needs an existing catalogue (opening creates one): rank 0 looks, and every rank
     * follows its answer, so that all of them stop together. */
    int rank = 0, missing = 0;
    MPI_Comm_rank(MPI_COMM_WORLD, &rank);
    if (rescreen && rank == 0) missing = access(o.catalogue_path, F_OK) != 0;
    if (rescreen) MPI_Bcast(&missing, 1, MPI_INT, 0, MPI_COMM_WORLD);
    if (missing) {
        if (rank == 0)
            fprintf(stderr,
                    "%s: %s: no such catalogue (rescreen reruns entries of an existing catalogue; "
                    "`screen` creates one)\n",
                    name, o.catalogue_path);
        MPI_Finalize();
        free(cmdline);
        return SCREEN_EXIT_USAGE;
    }
    int rc = pl_run(MPI_COMM_WORLD, &o, &counts, &is_root, &err);
    MPI_Finalize();
    free(cmdline);
    if (rc != 0) {
        fprintf(stderr, "%s: %s\n", name, err.msg);
        return rc == BS_EUSAGE ? SCREEN_EXIT_USAGE : SCREEN_EXIT_JOB;
    }
    if (!is_root) return SCREEN_EXIT_DONE;
    if (counts.run_id == 0) return SCREEN_EXIT_DONE; /* nothing to do: no run was added */
    return final_line(name, &counts, &o, strict);
}

int cmd_screen(int argc, char **argv)
{
    return screen_main(argc, argv, 0);
}
int cmd_rescreen(int argc, char **argv)
{
    return screen_main(argc, argv, 1);
}
