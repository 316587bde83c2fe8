/* src/spreadcli.h: the 'tbeta spread' subcommand */
#ifndef TB_SPREADCLI_H
#define TB_SPREADCLI_H

/* Runs 'tbeta spread' (argv[1] is "spread"): prints the tables on stdout, diagnostics on
 * stderr; returns the exit code (0 done, 1 a corner or sample fails, 2 bad usage or input). */
int tb_spread_command(int argc, char **argv);

#endif
