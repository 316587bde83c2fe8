/* src/spreadcli.c: the 'tbeta spread' subcommand: scans, corners and Monte Carlo from the command line */
#include "spreadcli.h"

#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"
#include "lex.h"
#include "report_spread.h"
#include "spread.h"

static const char usage_spread[] =
    "usage: tbeta spread NETLIST [--scan] [--corners] [--samples N] [--seed S] [--jobs N]\n"
    "                            [--csv | --json] [--html FILE]\n"
    "       tbeta spread NETLIST --sens-at FREQ [--sens-at FREQ ...]\n"
    "  the netlist's .scan cards (--scan), its .spread cards at their corners (--corners) or\n"
    "  drawn N times (--samples N, Monte Carlo; seed S, default 1). Without a mode: every one\n"
    "  the netlist's cards allow (Monte Carlo with 200 samples). --csv and --json (stdout) and\n"
    "  --html take one mode. --jobs N: threads sharing the runs (default: one per core); the\n"
    "  numbers do not depend on it. --sens-at FREQ (Hz, 1meg, 0 for DC; up to 8): which\n"
    "  element sets |T| and its phase there, ranked (adjoint sensitivities; needs no card).\n"
    "  Cards: docs/netlist.md; method: docs/spread.md.\n"
    "exit codes: 0 done; 1 a corner or a sample fails its .expect cards or margins;\n"
    "2 usage error, unreadable or malformed netlist, or a circuit that cannot be solved.\n";

enum { DONE = 0, FAILED = 1, BAD = 2 };
enum { MODE_SCAN = 1, MODE_CORNERS = 2, MODE_MC = 4 };

#define MAX_SENS_AT 8

typedef struct {
    const char *netlist;
    unsigned modes;
    double sens_at[MAX_SENS_AT];
    size_t sens_count;
    bool csv, json;
    const char *html;
    tb_spread_options opt;
} spread_args;

static int usage(const char *msg, const char *arg)
{
    fprintf(stderr, "tbeta spread: %s%s%s%s\n%s", msg, arg ? " '" : "", arg ? arg : "", arg ? "'" : "",
            usage_spread);
    return BAD;
}

/* A whole number from min to max. */
static bool count_arg(const char *s, unsigned long long min, unsigned long long max, unsigned long long *out)
{
    if (!s || !*s || *s == '-' || *s == '+')
        return false;
    char *end = NULL;
    errno = 0;
    unsigned long long v = strtoull(s, &end, 10);
    if (errno || *end || v < min || v > max)
        return false;
    *out = v;
    return true;
}

static int value_option(const char *opt, const char *val, spread_args *a)
{
    unsigned long long v = 0;
    if (strcmp(opt, "--samples") == 0) {
        if (!count_arg(val, 1, TB_SPREAD_MAX_SAMPLES, &v))
            return usage("--samples takes a whole number from 1 to 100000, not", val);
        a->opt.samples = (size_t)v;
        a->modes |= MODE_MC;
    } else if (strcmp(opt, "--seed") == 0) {
        /* at most 2^53 - 1, which every JSON reader holds exactly */
        if (!count_arg(val, 0, 9007199254740991ull, &v))
            return usage("--seed takes a whole number from 0 to 9007199254740991, not", val);
        a->opt.seed = v;
    } else if (strcmp(opt, "--sens-at") == 0) {
        double f = 0;
        if (a->sens_count >= MAX_SENS_AT)
            return usage("at most 8 --sens-at frequencies, not another:", val);
        if (tb_lex_value(val, strlen(val), &f) != TB_VALUE_OK || !(f >= 0) || !(f < 1e15))
            return usage("--sens-at takes a frequency from 0 (DC) to 1e15 Hz (1k, 2.5meg), not", val);
        a->sens_at[a->sens_count++] = f;
    } else if (strcmp(opt, "--jobs") == 0) {
        if (!count_arg(val, 1, 64, &v))
            return usage("--jobs takes a whole number from 1 to 64, not", val);
        a->opt.jobs = (unsigned)v;
    } else {
        a->html = val;
    }
    return -1;
}

static int parse(int argc, char **argv, spread_args *a)
{
    for (int i = 2; i < argc; i++) {
        const char *s = argv[i];
        if (strcmp(s, "--help") == 0 || strcmp(s, "-h") == 0) {
            fputs(usage_spread, stdout);
            return DONE;
        } else if (strcmp(s, "--scan") == 0) {
            a->modes |= MODE_SCAN;
        } else if (strcmp(s, "--corners") == 0) {
            a->modes |= MODE_CORNERS;
        } else if (strcmp(s, "--csv") == 0) {
            a->csv = true;
        } else if (strcmp(s, "--json") == 0) {
            a->json = true;
        } else if (strcmp(s, "--samples") == 0 || strcmp(s, "--seed") == 0 || strcmp(s, "--jobs") == 0 ||
                   strcmp(s, "--html") == 0 || strcmp(s, "--sens-at") == 0) {
            if (i + 1 >= argc)
                return usage("missing value after", s);
            int rc = value_option(s, argv[++i], a);
            if (rc >= 0)
                return rc;
        } else if (s[0] == '-' && s[1] != '\0') {
            return usage("unknown option", s);
        } else if (a->netlist) {
            return usage("more than one netlist:", s);
        } else {
            a->netlist = s;
        }
    }
    if (!a->netlist)
        return usage("no netlist given", NULL);
    if (a->csv && a->json)
        return usage("--csv and --json exclude each other", NULL);
    if (a->sens_count > 0 && (a->modes || a->csv || a->json || a->html))
        return usage("--sens-at prints its text alone: leave out --scan, --corners, --samples, --csv, --json "
                     "and --html", NULL);
    return -1;
}

static void print_diags(const tb_diag *diag)
{
    char buf[2048];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        tb_diag_format(diag, i, buf, sizeof buf);
        fprintf(stderr, "%s\n", buf);
    }
}

/* The modes the netlist allows among those asked (all when none was asked). */
static unsigned allowed(const tb_circuit *ckt, unsigned asked, const char **missing)
{
    bool scans = ckt->spread && ckt->spread->axis_count > 0;
    bool spreads = ckt->spread && ckt->spread->rule_count > 0;
    unsigned can = (scans ? MODE_SCAN : 0u) | (spreads ? MODE_CORNERS | MODE_MC : 0u);
    *missing = NULL;
    if ((asked & MODE_SCAN) && !scans)
        *missing = "--scan needs a .scan card in the netlist";
    else if ((asked & (MODE_CORNERS | MODE_MC)) && !spreads)
        *missing = "--corners and --samples need a .spread card in the netlist";
    else if (!asked && !can)
        *missing = "the netlist has no .scan or .spread card (docs/netlist.md)";
    return asked ? asked : can;
}

static int write_set(const spread_args *a, const tb_circuit *ckt, const tb_spreadset *set)
{
    tb_status st;
    if (a->csv)
        st = tb_report_spread_csv(ckt, set, stdout);
    else if (a->json)
        st = tb_report_spread_json(ckt, set, stdout);
    else
        st = tb_report_spread_text(ckt, set, stdout);
    if (!st && a->html) {
        FILE *f = fopen(a->html, "w");
        if (!f) {
            fprintf(stderr, "tbeta spread: cannot write '%s': %s\n", a->html, strerror(errno));
            return BAD;
        }
        st = tb_report_spread_html(ckt, set, f);
        if (fclose(f) != 0 && !st)
            st = TB_ERR_IO;
    }
    if (st) {
        fprintf(stderr, "tbeta spread: cannot write the output: %s\n", tb_status_str(st));
        return BAD;
    }
    size_t analysed = 0;
    size_t pass = tb_spreadset_passed(set, &analysed);
    return set->kind != TB_SPREADSET_SCAN && pass < analysed ? FAILED : DONE;
}

static int run_modes(const spread_args *a, const tb_circuit *ckt, unsigned modes, tb_diag *diag)
{
    int rc = DONE;
    for (unsigned m = MODE_SCAN; m <= MODE_MC && rc != BAD; m <<= 1) {
        if (!(modes & m))
            continue;
        tb_spreadset *set = NULL;
        tb_status st = m == MODE_SCAN      ? tb_spread_scan(ckt, &a->opt, diag, &set)
                       : m == MODE_CORNERS ? tb_spread_corners(ckt, &a->opt, diag, &set)
                                           : tb_spread_monte_carlo(ckt, &a->opt, diag, &set);
        print_diags(diag);
        if (st) {
            fprintf(stderr, "tbeta spread: %s: %s\n", a->netlist, tb_status_str(st));
            return BAD;
        }
        if (m != (modes & -modes) && !a->csv && !a->json)
            fputs("\n", stdout);
        int one = write_set(a, ckt, set);
        rc = one > rc ? one : rc;
        tb_spreadset_free(set);
    }
    return rc;
}

/* --sens-at: the ranked sensitivities at each frequency asked. */
static int sensitivities(const spread_args *a, const tb_circuit *ckt)
{
    tb_diag *diag = tb_diag_new();
    int rc = diag ? DONE : BAD;
    for (size_t k = 0; rc == DONE && k < a->sens_count; k++) {
        tb_sens_entry *e = NULL;
        size_t per = 0;
        tb_status st = tb_spread_sensitivities_at(ckt, &a->opt.analysis, a->sens_at[k], diag, &e, &per);
        print_diags(diag);
        if (st == TB_ERR_USAGE) {
            rc = usage("--sens-at needs a .loop in the netlist", NULL);
        } else if (st) {
            fprintf(stderr, "tbeta spread: %s: at %g Hz: %s\n", a->netlist, a->sens_at[k], tb_status_str(st));
            rc = BAD;
        } else {
            if (k > 0)
                fputs("\n", stdout);
            rc = tb_report_sensitivities_at_text(ckt, a->sens_at[k], e, per, stdout) ? BAD : DONE;
        }
        tb_free(e);
    }
    tb_diag_free(diag);
    return rc;
}

int tb_spread_command(int argc, char **argv)
{
    spread_args a = {0};
    tb_spread_options_init(&a.opt);
    a.opt.jobs = 0;
    int rc = parse(argc, argv, &a);
    if (rc >= 0)
        return rc;
    tb_diag *diag = tb_diag_new();
    if (!diag) {
        fputs("tbeta spread: out of memory\n", stderr);
        return BAD;
    }
    tb_circuit *ckt = NULL;
    tb_status st = tb_circuit_read(a.netlist, diag, &ckt);
    print_diags(diag);
    tb_diag_free(diag);
    diag = NULL;
    if (st) {
        if (st != TB_ERR_INPUT)
            fprintf(stderr, "tbeta spread: %s: %s\n", a.netlist, tb_status_str(st));
        return BAD;
    }
    if (a.sens_count > 0) {
        rc = sensitivities(&a, ckt);
        tb_circuit_free(ckt);
        return rc;
    }
    const char *missing = NULL;
    unsigned modes = allowed(ckt, a.modes, &missing);
    unsigned single = modes & (modes - 1);
    if (missing)
        rc = usage(missing, NULL);
    else if ((a.csv || a.json || a.html) && single)
        rc = usage("--csv, --json and --html take one mode: add --scan, --corners or --samples N", NULL);
    else if (!(diag = tb_diag_new()))
        rc = BAD;
    else
        rc = run_modes(&a, ckt, modes, diag);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
    return rc;
}
