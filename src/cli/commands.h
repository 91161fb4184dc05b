/* Subcommands of the bandsieve binary: each lives in src/cli/cmd_<name>.c and returns the
 * process exit status (0 success, 1 failure of the job, 2 usage error). argv[0] is the subcommand. */
#ifndef BANDSIEVE_CLI_COMMANDS_H
#define BANDSIEVE_CLI_COMMANDS_H

int cmd_pack(int argc, char **argv);
int cmd_check(int argc, char **argv);
int cmd_list(int argc, char **argv);
int cmd_bands(int argc, char **argv);
int cmd_inspect(int argc, char **argv);
int cmd_screen(int argc, char **argv);
int cmd_rescreen(int argc, char **argv);
int cmd_query(int argc, char **argv);
int cmd_demo_set(int argc, char **argv);
int cmd_models(int argc, char **argv);
int cmd_slab(int argc, char **argv);
int cmd_symmetry(int argc, char **argv);
int cmd_path(int argc, char **argv);
int cmd_phasemap(int argc, char **argv);
int cmd_plot(int argc, char **argv);
int cmd_report(int argc, char **argv);

#endif
