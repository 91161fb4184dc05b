/* bandsieve entry point: dispatches to the subcommands of src/cli/commands.h. */
#include <hdf5.h>
#include <stdio.h>
#include <string.h>

#include "bandsieve/blas_threads.h"
#include "bandsieve/config.h"
#include "commands.h"

typedef struct command {
    const char *name;
    int (*run)(int argc, char **argv);
    const char *summary;
} command;

static const command COMMANDS[] = {
    {"pack", cmd_pack, "import material cards into a material set (HDF5)"},
    {"check", cmd_check, "validate cards, folders or sets without computing; estimate a screen's cost"},
    {"list", cmd_list, "list what a material set holds"},
    {"models", cmd_models, "list the built-in published lattice models and their parameters"},
    {"bands", cmd_bands, "band energies of one material at given k-points"},
    {"inspect", cmd_inspect, "full topological diagnosis of one material"},
    {"screen", cmd_screen, "screen a material set into a catalogue (run under mpirun)"},
    {"rescreen", cmd_rescreen, "rerun catalogue entries selected by SQL at a higher resolution"},
    {"query", cmd_query, "run a read-only SQL query or a view on a catalogue"},
    {"demo-set", cmd_demo_set, "generate the invented demonstration material set"},
    {"slab", cmd_slab, "slab or ribbon of one material: surface states, crossings, surface spectra"},
    {"symmetry", cmd_symmetry, "crystal symmetry of one material: space group, kept operations, eigenvalues"},
    {"path", cmd_path, "follow a material along a parameter: gap closings, phases, Weyl-node tracks"},
    {"phasemap", cmd_phasemap, "classes on a grid of two parameters of a built-in model (run under mpirun)"},
    {"plot", cmd_plot, "one figure of one material: bands, flows, Berry curvature, Weyl nodes"},
    {"report", cmd_report, "self-contained HTML report of a material or of the best candidates"},
};

static void usage(FILE *out)
{
    fprintf(out,
            "bandsieve %s: screen tight-binding Hamiltonians for band topology\n\n"
            "usage: bandsieve COMMAND [options]   (bandsieve COMMAND --help for each)\n\n",
            BS_VERSION);
    for (size_t i = 0; i < sizeof COMMANDS / sizeof COMMANDS[0]; i++)
        fprintf(out, "  %-10s %s\n", COMMANDS[i].name, COMMANDS[i].summary);
    fprintf(out, "\nSOURCE arguments are a card (path.json), SET.h5:ID, or model:NAME[:key=val,...].\n");
    fprintf(out, "Every command runs its linear algebra on one BLAS thread; BS_BLAS_THREADS=N (or the\n"
                 "BLAS library's own variable, e.g. OPENBLAS_NUM_THREADS) changes that.\n");
}

int main(int argc, char **argv)
{
    /* Every HDF5 file is closed by the code that opened it. The library's exit handler would close
     * whatever is left once more, including an artifact file whose close failed on a full disk,
     * and that second close crashed inside HDF5 (issue 15). It must be switched off before the
     * library's first use. */
    H5dont_atexit();
    if (argc < 2) {
        usage(stderr);
        return 2;
    }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
        usage(stdout);
        return 0;
    }
    if (!strcmp(argv[1], "--version")) {
        printf("bandsieve %s\n", BS_VERSION);
        return 0;
    }
    /* One BLAS thread per process unless asked otherwise (README, "BLAS threads"): before any
     * command, so every solve of every command and rank runs under the same setting. */
    const char *bad = NULL;
    blas_threads_init(&bad);
    if (bad)
        fprintf(stderr, "bandsieve: BS_BLAS_THREADS='%s' is not a thread count of 1 or more; using 1\n", bad);
    for (size_t i = 0; i < sizeof COMMANDS / sizeof COMMANDS[0]; i++)
        if (!strcmp(argv[1], COMMANDS[i].name)) {
            if (!COMMANDS[i].run) {
                fprintf(stderr, "bandsieve: command '%s' is not built into this binary\n", argv[1]);
                return 2;
            }
            return COMMANDS[i].run(argc - 1, argv + 1);
        }
    fprintf(stderr, "bandsieve: unknown command '%s' (bandsieve --help lists them)\n", argv[1]);
    return 2;
}
