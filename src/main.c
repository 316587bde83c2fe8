/* src/main.c: the tbeta command line: subcommands, options, diagnostics on stderr, exit codes */
#include <errno.h>
#include <math.h>
#include <signal.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "tbeta.h"
#include "blaspool.h" /* the BLAS library's idle threads, parked at start */
#include "checkrun.h" /* the regression runner (tbeta check) */
#include "lex.h"      /* tb_lex_value: --at reads frequencies as the netlist does */
#include "progress.h" /* the progress line on a terminal */
#include "report.h"   /* tb_report_escape and how odd bytes read */
#include "spreadcli.h" /* tbeta spread */
#include "spreadreport.h" /* the spread part of tbeta report */

/* Exit codes, one table: 0 done; 1 done but an expectation or threshold
 * failed (used by later subcommands); 2 usage error, unreadable or malformed
 * netlist, or a circuit that cannot be solved. */
enum { EXIT_DONE = 0, EXIT_FAILED_CHECK = 1, EXIT_BAD_INPUT = 2 };

/* Every option each subcommand accepts, one row each ("report" is also 'tbeta NETLIST'): the
 * parsers refuse any other, and tests/help.sh reads this table and checks that every row
 * appears in its subcommand's --help, so that help cannot fall behind the parser. */
static const struct {
    const char *command;
    const char *option;
} accepted_options[] = {
    {"report", "--help"}, {"report", "--json"}, {"report", "--html"}, {"report", "--at"},
    {"report", "--output"}, {"report", "--pm-min"}, {"report", "--gm-min"}, {"report", "--strict"},
    {"report", "--pole-limit"}, {"report", "--no-stability"}, {"report", "--all-sources"},
    {"report", "--sensitivities"}, {"report", "--include-root"}, {"report", "--jobs"}, {"report", "--no-rhp-count"},
    {"sweep", "--help"}, {"sweep", "--csv"}, {"sweep", "--loop"}, {"sweep", "--table"}, {"sweep", "--output"},
    {"sweep", "--jobs"}, {"sweep", "--include-root"},
    {"step", "--help"}, {"step", "--csv"}, {"step", "--pole-limit"}, {"step", "--output"}, {"step", "--jobs"},
    {"step", "--include-root"},
    {"plot", "--help"}, {"plot", "--svg"}, {"plot", "--pm-min"}, {"plot", "--gm-min"}, {"plot", "--strict"},
    {"plot", "--pole-limit"}, {"plot", "--no-stability"}, {"plot", "--all-sources"}, {"plot", "--jobs"},
    {"plot", "--include-root"}, {"plot", "--no-rhp-count"},
    {"check", "--help"}, {"check", "--glob"}, {"check", "--jobs"}, {"check", "--shard"}, {"check", "--save"},
    {"check", "--against"}, {"check", "--drift"}, {"check", "--json"}, {"check", "--junit"}, {"check", "--html"},
    {"check", "--html-reports"}, {"check", "--output"}, {"check", "--merge"}, {"check", "--include-root"}, {"check", "--include-anywhere"},
    {"check", "--pole-limit"}, {"check", "--no-stability"}, {"check", "--no-rhp-count"},
    {"report", "--no-spread"}, {"report", "--samples"}, {"report", "--seed"}, {"report", "--sens-at"},
    {"report", "--gm-cap"}, {"plot", "--gm-cap"},
};

/* true when command accepts option (-h is --help everywhere). */
static bool accepts(const char *command, const char *option)
{
    if (strcmp(option, "-h") == 0)
        option = "--help";
    for (size_t i = 0; i < sizeof accepted_options / sizeof accepted_options[0]; i++)
        if (strcmp(accepted_options[i].command, command) == 0 && strcmp(accepted_options[i].option, option) == 0)
            return true;
    return false;
}

static const char usage_main[] =
    "usage: tbeta NETLIST                 feedback report (same as 'tbeta report NETLIST')\n"
    "       tbeta report NETLIST [--json] per-loop DC values, crossing, phase margin, -3 dB\n"
    "       tbeta sweep NETLIST [--csv] [--loop NAME]\n"
    "                                     one CSV row per sweep frequency\n"
    "       tbeta step NETLIST [--csv]       closed-loop step response, one CSV row per sample\n"
    "       tbeta plot NETLIST --svg DIR      the pictures (Bode, Nyquist, step, ports, breakdown) as SVG\n"
    "       tbeta check PATH... [options]     run every netlist's .expect cards (tbeta check --help)\n"
    "       tbeta spread NETLIST [options]    scans, corners, Monte Carlo (tbeta spread --help)\n"
    "       tbeta --help | --version\n"
    "  Every subcommand lists its options with --help (tbeta report --help, ...).\n"
    "  NETLIST - reads the netlist from standard input; a FILE of - is standard output.\n"
    "  On a terminal, long runs show a progress line on stderr (never in a pipe or when CI is\n"
    "  set); tbeta uses no colour.\n"
    "\n"
    "tbeta solves a linear netlist over frequency and, at each controlled source\n"
    "marked with .loop, extracts the loop gain T (return ratio), the ideal gain\n"
    "A_inf (loaded beta = 1/A_inf), the feedthrough A0, the closed-loop gain A and\n"
    "the equivalent open-loop gain a = A_inf*T.\n"
    "\n"
    "exit codes: 0 done; 1 an expectation or threshold failed; 2 usage error,\n"
    "unreadable or malformed netlist, or a circuit that cannot be solved.\n";

static const char usage_report[] =
    "usage: tbeta report NETLIST [--json] [--html FILE] [--at F1,F2,...] [--output FILE]\n"
    "                            [--pm-min DEG] [--gm-min DB] [--strict] [--gm-cap DB]\n"
    "                            [--pole-limit N] [--no-stability] [--all-sources] [--sensitivities]\n"
    "                            [--jobs N] [--include-root DIR] [--no-rhp-count]\n"
    "                            [--samples N] [--seed S] [--no-spread] [--sens-at F1,F2,...]\n"
    "  Prints, for every .loop: T, a, beta = 1/A_inf, A_inf, A0 and A at DC, the gain\n"
    "  error (A - A_inf)/A_inf, the unity-loop-gain frequency, the phase margin and\n"
    "  the closed-loop -3 dB frequency; then the stability figures: every crossing of\n"
    "  |T| = 1 and of the phase through -180 deg (mod 360) found by root finding on fresh\n"
    "  solves, phase, gain, delay and vector margins, closed-loop poles, the Nyquist\n"
    "  count, the dominant pole pair and a verdict (stable, marginal, unstable).\n"
    "  --json            one JSON document instead of text (full precision, null when absent)\n"
    "  --html FILE       also write one self-contained HTML page (verdicts, tables, pictures)\n"
    "                    for a design review (FILE -: the page on stdout instead of the report)\n"
    "  --at F1,F2,...    also T, |1 + T|, A, A_inf, A0, the .ideal breakdown and every .zport\n"
    "                    at these frequencies (Hz, engineering notation as in the netlist:\n"
    "                    1k,20k), each by a fresh solve there; may be given more than once\n"
    "  --output FILE     write the report to FILE (replaced whole) instead of stdout\n"
    "  --help            this text\n"
    "  --gm-cap DB       T's phase is not followed where |T| is more than DB below 0 dB: its\n"
    "                    -180 deg crossings there are not listed, and a gain margin beyond\n"
    "                    them reads \"more than DB\" (default 60; 0: every crossing)\n"
    "  --pm-min DEG      phase-margin threshold (default: the netlist's .margins pm=,\n"
    "                    else 45, common practice); implies --strict\n"
    "  --gm-min DB       gain-margin threshold (default: the netlist's .margins gm=,\n"
    "                    else 10, common practice); implies --strict\n"
    "  --strict          exit 1 when a loop misses a threshold or is not stable\n"
    "                    (always so when the netlist has a .margins directive)\n"
    "  --pole-limit N    compute poles only up to N unknowns (default 500;\n"
    "                    dense QZ: about 1.5 s at 500, 18 s at 1000)\n"
    "  --no-stability    skip the stability analysis (foundation figures only)\n"
    "  --no-rhp-count    above the pole limit, no right-half-plane count by the argument\n"
    "                    principle (about two factorizations per capacitor or inductor, at\n"
    "                    most 5000): the Nyquist verdict then assumes a stable open loop,\n"
    "                    unless its passive parts show it stable (no count needed)\n"
    "  --all-sources     loop census: the return ratio of every controlled source, ranked,\n"
    "                    flagging unmarked local loops whose |T| reaches 1\n"
    "  --sensitivities   how every loop's figures move with each element's value (adjoint\n"
    "                    method), ranked by their effect on the phase margin\n"
    "  --include-root DIR  .include only files inside DIR (default: anywhere)\n"
    "  --jobs N          threads sharing the sweep's frequency points (default: the number\n"
    "                    of cores); the output is the same for any N\n"
    "  With .scan or .spread cards (docs/spread.md) the report also has the spread part: the\n"
    "  scan table, the corners (the worst case of each figure and the corner behind it) and a\n"
    "  Monte Carlo (statistics, yield, desensitivity); 'tbeta spread' gives every run.\n"
    "  --samples N       Monte Carlo samples (default 100; 0: none), 100000 at most\n"
    "  --seed S          Monte Carlo seed (default 1): the same samples as 'tbeta spread --seed S'\n"
    "  --no-spread       leave the spread part out (the cards are not run: a quicker report)\n"
    "  --sens-at F1,...  also the sensitivities of |T|, its phase, |A| and |A_inf| to every\n"
    "                    element at these frequencies (Hz, 0 for DC; at most 8), ranked\n";

static const char usage_plot[] =
    "usage: tbeta plot NETLIST --svg DIR [--pole-limit N] [--no-stability] [--all-sources]\n"
    "                          [--pm-min DEG] [--gm-min DB] [--strict] [--jobs N] [--include-root DIR]\n"
    "                          [--no-rhp-count] [--gm-cap DB]\n"
    "  Writes the pictures of every loop as SVG files into DIR (created when missing):\n"
    "  LOOP-bode.svg, LOOP-nyquist.svg, LOOP-breakdown.svg (with .ideal), LOOP-impedance-PORT.svg\n"
    "  (each .zport) and step.svg (the closed-loop step response); prints the files written.\n"
    "  Each file is replaced whole.\n"
    "  --svg DIR           the folder to write to\n"
    "  --pole-limit N      poles and the step response as a sum over the modes only up to N\n"
    "                      unknowns (default 500)\n"
    "  --no-stability      no margins, poles, verdict or step response in the pictures\n"
    "  --no-rhp-count      above the pole limit, no right-half-plane count for the verdict\n"
    "  --gm-cap DB         phase crossings where |T| is more than DB below 0 dB not followed\n"
    "                      (default 60; 0: every one)\n"
    "  --all-sources       run the loop census too (its findings are in 'tbeta report')\n"
    "  --pm-min DEG, --gm-min DB, --strict\n"
    "                      exit 1 when a loop misses a threshold, as in 'tbeta report'\n"
    "  --jobs N            threads sharing the sweep's frequency points\n"
    "  --include-root DIR  .include only files inside DIR (default: anywhere)\n"
    "  --help              this text\n";

static const char usage_sweep[] =
    "usage: tbeta sweep NETLIST [--csv] [--loop NAME] [--table T] [--output FILE] [--jobs N]\n"
    "                           [--include-root DIR]\n"
    "  Prints one CSV row per .ac frequency (no DC row):\n"
    "  freq_hz,T_re,T_im,A_re,A_im,Ainf_re,Ainf_im,A0_re,A0_im,aol_re,aol_im,T_db,T_phase_deg,note\n"
    "  An empty field is a value that does not exist at that frequency; the note says why\n"
    "  (T infinite there, no .io, ...).\n"
    "  --csv         CSV output (the default and only format)\n"
    "  --loop NAME   the loop at controlled source NAME (default: the first .loop)\n"
    "  --table T     instead, a feedback table (docs/feedback.md): breakdown (needs .ideal),\n"
    "                zport:NAME (a .zport) or break (needs .break)\n"
    "  --output FILE write the table to FILE (replaced whole) instead of stdout\n"
    "  --jobs N      threads sharing the frequency points (default: the number of cores);\n"
    "                the output is the same for any N\n"
    "  --include-root DIR  .include only files inside DIR (default: anywhere)\n"
    "  --help        this text\n";

static const char usage_step[] =
    "usage: tbeta step NETLIST [--csv] [--pole-limit N] [--output FILE] [--jobs N] [--include-root DIR]\n"
    "  Prints the response of the .io output to a unit step of the .io input,\n"
    "  G x + C dx/dt = b u(t), as CSV: t_s,y. Up to the pole limit it is the exact\n"
    "  sum over the closed-loop modes; above it, time stepping with error control\n"
    "  (docs/stability.md). Overshoot, rise and settling time are in 'tbeta report'.\n"
    "  --csv           CSV output (the default and only format)\n"
    "  --pole-limit N  the sum over the modes only up to N unknowns (default 500)\n"
    "  --output FILE   write the samples to FILE (replaced whole) instead of stdout\n"
    "  --jobs N        threads sharing the sweep's frequency points (default: the number of cores)\n"
    "  --include-root DIR  .include only files inside DIR (default: anywhere)\n"
    "  --help          this text\n";

typedef struct {
    const char *command; /* "report", "sweep" or "step" */
    const char *netlist;
    const char *loop;
    bool json;
    bool strict;
    tb_options opt;
    const char *table; /* sweep --table: a feedback table instead of the loop table */
    const char *html;  /* report --html FILE */
    const char *svg;   /* plot --svg DIR */
    const char *include_root; /* --include-root DIR: .include only inside DIR */
    const char *output; /* --output FILE (NULL or "-": stdout) */
    size_t at_count;    /* report --at: the chosen frequencies */
    double at[TB_AT_MAX];
    tb_spread_report_options spread; /* report: the spread part (--samples, --seed, --no-spread, --sens-at) */
    size_t sens_count;
    double sens_at[TB_SPREAD_REPORT_AT_MAX];
    bool samples_given; /* --samples or --seed was given */
} args;

/* Text on stderr with every control character written \xHH (tb_report_escape), except, with
 * lines, newline and tab: diagnostics keep their lines and their carets' alignment. */
static void put_text(const char *s, bool lines)
{
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(s, &cp)) != 0; s += n) {
        char enc[4];
        if (tb_report_is_control(cp) && !(lines && (cp == '\n' || cp == '\t')))
            fprintf(stderr, "\\x%02X", (unsigned)cp);
        else
            fwrite(enc, 1, tb_report_utf8(cp, enc), stderr);
    }
}

/* One message on stderr, "tbeta: " first: a file name or a netlist's name in it cannot break
 * the line or drive the terminal. */
__attribute__((format(printf, 1, 2))) static void complain(const char *fmt, ...)
{
    char msg[4096];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    fputs("tbeta: ", stderr);
    put_text(msg, false);
    fputc('\n', stderr);
}

static int usage_error(const char *msg, const char *arg, const char *usage)
{
    complain("%s%s%s", msg, arg ? " " : "", arg ? arg : "");
    fputs(usage, stderr);
    return EXIT_BAD_INPUT;
}

static bool is_stability_option(const char *s)
{
    return strcmp(s, "--pm-min") == 0 || strcmp(s, "--gm-min") == 0 || strcmp(s, "--strict") == 0 ||
           strcmp(s, "--pole-limit") == 0 || strcmp(s, "--no-stability") == 0 ||
           strcmp(s, "--all-sources") == 0 || strcmp(s, "--sensitivities") == 0 ||
           strcmp(s, "--no-rhp-count") == 0 || strcmp(s, "--gm-cap") == 0;
}

/* A finite number (or, with whole, a non-negative integer) from text; false when malformed. */
static bool number_arg(const char *text, bool whole, double *out)
{
    char *end = NULL;
    errno = 0;
    double x = strtod(text, &end);
    if (errno || end == text || *end != '\0' || !isfinite(x))
        return false;
    if (whole && (x < 0 || x != floor(x) || x > 1e15))
        return false;
    *out = x;
    return true;
}

/* One stability option at argv[*i] (and its value); -1 when accepted, or an exit code. */
static int stability_option(int argc, char **argv, int *i, args *a, const char *usage)
{
    const char *s = argv[*i];
    if (strcmp(s, "--strict") == 0) {
        a->strict = true;
        return -1;
    }
    if (strcmp(s, "--no-stability") == 0) {
        a->opt.stability = false;
        return -1;
    }
    if (strcmp(s, "--no-rhp-count") == 0) {
        a->opt.rhp_count_limit = 0;
        return -1;
    }
    if (strcmp(s, "--all-sources") == 0) {
        a->opt.census = true;
        return -1;
    }
    if (strcmp(s, "--sensitivities") == 0) {
        a->opt.sensitivity = true;
        return -1;
    }
    if (*i + 1 >= argc)
        return usage_error(s, "needs a value", usage);
    const char *text = argv[++*i];
    double x = 0;
    bool whole = strcmp(s, "--pole-limit") == 0;
    if (!number_arg(text, whole, &x))
        return usage_error(whole ? "not a non-negative whole number:" : "not a number:", text, usage);
    if (!whole && x < 0) { /* a margin below zero is no margin to ask for */
        complain("%s needs 0 or more %s, got %s", s, strcmp(s, "--pm-min") == 0 ? "degrees" : "dB", text);
        fputs(usage, stderr);
        return EXIT_BAD_INPUT;
    }
    if (whole) {
        a->opt.pole_limit = (size_t)x;
    } else if (strcmp(s, "--gm-cap") == 0) {
        a->opt.gm_cap_db = x; /* not a threshold: the report is not made strict */
    } else {
        *(strcmp(s, "--pm-min") == 0 ? &a->opt.pm_min_deg : &a->opt.gm_min_db) = x;
        a->strict = true;
    }
    return -1;
}

/* "1k,20k" appended to list[*count], each item an engineering value as the netlist reads them;
 * false when an item is not one, is negative, is `below` or more, or the list grows past max. */
static bool freq_list(const char *text, double *list, size_t *count, size_t max, double below)
{
    for (const char *p = text;;) {
        const char *comma = strchr(p, ',');
        size_t len = comma ? (size_t)(comma - p) : strlen(p);
        double x = 0;
        if (len == 0 || tb_lex_value(p, len, &x) != TB_VALUE_OK || !isfinite(x) || x < 0 || x >= below ||
            *count >= max)
            return false;
        list[(*count)++] = x;
        if (!comma)
            return true;
        p = comma + 1;
    }
}

static bool is_spread_option(const char *s)
{
    return strcmp(s, "--no-spread") == 0 || strcmp(s, "--samples") == 0 || strcmp(s, "--seed") == 0 ||
           strcmp(s, "--sens-at") == 0;
}

/* One option of the report's spread part at argv[*i] (and its value); -1 when accepted, or an
 * exit code. */
static int spread_option(int argc, char **argv, int *i, args *a, const char *usage)
{
    const char *s = argv[*i];
    if (strcmp(s, "--no-spread") == 0) {
        a->spread.run = false;
        return -1;
    }
    if (*i + 1 >= argc)
        return usage_error(s, "needs a value", usage);
    const char *v = argv[++*i];
    double x = 0;
    if (strcmp(s, "--sens-at") == 0) {
        if (!freq_list(v, a->sens_at, &a->sens_count, TB_SPREAD_REPORT_AT_MAX, 1e15))
            return usage_error("--sens-at needs frequencies from 0 (DC) to 1e15 Hz such as 1k,2.5meg (at most 8), got",
                               v, usage);
    } else if (strcmp(s, "--samples") == 0) {
        if (!number_arg(v, true, &x) || x > (double)TB_SPREAD_MAX_SAMPLES)
            return usage_error("--samples needs a whole number from 0 to 100000, got", v, usage);
        a->spread.samples = (size_t)x;
        a->samples_given = true;
    } else {
        /* at most 2^53 - 1, which every JSON reader holds exactly (as 'tbeta spread') */
        if (!number_arg(v, true, &x) || x > 9007199254740991.0)
            return usage_error("--seed needs a whole number from 0 to 9007199254740991, got", v, usage);
        a->spread.seed = (uint64_t)x;
        a->samples_given = true;
    }
    return -1;
}

/* Parses argv from index `first`; returns -1 when done, or an exit code. */
static int parse_args(int argc, char **argv, int first, args *a)
{
    const char *usage = strcmp(a->command, "sweep") == 0  ? usage_sweep
                        : strcmp(a->command, "step") == 0 ? usage_step
                        : strcmp(a->command, "plot") == 0 ? usage_plot
                                                          : usage_report;
    bool report_like = strcmp(a->command, "report") == 0 || strcmp(a->command, "plot") == 0;
    for (int i = first; i < argc; i++) {
        const char *s = argv[i];
        if (s[0] == '-' && s[1] != '\0' && !accepts(a->command, s)) {
            return usage_error("unknown option", s, usage);
        } else if (strcmp(s, "--help") == 0 || strcmp(s, "-h") == 0) {
            fputs(usage, stdout);
            return EXIT_DONE;
        } else if (strcmp(s, "--at") == 0) {
            if (i + 1 >= argc || !freq_list(argv[i + 1], a->at, &a->at_count, TB_AT_MAX, INFINITY))
                return usage_error("--at needs frequencies of 0 Hz or more such as 1k,20k (at most 1000), got",
                                   i + 1 < argc ? argv[i + 1] : "nothing", usage);
            i++;
        } else if (strcmp(a->command, "report") == 0 && is_spread_option(s)) {
            int rc = spread_option(argc, argv, &i, a, usage);
            if (rc >= 0)
                return rc;
        } else if (strcmp(s, "--output") == 0) {
            if (i + 1 >= argc)
                return usage_error("--output needs a file name (- for stdout)", NULL, usage);
            a->output = argv[++i];
        } else if (strcmp(s, "--json") == 0 && strcmp(a->command, "report") == 0) {
            a->json = true;
        } else if (strcmp(s, "--html") == 0 && strcmp(a->command, "report") == 0) {
            if (i + 1 >= argc)
                return usage_error("--html needs a file name", NULL, usage);
            a->html = argv[++i];
        } else if (strcmp(s, "--include-root") == 0) {
            if (i + 1 >= argc)
                return usage_error("--include-root needs a folder", NULL, usage);
            a->include_root = argv[++i];
        } else if (strcmp(s, "--svg") == 0 && strcmp(a->command, "plot") == 0) {
            if (i + 1 >= argc)
                return usage_error("--svg needs a folder", NULL, usage);
            a->svg = argv[++i];
        } else if ((report_like && is_stability_option(s)) ||
                   (strcmp(a->command, "step") == 0 && strcmp(s, "--pole-limit") == 0)) {
            int rc = stability_option(argc, argv, &i, a, usage);
            if (rc >= 0)
                return rc;
        } else if (strcmp(s, "--csv") == 0 && strcmp(a->command, "report") != 0) {
            continue;
        } else if (strcmp(s, "--loop") == 0 && strcmp(a->command, "sweep") == 0) {
            if (i + 1 >= argc)
                return usage_error("--loop needs a source name", NULL, usage);
            a->loop = argv[++i];
        } else if (strcmp(s, "--jobs") == 0) {
            const char *v = i + 1 < argc ? argv[++i] : "nothing";
            double x = 0;
            if (!number_arg(v, true, &x) || x < 1 || x > 1024)
                return usage_error("--jobs needs a whole number from 1 to 1024, got", v, usage);
            a->opt.jobs = (unsigned)x;
        } else if (strcmp(s, "--table") == 0 && strcmp(a->command, "sweep") == 0) {
            if (i + 1 >= argc)
                return usage_error("--table needs breakdown, zport:NAME or break", NULL, usage);
            a->table = argv[++i];
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
    a->opt.at_hz = a->at_count ? a->at : NULL;
    a->opt.at_count = a->at_count;
    a->spread.at_hz = a->sens_count ? a->sens_at : NULL;
    a->spread.at_count = a->sens_count;
    if (strcmp(a->command, "plot") == 0 && !a->svg)
        return usage_error("plot needs --svg DIR", NULL, usage);
    return -1;
}

static void print_diags(const tb_diag *diag)
{
    char buf[4096];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        size_t need = tb_diag_format(diag, i, buf, sizeof buf);
        put_text(buf, true);
        if (need >= sizeof buf)
            fputs("...\n", stderr);
    }
}

/* What one document writer needs: the command's arguments, the circuit and the result. */
typedef struct {
    const args *a;
    const tb_circuit *ckt;
    const tb_result *res;
    tb_picture_kind kind; /* pictures: which, of which loop and port */
    size_t l;
    size_t port;
} document;

static tb_status picture_writer(const void *ctx, FILE *out)
{
    const document *d = ctx;
    return tb_report_svg(d->ckt, d->res, d->kind, d->l, d->port, out);
}

/* Writes doc with writer to path, whole or not at all (tb_file_write), or to stdout when
 * path is "-"; says on stderr what failed. TB_ERR_NOT_FOUND (nothing said, the old file kept)
 * when the writer has nothing to write. */
static tb_status write_document(const char *path, tb_file_writer writer, const document *doc)
{
    if (strcmp(path, "-") == 0)
        return writer(doc, stdout);
    char why[1024];
    tb_status st = tb_file_write(path, writer, doc, why, sizeof why);
    if (st == TB_ERR_NOMEM)
        complain("out of memory");
    else if (st != TB_OK && st != TB_ERR_NOT_FOUND)
        complain("%s", why);
    return st;
}

/* Writes one picture to DIR/NAME.svg, replaced whole; TB_ERR_NOT_FOUND (nothing written) when
 * the picture has nothing to show. */
static tb_status write_picture(const args *a, const tb_circuit *ckt, const tb_result *res, tb_picture_kind kind,
                               size_t l, size_t port, const char *name)
{
    char path[4096];
    snprintf(path, sizeof path, "%s/%s.svg", a->svg, name);
    document doc = {a, ckt, res, kind, l, port};
    tb_status st = write_document(path, picture_writer, &doc);
    if (st == TB_OK)
        printf("%s\n", path);
    return st;
}

static tb_status write_pictures(const args *a, const tb_circuit *ckt, const tb_result *res)
{
    if (mkdir(a->svg, 0777) != 0 && errno != EEXIST) {
        complain("cannot create %s: %s", a->svg, strerror(errno));
        return TB_ERR_IO;
    }
    char name[512];
    tb_status st = TB_OK;
    for (size_t l = 0; l < tb_result_loops(res) && (st == TB_OK || st == TB_ERR_NOT_FOUND); l++) {
        const char *loop = tb_circuit_loop_name(ckt, l);
        static const tb_picture_kind kinds[] = {TB_PIC_BODE, TB_PIC_NYQUIST, TB_PIC_BREAKDOWN};
        for (size_t k = 0; k < 3 && (st == TB_OK || st == TB_ERR_NOT_FOUND); k++) {
            snprintf(name, sizeof name, "%s-%s", loop, tb_picture_name(kinds[k]));
            st = write_picture(a, ckt, res, kinds[k], l, 0, name);
        }
        for (size_t p = 0; p < tb_zport_count(res) && (st == TB_OK || st == TB_ERR_NOT_FOUND); p++) {
            tb_zport_summary zs;
            tb_zport_loop(res, p, l, &zs, NULL);
            snprintf(name, sizeof name, "%s-impedance-%s", loop, zs.name);
            st = write_picture(a, ckt, res, TB_PIC_IMPEDANCE, l, p, name);
        }
    }
    if (st == TB_OK || st == TB_ERR_NOT_FOUND)
        st = write_picture(a, ckt, res, TB_PIC_STEP, 0, 0, "step");
    return st == TB_ERR_NOT_FOUND ? TB_OK : st;
}

static tb_status html_writer(const void *ctx, FILE *out)
{
    const document *d = ctx;
    return tb_report_html(d->ckt, d->res, out);
}

/* The command's main document (report, sweep table, step samples) to out. */
static tb_status main_writer(const void *ctx, FILE *out)
{
    const document *d = ctx;
    const args *a = d->a;
    const tb_circuit *ckt = d->ckt;
    const tb_result *res = d->res;
    if (strcmp(a->command, "report") == 0)
        return a->json ? tb_report_json(ckt, res, out) : tb_report_text(ckt, res, out);
    if (strcmp(a->command, "step") == 0) {
        tb_step_figures fig;
        tb_step_figures_get(res, &fig);
        if (!fig.computed) {
            complain("%s: no step response: %s", a->netlist, fig.why_absent ? fig.why_absent : "not computed");
            return TB_ERR_NOT_FOUND;
        }
        return tb_report_step_csv(res, out);
    }
    size_t l = 0;
    if (a->loop && tb_circuit_find_loop(ckt, a->loop, &l) != TB_OK) {
        fputs("tbeta: no .loop at '", stderr);
        put_text(a->loop, false);
        fputs("' in ", stderr);
        put_text(a->netlist, false);
        fputs("; the loops are:", stderr);
        for (size_t i = 0; i < tb_circuit_loop_count(ckt); i++) {
            fputc(' ', stderr);
            put_text(tb_circuit_loop_name(ckt, i), false);
        }
        fputc('\n', stderr);
        return TB_ERR_NOT_FOUND;
    }
    if (a->table && tb_report_feedback_csv(ckt, res, l, a->table, out) == TB_ERR_NOT_FOUND) {
        complain("%s has no table '%s' (breakdown needs .ideal and .io, zport:NAME a .zport, break a .break)",
                 a->netlist, a->table);
        return TB_ERR_NOT_FOUND;
    }
    if (a->table)
        return ferror(out) ? TB_ERR_IO : TB_OK;
    return tb_report_csv(ckt, res, l, out);
}

static tb_status write_output(const args *a, const tb_circuit *ckt, const tb_result *res)
{
    if (strcmp(a->command, "plot") == 0)
        return write_pictures(a, ckt, res);
    document doc = {.a = a, .ckt = ckt, .res = res};
    bool html_to_stdout = a->html && strcmp(a->html, "-") == 0;
    tb_status st = a->html ? write_document(a->html, html_writer, &doc) : TB_OK;
    if (st || (html_to_stdout && !a->output))
        return st; /* the page took stdout's place */
    return write_document(a->output ? a->output : "-", main_writer, &doc);
}



/* true when every loop is stable and meets the thresholds; says on stderr which does not. */
static bool thresholds_met(const tb_circuit *ckt, const tb_result *res, const char *netlist)
{
    bool ok = true;
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        tb_stability st;
        if (tb_stability_loop(res, l, &st) != TB_OK || !st.computed)
            continue;
        const char *name = tb_circuit_loop_name(ckt, l);
        if (st.verdict != TB_VERDICT_STABLE)
            complain("%s: loop %s: verdict %s", netlist, name, tb_verdict_str(st.verdict));
        if (!st.margins_determined)
            complain("%s: loop %s: the margins could not be determined (see the notes)", netlist, name);
        else if (!st.pm_ok)
            complain("%s: loop %s: phase margin %.3f deg is below %g deg", netlist, name, st.phase_margin_deg,
                     st.pm_min_deg);
        if (st.margins_determined && !st.gm_ok && st.has_gain_margin_up && st.gain_margin_up_db < st.gm_min_db)
            complain("%s: loop %s: the loop gain may rise by only %.3f dB (needs %g dB)", netlist, name,
                     st.gain_margin_up_db, st.gm_min_db);
        if (st.margins_determined && !st.gm_ok && st.has_gain_margin_down && st.gain_margin_down_db < st.gm_min_db)
            complain("%s: loop %s: the loop gain may fall by only %.3f dB (needs %g dB)", netlist, name,
                     st.gain_margin_down_db, st.gm_min_db);
        ok = ok && st.pm_ok && st.gm_ok && st.verdict == TB_VERDICT_STABLE;
    }
    const tb_census_entry *e = NULL;
    size_t count = 0;
    tb_census_get(res, &e, &count);
    for (size_t i = 0; i < count; i++) {
        if (e[i].pm_ok)
            continue;
        complain("%s: local loop at %s: phase margin %.3f deg is below the threshold", netlist, e[i].source,
                 e[i].phase_margin_deg);
        ok = false;
    }
    return ok;
}

/* The netlist on standard input (NETLIST -), named <stdin> in diagnostics; .include names
 * are then taken from the current folder. */
static tb_status read_stdin(const tb_read_options *ro, tb_diag *diag, tb_circuit **ckt)
{
    size_t cap = 1 << 16, len = 0;
    char *text = malloc(cap);
    while (text) {
        len += fread(text + len, 1, cap - len, stdin);
        if (len < cap || len > ro->max_bytes)
            break;
        char *grown = cap <= SIZE_MAX / 2 ? realloc(text, cap * 2) : NULL;
        if (!grown)
            free(text);
        text = grown;
        cap *= 2;
    }
    if (!text) {
        complain("out of memory reading the netlist from standard input");
        return TB_ERR_NOMEM;
    }
    tb_status st = TB_OK;
    if (ferror(stdin)) {
        complain("cannot read the netlist from standard input: %s", strerror(errno));
        st = TB_ERR_INPUT;
    } else if (len > ro->max_bytes) {
        complain("the netlist on standard input is larger than %zu bytes", ro->max_bytes);
        st = TB_ERR_INPUT;
    } else {
        st = tb_circuit_parse_with(text, len, "<stdin>", ro, diag, ckt);
    }
    free(text);
    return st;
}

static int run(const args *a)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    if (!diag) {
        complain("out of memory");
        return EXIT_BAD_INPUT;
    }
    tb_read_options ro;
    tb_read_options_init(&ro);
    ro.include_root = a->include_root;
    tb_status st = strcmp(a->netlist, "-") == 0 ? read_stdin(&ro, diag, &ckt)
                                                : tb_circuit_read_with(a->netlist, &ro, diag, &ckt);
    tb_options opt = a->opt;
    tb_progress *progress = tb_progress_new("sweep points");
    opt.progress = progress ? tb_progress_update : NULL;
    opt.progress_ctx = progress;
    if (st == TB_OK)
        st = tb_analyse(ckt, &opt, diag, &res);
    tb_progress_free(progress);
    if (st == TB_OK && strcmp(a->command, "report") == 0) {
        tb_spread_report_options so = a->spread;
        so.jobs = opt.jobs;
        opt.progress = NULL;
        opt.progress_ctx = NULL;
        st = tb_spread_report_run(ckt, &opt, &so, diag, res);
        if (st == TB_OK && a->samples_given && !tb_spread_report_has_spread(ckt))
            complain("%s has no .spread card: --samples and --seed have nothing to draw (docs/spread.md)",
                     a->netlist);
    }
    print_diags(diag);
    if (st == TB_OK)
        st = write_output(a, ckt, res);
    /* write_output has said what is missing (TB_ERR_NOT_FOUND); diagnostics say the rest; a
     * failed write to stdout is said once the output is flushed (finish) */
    if (st != TB_OK && st != TB_ERR_INPUT && st != TB_ERR_NOT_FOUND && tb_diag_errors(diag) == 0 &&
        !(st == TB_ERR_IO && ferror(stdout)))
        complain("%s: %s", a->netlist, tb_status_str(st));
    if (st == TB_OK && (fflush(stdout) != 0 || ferror(stdout)))
        st = TB_ERR_IO; /* said by finish */
    bool strict = a->strict || (ckt && tb_circuit_states_margins(ckt));
    bool failed = st == TB_OK && strict && !thresholds_met(ckt, res, a->netlist);
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return st != TB_OK ? EXIT_BAD_INPUT : failed ? EXIT_FAILED_CHECK : EXIT_DONE;
}

/* ---- tbeta check ------------------------------------------------------------ */

static const char usage_check[] =
    "usage: tbeta check PATH... [--glob PATTERN] [--jobs N] [--shard I/N]\n"
    "                   [--save FILE] [--against FILE] [--drift PCT] [--json FILE] [--junit FILE]\n"
    "                   [--html FILE [--html-reports]] [--output FILE] [--pole-limit N] [--no-stability]\n"
    "                   [--include-root DIR | --include-anywhere] [--no-rhp-count]\n"
    "       tbeta check --merge RESULTS.json... [--json FILE] [--junit FILE] [--save FILE] [--html FILE]\n"
    "  Reads every netlist (files as given, directories searched recursively for\n"
    "  PATTERN), analyses it and evaluates its .expect cards; prints one line per\n"
    "  netlist (the failing expectation with the value measured and the bound) and a\n"
    "  summary. Netlists are reported in path order whatever the number of threads.\n"
    "  --glob PATTERN  file names searched in directories (default *.net)\n"
    "  --jobs N        threads (default: the number of cores)\n"
    "  --shard I/N     only the files whose path hash is shard I of N (I from 1 to N):\n"
    "                  spread a library over machines, then merge their --json files\n"
    "  --save FILE     write every measured figure as JSON (a baseline)\n"
    "  --against FILE  compare with a baseline (--save or --json file): a figure that\n"
    "                  moved the worse way by more than --drift percent fails\n"
    "  --drift PCT     drift tolerance in percent (default 1)\n"
    "  --json FILE     write the full results as JSON\n"
    "  --junit FILE    write JUnit XML, one testcase per expectation\n"
    "  --html FILE     write a self-contained summary page: every netlist's status, its\n"
    "                  failures and figures (no script, nothing fetched)\n"
    "  --html-reports  with --html: also each netlist's review page (as 'tbeta report\n"
    "                  --html') into the folder STEM-reports beside FILE, linked from it\n"
    "  --output FILE   write the text summary to FILE (replaced whole) instead of stdout\n"
    "                  (a FILE of - for --save, --json, --junit or --html: that document on\n"
    "                  stdout in place of the text summary)\n"
    "  --help          this text\n"
    "  --merge         the PATHs are --json files of shards: merge them\n"
    "  --include-root DIR   .include only files inside DIR (default: the folder of the\n"
    "                  PATH each netlist came from, so a library cannot reach outside itself)\n"
    "  --include-anywhere   do not confine .include\n"
    "  --pole-limit N  poles only up to N unknowns (default 500; their cost grows\n"
    "                  as N^3: lower it for large netlists; the step response then\n"
    "                  comes from time stepping)\n"
    "  --no-stability  foundation figures only (no margins, poles or verdict)\n"
    "  --no-rhp-count  above the pole limit, no right-half-plane count by the argument\n"
    "                  principle: the Nyquist verdict then assumes a stable open loop\n"
    "  The .expect grammar and the figures an expectation may name: docs/check.md.\n"
    "  exit codes: 0 all pass; 1 an expectation failed or a figure drifted;\n"
    "  2 usage error, or a netlist could not be read or analysed.\n";

typedef struct {
    const char **paths;
    size_t count;
    const char *save;
    const char *against;
    const char *json;
    const char *junit;
    bool merge;
    tb_check_options opt;
    const char *html;   /* --html FILE: the summary page */
    bool html_reports;  /* --html-reports: each netlist's page beside it */
    const char *output; /* --output FILE: the text summary */
    char pages[4096];   /* the folder of the netlists' pages */
} check_args;

/* "I/N" with 1 <= I <= N into a 0-based index and a count. */
static bool shard_arg(const char *text, tb_check_options *opt)
{
    double i = 0;
    double n = 0;
    const char *slash = strchr(text, '/');
    char head[32];
    if (!slash || (size_t)(slash - text) >= sizeof head)
        return false;
    memcpy(head, text, (size_t)(slash - text));
    head[slash - text] = '\0';
    if (!number_arg(head, true, &i) || !number_arg(slash + 1, true, &n) || i < 1 || i > n ||
        n > 1e6)
        return false;
    opt->shard_index = (unsigned)i - 1;
    opt->shard_count = (unsigned)n;
    return true;
}

/* One option of tbeta check taking a value; -1 when accepted, or an exit code. */
static int check_value_option(const char *s, const char *v, check_args *a)
{
    double x = 0;
    if (strcmp(s, "--glob") == 0)
        a->opt.glob = v;
    else if (strcmp(s, "--save") == 0)
        a->save = v;
    else if (strcmp(s, "--against") == 0)
        a->against = v;
    else if (strcmp(s, "--json") == 0)
        a->json = v;
    else if (strcmp(s, "--junit") == 0)
        a->junit = v;
    else if (strcmp(s, "--html") == 0)
        a->html = v;
    else if (strcmp(s, "--output") == 0)
        a->output = v;
    else if (strcmp(s, "--shard") == 0 && !shard_arg(v, &a->opt))
        return usage_error("--shard needs I/N with 1 <= I <= N, got", v, usage_check);
    else if (strcmp(s, "--jobs") == 0 && (!number_arg(v, true, &x) || x < 1 || x > 1024))
        return usage_error("--jobs needs a whole number from 1 to 1024, got", v, usage_check);
    else if (strcmp(s, "--jobs") == 0)
        a->opt.jobs = (unsigned)x;
    else if (strcmp(s, "--drift") == 0 && (!number_arg(v, false, &x) || x < 0))
        return usage_error("--drift needs a percentage of 0 or more, got", v, usage_check);
    else if (strcmp(s, "--drift") == 0)
        a->opt.drift_pct = x;
    else if (strcmp(s, "--include-root") == 0)
        a->opt.include_root = v;
    else if (strcmp(s, "--pole-limit") == 0 && !number_arg(v, true, &x))
        return usage_error("not a non-negative whole number:", v, usage_check);
    else if (strcmp(s, "--pole-limit") == 0)
        a->opt.analysis.pole_limit = (size_t)x;
    return -1;
}

static bool check_takes_value(const char *s)
{
    static const char *const names[] = {"--glob",  "--save", "--against",    "--json",         "--junit",
                                        "--shard", "--jobs", "--drift",      "--pole-limit",   "--include-root",
                                        "--html",  "--output"};
    for (size_t i = 0; i < sizeof names / sizeof names[0]; i++)
        if (strcmp(s, names[i]) == 0)
            return true;
    return false;
}

/* Parses the arguments of tbeta check (argv[2..]); -1 when done, or an exit code. */
static int parse_check_args(int argc, char **argv, check_args *a)
{
    for (int i = 2; i < argc; i++) {
        const char *s = argv[i];
        if (s[0] == '-' && s[1] != '\0' && !accepts("check", s)) {
            return usage_error("unknown option", s, usage_check);
        } else if (strcmp(s, "--help") == 0 || strcmp(s, "-h") == 0) {
            fputs(usage_check, stdout);
            return EXIT_DONE;
        } else if (strcmp(s, "--html-reports") == 0) {
            a->html_reports = true;
        } else if (strcmp(s, "--include-anywhere") == 0) {
            a->opt.include_anywhere = true;
        } else if (strcmp(s, "--merge") == 0) {
            a->merge = true;
        } else if (strcmp(s, "--no-stability") == 0) {
            a->opt.analysis.stability = false;
        } else if (strcmp(s, "--no-rhp-count") == 0) {
            a->opt.analysis.rhp_count_limit = 0;
        } else if (check_takes_value(s)) {
            if (i + 1 >= argc)
                return usage_error(s, "needs a value", usage_check);
            int rc = check_value_option(s, argv[++i], a);
            if (rc >= 0)
                return rc;
        } else if (s[0] == '-' && s[1] != '\0') {
            return usage_error("unknown option", s, usage_check);
        } else {
            a->paths[a->count++] = s;
        }
    }
    if (a->count == 0)
        return usage_error(a->merge ? "no result files to merge" : "no netlist or folder given",
                           NULL, usage_check);
    if (a->merge && (a->against || a->opt.shard_count > 1 || a->html_reports))
        return usage_error("--merge takes no --against, --shard or --html-reports", NULL, usage_check);
    if (a->html_reports && (!a->html || strcmp(a->html, "-") == 0))
        return usage_error("--html-reports needs --html FILE (a file: the pages go beside it)", NULL, usage_check);
    const char *outs[] = {a->save, a->json, a->junit, a->html, a->output};
    int dashes = 0;
    for (size_t k = 0; k < sizeof outs / sizeof outs[0]; k++)
        dashes += outs[k] && strcmp(outs[k], "-") == 0;
    if (dashes > 1)
        return usage_error("only one document can go to stdout (-)", NULL, usage_check);
    if (a->html_reports) { /* FILE's folder / STEM-reports: links from the page stay relative */
        size_t n = strlen(a->html);
        size_t stem = n > 5 && strcmp(a->html + n - 5, ".html") == 0 ? n - 5 : n;
        snprintf(a->pages, sizeof a->pages, "%.*s-reports", (int)stem, a->html);
        a->opt.html_dir = a->pages;
    }
    return -1;
}

/* Writes one output file with writer, whole or not at all (or to stdout for -); false (said
 * on stderr) when it fails. */
static bool write_file(const char *path, const tb_check_run *run, tb_check_writer writer)
{
    if (strcmp(path, "-") == 0)
        return writer(run, stdout) == TB_OK; /* a failure is said by finish */
    char why[1024];
    tb_status st = tb_checkfile_write(path, run, writer, why, sizeof why);
    if (st != TB_OK)
        complain("%s", st == TB_ERR_NOMEM ? "out of memory" : why);
    return st == TB_OK;
}

/* Fills the run: the netlists checked here, or the shards' results merged. */
static int check_fill(const check_args *a, tb_check_run **run)
{
    char why[1024];
    tb_status st = tb_check_collect(a->merge ? NULL : a->paths, a->merge ? 0 : a->count, &a->opt, run);
    for (size_t i = 0; st == TB_OK && a->merge && i < a->count; i++)
        if ((st = tb_check_merge(*run, a->paths[i], why, sizeof why)) != TB_OK)
            complain("%s", why);
    if (st == TB_OK && a->merge)
        tb_check_sort(*run);
    if (st == TB_OK && !a->merge && tb_check_count(*run) == 0 && a->opt.shard_count == 1) {
        complain("no netlist matches '%s' under the paths given", a->opt.glob);
        return EXIT_BAD_INPUT;
    }
    if (st == TB_OK && !a->merge) {
        tb_progress *progress = tb_progress_new("netlists");
        tb_check_set_progress(*run, progress ? tb_progress_update : NULL, progress);
        st = tb_check_execute(*run);
        tb_progress_free(progress);
    }
    if (st == TB_OK && a->against && (st = tb_check_against(*run, a->against, why, sizeof why)) != TB_OK)
        complain("%s", why);
    else if (st == TB_ERR_NOMEM)
        complain("out of memory");
    return st == TB_OK ? -1 : EXIT_BAD_INPUT;
}

static int check_command(int argc, char **argv)
{
    check_args a = {0};
    tb_check_options_init(&a.opt);
    a.paths = calloc((size_t)argc, sizeof(char *));
    if (!a.paths) {
        complain("out of memory");
        return EXIT_BAD_INPUT;
    }
    tb_check_run *run = NULL;
    int rc = parse_check_args(argc, argv, &a);
    if (rc < 0)
        rc = check_fill(&a, &run);
    if (rc < 0) {
        for (size_t i = 0; i < tb_check_count(run); i++)
            if (tb_check_get(run, i)->errors)
                put_text(tb_check_get(run, i)->errors, true);
        bool to_stdout = false; /* a document took stdout's place */
        const char *docs[] = {a.save, a.json, a.junit, a.html};
        for (size_t k = 0; k < sizeof docs / sizeof docs[0]; k++)
            to_stdout = to_stdout || (docs[k] && strcmp(docs[k], "-") == 0);
        bool ok = true;
        if (a.output || !to_stdout)
            ok = write_file(a.output ? a.output : "-", run, tb_check_write_text);
        ok = (!a.save || write_file(a.save, run, tb_check_write_save)) && ok;
        ok = (!a.json || write_file(a.json, run, tb_check_write_json)) && ok;
        ok = (!a.junit || write_file(a.junit, run, tb_check_write_junit)) && ok;
        ok = (!a.html || write_file(a.html, run, tb_check_write_html)) && ok;
        rc = ok ? tb_check_exit_code(run) : EXIT_BAD_INPUT;
    }
    tb_check_free(run);
    free(a.paths);
    return rc;
}

/* Every command ends here: what it wrote to stdout must have got there, or it fails (exit 2)
 * saying so. */
static int finish(int rc)
{
    errno = 0;
    if (fflush(stdout) == 0 && !ferror(stdout))
        return rc;
    complain("cannot write the output: %s", errno ? strerror(errno) : "a write to standard output failed");
    return EXIT_BAD_INPUT;
}

static int command(int argc, char **argv)
{
    if (argc < 2)
        return usage_error("no netlist given", NULL, usage_main);
    if (strcmp(argv[1], "--help") == 0 || strcmp(argv[1], "-h") == 0 ||
        strcmp(argv[1], "help") == 0) {
        fputs(usage_main, stdout);
        return EXIT_DONE;
    }
    if (strcmp(argv[1], "check") == 0)
        return check_command(argc, argv);
    if (strcmp(argv[1], "spread") == 0)
        return tb_spread_command(argc, argv);
    if (strcmp(argv[1], "--version") == 0) {
        printf("tbeta %s\n", TB_VERSION);
        return EXIT_DONE;
    }
    args a = {.command = "report"};
    tb_options_init(&a.opt);
    tb_spread_report_options_init(&a.spread);
    a.opt.stability = strcmp(argv[1], "sweep") != 0; /* the sweep table needs none of it */
    a.opt.closed_loop = a.opt.stability;
    a.opt.jobs = 0; /* one thread per core unless --jobs says otherwise */
    int first = 1;
    if (strcmp(argv[1], "report") == 0 || strcmp(argv[1], "sweep") == 0 ||
        strcmp(argv[1], "step") == 0 || strcmp(argv[1], "plot") == 0) {
        a.command = argv[1];
        first = 2;
    }
    int rc = parse_args(argc, argv, first, &a);
    return rc >= 0 ? rc : run(&a);
}

int main(int argc, char **argv)
{
    /* a file-size limit makes a write fail (EFBIG) rather than end the program, so that a
     * file being written is dropped whole and the old one kept (src/checkfile.c) */
    signal(SIGXFSZ, SIG_IGN);
    tb_blaspool_park();
    return finish(command(argc, argv));
}
