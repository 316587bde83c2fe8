/* src/main.c: the tbeta command line: subcommands, options, diagnostics on stderr, exit codes */
#include <stdio.h>
#include <string.h>

#include "tbeta.h"

/* Exit codes, one table: 0 done; 1 done but an expectation or threshold
 * failed (used by later subcommands); 2 usage error, unreadable or malformed
 * netlist, or a circuit that cannot be solved. */
enum { EXIT_DONE = 0, EXIT_FAILED_CHECK = 1, EXIT_BAD_INPUT = 2 };

static const char usage_main[] =
    "usage: tbeta NETLIST                 feedback report (same as 'tbeta report NETLIST')\n"
    "       tbeta report NETLIST [--json] per-loop DC values, crossing, phase margin, -3 dB\n"
    "       tbeta sweep NETLIST [--csv] [--loop NAME]\n"
    "                                     one CSV row per sweep frequency\n"
    "       tbeta --help | --version\n"
    "\n"
    "tbeta solves a linear netlist over frequency and, at each controlled source\n"
    "marked with .loop, extracts the loop gain T (return ratio), the ideal gain\n"
    "A_inf (loaded beta = 1/A_inf), the feedthrough A0, the closed-loop gain A and\n"
    "the equivalent open-loop gain a = A_inf*T.\n"
    "\n"
    "exit codes: 0 done; 1 an expectation or threshold failed; 2 usage error,\n"
    "unreadable or malformed netlist, or a circuit that cannot be solved.\n";

static const char usage_report[] =
    "usage: tbeta report NETLIST [--json]\n"
    "  Prints, for every .loop: T, a, beta = 1/A_inf, A_inf, A0 and A at DC, the gain\n"
    "  error (A - A_inf)/A_inf, the unity-loop-gain frequency, the phase margin and\n"
    "  the closed-loop -3 dB frequency.\n"
    "  --json   one JSON document instead of text (full precision, null when absent)\n";

static const char usage_sweep[] =
    "usage: tbeta sweep NETLIST [--csv] [--loop NAME]\n"
    "  Prints one CSV row per .ac frequency (no DC row):\n"
    "  freq_hz,T_re,T_im,A_re,A_im,Ainf_re,Ainf_im,A0_re,A0_im,aol_re,aol_im,T_db,T_phase_deg\n"
    "  An empty field is a value that does not exist at that frequency.\n"
    "  --csv         CSV output (the default and only format)\n"
    "  --loop NAME   the loop at controlled source NAME (default: the first .loop)\n";

typedef struct {
    const char *command; /* "report" or "sweep" */
    const char *netlist;
    const char *loop;
    bool json;
} args;

static int usage_error(const char *msg, const char *arg, const char *usage)
{
    fprintf(stderr, "tbeta: %s%s%s\n%s", msg, arg ? " " : "", arg ? arg : "", usage);
    return EXIT_BAD_INPUT;
}

/* Parses argv from index `first`; returns -1 when done, or an exit code. */
static int parse_args(int argc, char **argv, int first, args *a)
{
    const char *usage = strcmp(a->command, "sweep") == 0 ? usage_sweep : usage_report;
    for (int i = first; i < argc; i++) {
        const char *s = argv[i];
        if (strcmp(s, "--help") == 0 || strcmp(s, "-h") == 0) {
            fputs(usage, stdout);
            return EXIT_DONE;
        } else if (strcmp(s, "--json") == 0 && strcmp(a->command, "report") == 0) {
            a->json = true;
        } else if (strcmp(s, "--csv") == 0 && strcmp(a->command, "sweep") == 0) {
            continue;
        } else if (strcmp(s, "--loop") == 0 && strcmp(a->command, "sweep") == 0) {
            if (i + 1 >= argc)
                return usage_error("--loop needs a source name", NULL, usage);
            a->loop = argv[++i];
        } else if (s[0] == '-' && s[1] != '\0') {
            return usage_error("unknown option", s, usage);
        } else if (a->netlist) {
            return usage_error("one netlist at a time; unexpected", s, usage);
        } else {
            a->netlist = s;
        }
    }
    if (!a->netlist)
        return usage_error("no netlist given", NULL, usage);
    return -1;
}

static void print_diags(const tb_diag *diag)
{
    char buf[4096];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        size_t need = tb_diag_format(diag, i, buf, sizeof buf);
        fputs(buf, stderr);
        if (need >= sizeof buf)
            fputs("...\n", stderr);
    }
}

static tb_status write_output(const args *a, const tb_circuit *ckt, const tb_result *res)
{
    if (strcmp(a->command, "report") == 0)
        return a->json ? tb_report_json(ckt, res, stdout) : tb_report_text(ckt, res, stdout);
    size_t l = 0;
    if (a->loop && tb_circuit_find_loop(ckt, a->loop, &l) != TB_OK) {
        fprintf(stderr, "tbeta: no .loop at '%s' in %s; the loops are:", a->loop, a->netlist);
        for (size_t i = 0; i < tb_circuit_loop_count(ckt); i++)
            fprintf(stderr, " %s", tb_circuit_loop_name(ckt, i));
        fputc('\n', stderr);
        return TB_ERR_USAGE;
    }
    return tb_report_csv(ckt, res, l, stdout);
}

static int run(const args *a)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    if (!diag) {
        fputs("tbeta: out of memory\n", stderr);
        return EXIT_BAD_INPUT;
    }
    tb_options opt;
    tb_options_init(&opt);
    tb_status st = tb_circuit_read(a->netlist, diag, &ckt);
    if (st == TB_OK)
        st = tb_analyse(ckt, &opt, diag, &res);
    print_diags(diag);
    if (st == TB_OK)
        st = write_output(a, ckt, res);
    if (st != TB_OK && st != TB_ERR_INPUT && st != TB_ERR_USAGE && tb_diag_errors(diag) == 0)
        fprintf(stderr, "tbeta: %s: %s\n", a->netlist, tb_status_str(st));
    if (fflush(stdout) != 0 && st == TB_OK) {
        fprintf(stderr, "tbeta: writing the output failed\n");
        st = TB_ERR_IO;
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st == TB_OK ? EXIT_DONE : EXIT_BAD_INPUT;
}

int main(int argc, char **argv)
{
    if (argc < 2)
        return usage_error("no netlist given", NULL, usage_main);
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        fputs(usage_main, stdout);
        return EXIT_DONE;
    }
    if (strcmp(argv[1], "--version") == 0) {
        printf("tbeta %s\n", TB_VERSION);
        return EXIT_DONE;
    }
    args a = {"report", NULL, NULL, false};
    int first = 1;
    if (strcmp(argv[1], "report") == 0 || strcmp(argv[1], "sweep") == 0) {
        a.command = argv[1];
        first = 2;
    }
    int rc = parse_args(argc, argv, first, &a);
    return rc >= 0 ? rc : run(&a);
}
