/* src/report_spread.c: scans, corners and Monte Carlo as text, CSV, JSON, SVG and an HTML page */
#include "report_spread.h"

#include <jansson.h>
#include <math.h>
#include <string.h>

#include "alloc.h"
#include "plot.h"
#include "report.h"

/* Column heads of the spread figures for people, in spreadset.c's order. */
static const char *const heads[TB_SPREAD_FIGURES] = {
    "T(0)", "unity Hz", "PM deg", "GM dB", "delay s", "A(0)", "error %", "-3dB Hz", "verdict",
};

static const char *const status_words[] = {[TB_RUN_PASS] = "pass", [TB_RUN_FAIL] = "fail",
                                           [TB_RUN_ERROR] = "not analysed"};

void tb_spread_wilson(size_t k, size_t n, double *lo, double *hi)
{
    const double z = 1.959963984540054; /* the 97.5 % point of the standard normal */
    double N = (double)n;
    double p = (double)k / N;
    double d = 1.0 + z * z / N;
    double centre = (p + z * z / (2 * N)) / d;
    double half = z / d * sqrt(p * (1 - p) / N + z * z / (4 * N * N));
    *lo = fmax(0.0, centre - half);
    *hi = fmin(1.0, centre + half);
}

/* A figure's value for a narrow column: %.5g, the verdict's word, or "--". */
static const char *cell(size_t i, const tb_figure_value *v, char *buf, size_t size)
{
    if (!v->present)
        return "--";
    if (i == TB_SPREAD_FIGURES - 1)
        return tb_figure_word(v->value);
    snprintf(buf, size, "%.5g", v->value);
    return buf;
}

static void kind_line(const tb_spreadset *set, FILE *out)
{
    size_t analysed = 0;
    size_t pass = tb_spreadset_passed(set, &analysed);
    if (set->kind == TB_SPREADSET_SCAN)
        fprintf(out, "scan: %zu run%s over %zu ax%s\n", set->runs, set->runs == 1 ? "" : "s", set->params,
                set->params == 1 ? "is" : "es");
    else if (set->kind == TB_SPREADSET_CORNERS)
        fprintf(out, "corners: %zu independent dimension%s at their extremes, %zu runs (%s)\n", set->dimensions,
                set->dimensions == 1 ? "" : "s", set->runs,
                set->reduced ? "reduced design: nominal, each dimension alone, then the corners they predict"
                             : "the nominal values, then every combination");
    else
        fprintf(out, "Monte Carlo: %zu samples, seed %llu, %zu independent draw%s (xoshiro256**, one stream "
                "per sample: the same numbers for any --jobs)\n", set->runs, set->seed, set->dimensions,
                set->dimensions == 1 ? "" : "s");
    if (set->ol_rhp_nominal) {
        fprintf(out, "  every sample's Nyquist verdict takes P (open-loop right-half-plane poles) from the nominal\n"
                "  circuit's count (P =");
        for (size_t l = 0; l < set->loops; l++)
            fprintf(out, "%s %zu", l ? "," : "", set->ol_rhp_nominal[l]);
        fprintf(out, ", argument principle), not counted again per sample\n");
    }
    fprintf(out, "  %zu of %zu runs pass (every loop stable with its margins, every .expect held)", pass, set->runs);
    if (analysed > 0 && set->kind == TB_SPREADSET_CORNERS)
        fprintf(out, ": %.1f %% of the corners", 100.0 * (double)pass / (double)analysed);
    if (analysed > 0 && set->kind == TB_SPREADSET_MONTE_CARLO) {
        double lo = 0, hi = 0;
        tb_spread_wilson(pass, analysed, &lo, &hi);
        fprintf(out, ": yield %.1f %% (95 %% interval %.1f to %.1f %%)", 100.0 * (double)pass / (double)analysed,
                100 * lo, 100 * hi);
    }
    fprintf(out, "%s", analysed < set->runs ? "" : "\n");
    if (analysed < set->runs)
        fprintf(out, "; %zu not analysed (a singular matrix at their values)\n", set->runs - analysed);
}

/* "the phase margin moves most with CL (r = -0.81), process (-0.42) and C2 (-0.20)": the
 * three parameter columns most correlated with figure i over the samples. */
static void correlation_text(const tb_spreadset *set, size_t l, size_t i, const char *what, FILE *out)
{
    size_t best[3] = {SIZE_MAX, SIZE_MAX, SIZE_MAX};
    double rb[3] = {0, 0, 0};
    for (size_t p = 0; p < set->params; p++) {
        double r = 0;
        if (!tb_spreadset_correlation(set, l, i, p, &r))
            continue;
        for (size_t k = 0; k < 3; k++)
            if (best[k] == SIZE_MAX || fabs(r) > fabs(rb[k])) {
                for (size_t m = 2; m > k; m--) {
                    best[m] = best[m - 1];
                    rb[m] = rb[m - 1];
                }
                best[k] = p;
                rb[k] = r;
                break;
            }
    }
    if (best[0] == SIZE_MAX)
        return;
    char name[128];
    fprintf(out, "  %s moves most with %s (r = %+.2f)", what, tb_report_escape(set->param_names[best[0]], name, sizeof name),
            rb[0]);
    for (size_t k = 1; k < 3 && best[k] != SIZE_MAX; k++)
        fprintf(out, "%s%s (%+.2f)", k + 1 < 3 && best[k + 1] != SIZE_MAX ? ", " : " and ",
                tb_report_escape(set->param_names[best[k]], name, sizeof name), rb[k]);
    fputs(" over the samples (correlation)\n", out);
}

/* The verdicts of loop l counted over the runs. */
static void verdict_counts(const tb_spreadset *set, size_t l, FILE *out)
{
    size_t count[4] = {0};
    for (size_t r = 0; r < set->runs; r++) {
        const tb_figure_value *v = &tb_spreadset_row(set, r, l)[TB_SPREAD_FIGURES - 1];
        count[v->present && v->value >= 0 && v->value <= 3 ? (size_t)v->value : 0]++;
    }
    fprintf(out, "  verdict    stable %zu, marginal %zu, unstable %zu, undecided or not analysed %zu\n", count[1],
            count[2], count[3], count[0]);
}

/* "RF=10.01k C1=1.03n" for run r. */
static void run_values(const tb_spreadset *set, size_t r, FILE *out)
{
    char buf[40];
    for (size_t p = 0; p < set->params; p++) {
        char name[128];
        fprintf(out, "%s%s=%s", p ? " " : "", tb_report_escape(set->param_names[p], name, sizeof name),
                tb_plot_eng(set->param_values[r * set->params + p], "", buf, sizeof buf));
    }
}

static void scan_text(const tb_circuit *ckt, const tb_spreadset *set, size_t l, FILE *out)
{
    char buf[64], name[128];
    fputs("  ", out);
    for (size_t p = 0; p < set->params; p++)
        fprintf(out, "%-11s", tb_report_escape(set->param_names[p], name, sizeof name));
    for (size_t i = 0; i < TB_SPREAD_FIGURES; i++)
        fprintf(out, "%-11s", heads[i]);
    fputs("\n", out);
    for (size_t r = 0; r < set->runs; r++) {
        fputs("  ", out);
        for (size_t p = 0; p < set->params; p++)
            fprintf(out, "%-11s", tb_plot_eng(set->param_values[r * set->params + p], "", buf, sizeof buf));
        for (size_t i = 0; i < TB_SPREAD_FIGURES; i++)
            fprintf(out, "%-11s", cell(i, &tb_spreadset_row(set, r, l)[i], buf, sizeof buf));
        fputs("\n", out);
    }
    (void)ckt;
}

/* Which end of figure i is its worst case over the runs (by the figure table's direction): -1 the
 * lowest, +1 the highest, 0 neither (a gain or a frequency, worse either way). */
static int worse_end(size_t i, const tb_spread_stats *s)
{
    tb_worse w = tb_figure_at((size_t)tb_spreadset_figure(i))->worse;
    if (w == TB_WORSE_LOWER)
        return -1;
    if (w == TB_WORSE_HIGHER)
        return 1;
    if (w == TB_WORSE_FARTHER)
        return fabs(s->min) > fabs(s->max) ? -1 : 1;
    return 0;
}

static tb_status corner_text(const tb_spreadset *set, size_t l, FILE *out)
{
    char a[64], b[64], c[64];
    fprintf(out, "  %-10s %-12s %-22s %-22s %s\n", "figure", "nominal", "lowest (run)", "highest (run)", "worst");
    bool used[TB_SPREAD_FIGURES * 2] = {false};
    size_t which[TB_SPREAD_FIGURES * 2] = {0};
    for (size_t i = 0; i + 1 < TB_SPREAD_FIGURES; i++) {
        tb_spread_stats s;
        tb_status st = tb_spreadset_stats(set, l, i, &s);
        if (st)
            return st;
        const tb_figure_value *nom = &tb_spreadset_row(set, set->nominal == SIZE_MAX ? 0 : set->nominal, l)[i];
        char lo[96] = "--", hi[96] = "--";
        if (s.present) {
            tb_figure_value vmin = {true, s.min, NULL}, vmax = {true, s.max, NULL};
            snprintf(lo, sizeof lo, "%s (%zu)", cell(i, &vmin, a, sizeof a), s.min_run);
            snprintf(hi, sizeof hi, "%s (%zu)", cell(i, &vmax, b, sizeof b), s.max_run);
            used[2 * i] = used[2 * i + 1] = true;
            which[2 * i] = s.min_run;
            which[2 * i + 1] = s.max_run;
        }
        int end = s.present ? worse_end(i, &s) : 0;
        fprintf(out, "  %-10s %-12s %-22s %-22s %s%s\n", heads[i], cell(i, nom, c, sizeof c), lo, hi,
                end < 0 ? "lowest" : end > 0 ? "highest" : "--", s.present < set->runs ? "  (absent in some runs)" : "");
    }
    verdict_counts(set, l, out);
    fputs("  the runs named above:\n", out);
    for (size_t r = 0; r < set->runs; r++) {
        bool named = false;
        for (size_t k = 0; k < 2 * TB_SPREAD_FIGURES; k++)
            named = named || (used[k] && which[k] == r);
        if (!named)
            continue;
        fprintf(out, "    %zu: ", r);
        run_values(set, r, out);
        fprintf(out, " (%s)\n", status_words[set->status[r]]);
    }
    return TB_OK;
}

/* The spread of A against that of the loop source's gain, beside 1/|1 + T|. */
static void desens_text(const tb_spreadset *set, size_t l, FILE *out)
{
    tb_spread_desens d;
    if (!tb_spreadset_desens(set, l, 0, &d) || !(d.spread_k > 0))
        return;
    fprintf(out, "  desensitivity: the loop source's gain spreads %.3g %% (sigma/mean)\n"
            "  %-12s %-16s %-16s %-16s\n", 100 * d.spread_k, "at", "sigma(A)/|A|", "|S| = 1/|1+T|",
            "|S| x gain spread");
    char f[32];
    for (size_t i = 0; i < set->probes.count; i++) {
        if (!tb_spreadset_desens(set, l, i, &d))
            continue;
        fprintf(out, "  %-12s %-16.4g %-16.4g %-16.4g\n", i == 0 ? "DC" : tb_plot_eng(d.hz, "Hz", f, sizeof f),
                100 * d.spread_A, d.S, 100 * d.S * d.spread_k);
    }
    fputs("  (spreads in %; A also spreads with every other part, so the first column may exceed the\n"
          "  last, which is the share the gain alone explains to first order, with A0 << A)\n", out);
}

static tb_status monte_carlo_text(const tb_spreadset *set, size_t l, FILE *out)
{
    fprintf(out, "  %-10s %-11s %-11s %-11s %-11s %-11s %-11s %-11s\n", "figure", "mean", "sigma", "min", "5 %",
            "median", "95 %", "max");
    for (size_t i = 0; i + 1 < TB_SPREAD_FIGURES; i++) {
        tb_spread_stats s;
        tb_status st = tb_spreadset_stats(set, l, i, &s);
        if (st)
            return st;
        if (s.present == 0) {
            fprintf(out, "  %-10s absent in every sample\n", heads[i]);
            continue;
        }
        fprintf(out, "  %-10s %-11.5g %-11.4g %-11.5g %-11.5g %-11.5g %-11.5g %-11.5g", heads[i], s.mean, s.sigma,
                s.min, s.p[1], s.p[2], s.p[3], s.max);
        if (s.present < set->runs)
            fprintf(out, " (in %zu samples)", s.present);
        fputs("\n", out);
    }
    verdict_counts(set, l, out);
    correlation_text(set, l, 2, "the phase margin", out);
    desens_text(set, l, out);
    return TB_OK;
}

tb_status tb_report_spread_body(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    char name[512];
    kind_line(set, out);
    tb_status st = TB_OK;
    for (size_t l = 0; l < set->loops && !st; l++) {
        fprintf(out, "\nloop at %s\n", tb_report_escape(tb_circuit_loop_name(ckt, l), name, sizeof name));
        if (set->kind == TB_SPREADSET_SCAN)
            scan_text(ckt, set, l, out);
        else if (set->kind == TB_SPREADSET_CORNERS)
            st = corner_text(set, l, out);
        else
            st = monte_carlo_text(set, l, out);
    }
    if (st)
        return st;
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

tb_status tb_report_spread_text(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    char name[512];
    fprintf(out, "tbeta %s: spread of %s\n", TB_VERSION, tb_report_escape(ckt->file, name, sizeof name));
    tb_status st = tb_report_spread_body(ckt, set, out);
    fprintf(out, "\ncaution: %s\n", tb_report_caution);
    if (st)
        return st;
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

/* ---- CSV ------------------------------------------------------------------------- */

tb_status tb_report_spread_csv(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    char name[256];
    fputs("run,status", out);
    for (size_t p = 0; p < set->params; p++)
        fprintf(out, ",%s", tb_report_escape(set->param_names[p], name, sizeof name));
    for (size_t l = 0; l < set->loops; l++)
        for (size_t i = 0; i < TB_SPREAD_FIGURES; i++)
            fprintf(out, ",%s.%s", tb_report_escape(tb_circuit_loop_name(ckt, l), name, sizeof name),
                    tb_figure_at((size_t)tb_spreadset_figure(i))->name);
    fputs("\n", out);
    for (size_t r = 0; r < set->runs; r++) {
        fprintf(out, "%zu,%s", r, status_words[set->status[r]]);
        for (size_t p = 0; p < set->params; p++)
            tb_report_cell_real(out, true, set->param_values[r * set->params + p]);
        for (size_t l = 0; l < set->loops; l++)
            for (size_t i = 0; i < TB_SPREAD_FIGURES; i++) {
                const tb_figure_value *v = &tb_spreadset_row(set, r, l)[i];
                if (i == TB_SPREAD_FIGURES - 1)
                    fprintf(out, ",%s", v->present ? tb_figure_word(v->value) : "");
                else
                    tb_report_cell_real(out, v->present, v->value);
            }
        fputs("\n", out);
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

/* ---- JSON ------------------------------------------------------------------------ */

/* Monte Carlo: the nominal circuit's open-loop counts every sample's verdict used, else null. */
static json_t *nominal_counts_json(const tb_spreadset *set)
{
    if (!set->ol_rhp_nominal)
        return json_null();
    json_t *a = json_array();
    for (size_t l = 0; a && l < set->loops; l++)
        json_array_append_new(a, json_integer((json_int_t)set->ol_rhp_nominal[l]));
    return a;
}

static json_t *num(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

/* obj[key] = val; false when out of memory (val is taken either way). */
static bool put(json_t *obj, const char *key, json_t *val)
{
    return val && json_object_set_new(obj, key, val) == 0;
}

static json_t *figure_json(size_t i, const tb_figure_value *v)
{
    if (!v->present)
        return json_null();
    return i == TB_SPREAD_FIGURES - 1 ? json_string(tb_figure_word(v->value)) : num(v->value);
}

static json_t *run_json(const tb_circuit *ckt, const tb_spreadset *set, size_t r)
{
    json_t *run = json_object();
    json_t *values = json_object();
    json_t *loops = json_object();
    bool ok = run && values && loops && put(run, "run", json_integer((json_int_t)r)) &&
              put(run, "status", json_string(status_words[set->status[r]]));
    for (size_t p = 0; ok && p < set->params; p++)
        ok = put(values, set->param_names[p], num(set->param_values[r * set->params + p]));
    for (size_t l = 0; ok && l < set->loops; l++) {
        json_t *figs = json_object();
        ok = figs && put(loops, tb_circuit_loop_name(ckt, l), figs);
        for (size_t i = 0; ok && i < TB_SPREAD_FIGURES; i++)
            ok = put(figs, tb_figure_at((size_t)tb_spreadset_figure(i))->name,
                     figure_json(i, &tb_spreadset_row(set, r, l)[i]));
    }
    ok = ok && put(run, "values", json_incref(values)) && put(run, "loops", json_incref(loops));
    json_decref(values);
    json_decref(loops);
    if (!ok) {
        json_decref(run);
        return NULL;
    }
    return run;
}

static json_t *stats_json(const tb_spreadset *set, size_t l, bool *nomem)
{
    json_t *all = json_object();
    bool ok = all != NULL;
    for (size_t i = 0; ok && i + 1 < TB_SPREAD_FIGURES; i++) {
        tb_spread_stats s;
        ok = tb_spreadset_stats(set, l, i, &s) == TB_OK;
        json_t *o = ok ? json_object() : NULL;
        ok = o && put(all, tb_figure_at((size_t)tb_spreadset_figure(i))->name, o) &&
             put(o, "present", json_integer((json_int_t)s.present));
        if (ok && s.present > 0) {
            ok = put(o, "mean", num(s.mean)) && put(o, "sigma", num(s.sigma)) && put(o, "min", num(s.min)) &&
                 put(o, "min_run", json_integer((json_int_t)s.min_run)) && put(o, "max", num(s.max)) &&
                 put(o, "max_run", json_integer((json_int_t)s.max_run)) && put(o, "p1", num(s.p[0])) &&
                 put(o, "p5", num(s.p[1])) && put(o, "p50", num(s.p[2])) && put(o, "p95", num(s.p[3])) &&
                 put(o, "p99", num(s.p[4]));
            int end = worse_end(i, &s);
            ok = ok && put(o, "worst", end ? num(end < 0 ? s.min : s.max) : json_null()) &&
                 put(o, "worst_run", end ? json_integer((json_int_t)(end < 0 ? s.min_run : s.max_run)) : json_null());
        }
        json_t *corr = ok && set->kind == TB_SPREADSET_MONTE_CARLO ? json_object() : NULL;
        if (corr)
            ok = put(o, "correlation", corr);
        for (size_t p = 0; corr && ok && p < set->params; p++) {
            double r = 0;
            ok = put(corr, set->param_names[p],
                     tb_spreadset_correlation(set, l, i, p, &r) ? num(r) : json_null());
        }
    }
    if (!ok) {
        json_decref(all);
        *nomem = true;
        return NULL;
    }
    return all;
}

/* Loop l's desensitivity over the probes (null when the loop source's gain does not spread). */
static json_t *desens_json(const tb_spreadset *set, size_t l)
{
    tb_spread_desens d;
    if (!tb_spreadset_desens(set, l, 0, &d) || !(d.spread_k > 0))
        return json_null();
    json_t *rows = json_array();
    bool ok = rows != NULL;
    for (size_t i = 0; ok && i < set->probes.count; i++) {
        if (!tb_spreadset_desens(set, l, i, &d))
            continue;
        json_t *o = json_object();
        ok = o && json_array_append_new(rows, o) == 0 && put(o, "hz", num(d.hz)) &&
             put(o, "spread_A", num(d.spread_A)) && put(o, "spread_k", num(d.spread_k)) && put(o, "S", num(d.S));
    }
    if (!ok) {
        json_decref(rows);
        return NULL;
    }
    return rows;
}

static const char *const kind_words[] = {[TB_SPREADSET_SCAN] = "scan", [TB_SPREADSET_CORNERS] = "corners",
                                         [TB_SPREADSET_MONTE_CARLO] = "monte_carlo"};

struct json_t *tb_report_spread_json_object(const tb_circuit *ckt, const tb_spreadset *set, bool whole)
{
    size_t analysed = 0;
    size_t pass = tb_spreadset_passed(set, &analysed);
    json_t *root = json_object();
    json_t *runs = json_array();
    json_t *stats = json_object();
    bool ok = root && runs && stats &&
              (!whole || (put(root, "tbeta", json_string(TB_VERSION)) &&
                          put(root, "netlist", tb_report_json_text(ckt->file)))) &&
              put(root, "kind", json_string(kind_words[set->kind])) &&
              put(root, "dimensions", json_integer((json_int_t)set->dimensions)) &&
              put(root, "passed", json_integer((json_int_t)pass)) &&
              put(root, "analysed", json_integer((json_int_t)analysed));
    if (ok && set->kind == TB_SPREADSET_MONTE_CARLO) {
        double lo = 0, hi = 0;
        if (analysed)
            tb_spread_wilson(pass, analysed, &lo, &hi);
        ok = put(root, "samples", json_integer((json_int_t)set->runs)) &&
             put(root, "seed", json_integer((json_int_t)set->seed)) &&
             put(root, "yield", analysed ? num((double)pass / (double)analysed) : json_null()) &&
             put(root, "yield_interval_95", analysed ? json_pack("[ff]", lo, hi) : json_null()) &&
             put(root, "open_loop_rhp_from_nominal", nominal_counts_json(set));
    }
    if (ok && set->kind == TB_SPREADSET_CORNERS)
        ok = put(root, "reduced", json_boolean(set->reduced));
    for (size_t r = 0; ok && r < set->runs; r++)
        ok = json_array_append_new(runs, run_json(ckt, set, r)) == 0;
    bool nomem = false;
    for (size_t l = 0; ok && set->kind != TB_SPREADSET_SCAN && l < set->loops; l++) {
        json_t *one = stats_json(set, l, &nomem);
        ok = put(stats, tb_circuit_loop_name(ckt, l), one);
        if (ok && set->kind == TB_SPREADSET_MONTE_CARLO)
            ok = put(one, "desensitivity", desens_json(set, l));
    }
    ok = ok && put(root, "runs", json_incref(runs)) && put(root, "statistics", json_incref(stats)) &&
         (!whole || put(root, "caution", json_string(tb_report_caution)));
    json_decref(runs);
    json_decref(stats);
    if (!ok) {
        json_decref(root);
        return NULL;
    }
    return root;
}

tb_status tb_report_spread_json(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    json_t *root = tb_report_spread_json_object(ckt, set, true);
    if (!root)
        return TB_ERR_NOMEM;
    int rc = json_dumpf(root, out, JSON_INDENT(2) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (rc == 0)
        fputs("\n", out);
    if (ferror(out))
        return TB_ERR_IO;
    return rc == 0 ? TB_OK : TB_ERR_NOMEM;
}

/* ---- SVG and HTML ------------------------------------------------------------------- */

/* The curves of a scan's picture: one per loop against the scanned value; with two axes, one
 * per value of the second (loop 0's figures), the first axis along x. At most TB_STYLE_GUIDE. */
typedef struct {
    size_t inner;  /* runs per value of the first axis (1 with one axis) */
    size_t points; /* points per curve */
    size_t curves;
} scan_shape;

static scan_shape shape_of(const tb_spreadset *set)
{
    scan_shape sh = {1, set->runs, set->loops};
    if (set->params >= 2) {
        while (sh.inner < set->runs && set->param_values[sh.inner * set->params] == set->param_values[0])
            sh.inner++;
        sh.points = set->runs / sh.inner;
        sh.curves = sh.inner;
    }
    if (sh.curves > TB_STYLE_GUIDE)
        sh.curves = TB_STYLE_GUIDE;
    return sh;
}

/* Figure i of curve c's point k. */
static const tb_figure_value *curve_value(const tb_spreadset *set, const scan_shape *sh, size_t c, size_t k, size_t i,
                                          double *x)
{
    size_t r = set->params >= 2 ? k * sh->inner + c : k;
    *x = set->param_values[r * set->params];
    return &tb_spreadset_row(set, r, set->params >= 2 ? 0 : c)[i];
}

/* Figure i against the first scanned value, every curve, in a panel at top. */
static tb_status scan_panel(tb_picture *pic, const tb_spreadset *set, size_t i, double top, const char *ylabel,
                            double guide)
{
    scan_shape sh = shape_of(set);
    size_t cells = sh.points * (sh.curves ? sh.curves : 1);
    double *x = tb_malloc(cells, sizeof(double));
    double *y = tb_malloc(cells, sizeof(double));
    bool *ok = tb_malloc(cells, sizeof(bool));
    if (!x || !y || !ok) {
        tb_free(x);
        tb_free(y);
        tb_free(ok);
        return TB_ERR_NOMEM;
    }
    double x0 = INFINITY, x1 = -INFINITY, y0 = INFINITY, y1 = -INFINITY;
    for (size_t c = 0; c < sh.curves; c++)
        for (size_t k = 0; k < sh.points; k++) {
            size_t at = c * sh.points + k;
            const tb_figure_value *v = curve_value(set, &sh, c, k, i, &x[at]);
            x0 = fmin(x0, x[at]);
            x1 = fmax(x1, x[at]);
            ok[at] = v->present;
            y[at] = v->value;
            if (v->present) {
                y0 = fmin(y0, v->value);
                y1 = fmax(y1, v->value);
            }
        }
    bool log_x = x0 > 0 && x1 / x0 > 20;
    bool log_y = i == 1 && y0 > 0 && y1 / y0 > 20;
    if (!(y0 < y1)) {
        double pad = isfinite(y0) ? fmax(1.0, fabs(y0) * 0.1) : 1.0;
        y0 = isfinite(y0) ? y0 - pad : 0;
        y1 = isfinite(y1) ? y1 + pad : 1;
        if (log_y && y0 <= 0)
            log_y = false;
    }
    if (!(x0 < x1))
        x1 = x0 + 1;
    tb_panel p = {x0, x1, y0, y1, log_x, log_y, 90, top, 560, 200};
    tb_plot_axes(pic, &p, set->param_names[0], ylabel);
    if (guide > y0 && guide < y1)
        tb_plot_line(pic, &p, x0, guide, x1, guide, TB_STYLE_GUIDE);
    for (size_t c = 0; c < sh.curves; c++)
        tb_plot_series(pic, &p, x + c * sh.points, y + c * sh.points, ok + c * sh.points, sh.points, (tb_style)c);
    tb_free(x);
    tb_free(y);
    tb_free(ok);
    return TB_OK;
}

/* The phase margin (with its threshold) and the unity crossing against the (first) scanned value. */
static tb_status scan_svg(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    char title[512], name[256], value[32];
    snprintf(title, sizeof title, "%s: phase margin and unity crossing over %s", ckt->file, set->param_names[0]);
    tb_picture pic;
    tb_plot_begin(&pic, out, 860, 560, title);
    /* the phase-margin threshold as a guide: the netlist's .margins, else 45 degrees (common practice) */
    double pm_min = ckt->margins.has_pm ? ckt->margins.pm_min_deg : 45.0;
    tb_status st = scan_panel(&pic, set, 2, 50, "phase margin (deg)", pm_min);
    if (!st)
        st = scan_panel(&pic, set, 1, 310, "unity crossing (Hz)", NAN);
    scan_shape sh = shape_of(set);
    for (size_t c = 0; !st && c < sh.curves; c++) {
        if (set->params >= 2)
            snprintf(title, sizeof title, "%s = %s (loop at %s)",
                     tb_report_escape(set->param_names[1], name, sizeof name),
                     tb_plot_eng(set->param_values[c * set->params + 1], "", value, sizeof value),
                     tb_circuit_loop_name(ckt, 0));
        else
            snprintf(title, sizeof title, "loop at %s", tb_report_escape(tb_circuit_loop_name(ckt, c), name, sizeof name));
        tb_plot_legend(&pic, (tb_style)c, title);
    }
    bool written = tb_plot_end(&pic);
    return st ? st : written ? TB_OK : TB_ERR_IO;
}

/* The histogram of loop 0's phase margin over the samples (20 bins between the extremes) as
 * a step outline, with the phase-margin threshold as a guide. */
#define HISTOGRAM_BINS 20
static tb_status histogram_svg(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    tb_spread_stats s;
    tb_status st = tb_spreadset_stats(set, 0, 2, &s);
    if (st || s.present < 2 || !(s.max > s.min))
        return st;
    double x[2 * HISTOGRAM_BINS + 2], y[2 * HISTOGRAM_BINS + 2];
    size_t count[HISTOGRAM_BINS] = {0};
    double width = (s.max - s.min) / HISTOGRAM_BINS;
    for (size_t r = 0; r < set->runs; r++) {
        const tb_figure_value *v = &tb_spreadset_row(set, r, 0)[2];
        if (v->present) {
            size_t b = (size_t)((v->value - s.min) / width);
            count[b < HISTOGRAM_BINS ? b : HISTOGRAM_BINS - 1]++;
        }
    }
    size_t most = 1;
    for (size_t b = 0; b < HISTOGRAM_BINS; b++) {
        most = count[b] > most ? count[b] : most;
        x[2 * b + 1] = x[2 * b + 2] = s.min + width * (double)b;
        x[2 * b + 2] += width;
        y[2 * b + 1] = y[2 * b + 2] = (double)count[b];
    }
    x[0] = s.min;
    y[0] = 0;
    x[2 * HISTOGRAM_BINS + 1] = s.max;
    y[2 * HISTOGRAM_BINS + 1] = 0;
    char title[512], name[256];
    snprintf(title, sizeof title, "%s: phase margin at %s over %zu samples", ckt->file,
             tb_report_escape(tb_circuit_loop_name(ckt, 0), name, sizeof name), s.present);
    tb_picture pic;
    tb_plot_begin(&pic, out, 860, 320, title);
    tb_panel p = {s.min, s.max, 0, (double)most * 1.1, false, false, 90, 50, 560, 220};
    tb_plot_axes(&pic, &p, "phase margin (deg)", "samples per bin");
    double pm_min = ckt->margins.has_pm ? ckt->margins.pm_min_deg : 45.0;
    if (pm_min > s.min && pm_min < s.max)
        tb_plot_line(&pic, &p, pm_min, 0, pm_min, (double)most * 1.1, TB_STYLE_GUIDE);
    tb_plot_series(&pic, &p, x, y, NULL, 2 * HISTOGRAM_BINS + 2, TB_STYLE_MAIN);
    tb_plot_legend(&pic, TB_STYLE_MAIN, "samples");
    tb_plot_legend(&pic, TB_STYLE_GUIDE, "phase-margin threshold");
    return tb_plot_end(&pic) ? TB_OK : TB_ERR_IO;
}

bool tb_report_spread_has_svg(const tb_spreadset *set)
{
    return set && ((set->kind == TB_SPREADSET_SCAN && set->params >= 1 && set->runs > 1) ||
                   (set->kind == TB_SPREADSET_MONTE_CARLO && set->loops > 0 && set->runs > 1));
}

tb_status tb_report_spread_svg(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    if (!tb_report_spread_has_svg(set))
        return TB_OK;
    return set->kind == TB_SPREADSET_SCAN ? scan_svg(ckt, set, out) : histogram_svg(ckt, set, out);
}

static void html_escape(FILE *out, const char *s)
{
    for (; *s; s++) {
        if (*s == '<')
            fputs("&lt;", out);
        else if (*s == '>')
            fputs("&gt;", out);
        else if (*s == '&')
            fputs("&amp;", out);
        else
            fputc(*s, out);
    }
}

tb_status tb_report_spread_html(const tb_circuit *ckt, const tb_spreadset *set, FILE *out)
{
    if (!ckt || !set || !out)
        return TB_ERR_USAGE;
    char *text = NULL;
    size_t len = 0;
    FILE *mem = open_memstream(&text, &len);
    if (!mem)
        return TB_ERR_NOMEM;
    tb_status st = tb_report_spread_text(ckt, set, mem);
    if (fclose(mem) != 0 && !st)
        st = TB_ERR_NOMEM;
    if (st) {
        free(text);
        return st;
    }
    char name[512];
    const char *file = tb_report_escape(ckt->file, name, sizeof name);
    fputs("<!DOCTYPE html>\n<html lang=\"en\"><head><meta charset=\"utf-8\"><title>", out);
    html_escape(out, file);
    fputs(": spread</title>\n<style>body{font-family:sans-serif;margin:2em}pre{font-size:13px}</style>"
          "</head><body>\n<h1>Spread of ", out);
    html_escape(out, file);
    fputs("</h1>\n", out);
    if (tb_report_spread_has_svg(set)) {
        fputs("<figure>\n", out);
        st = tb_report_spread_svg(ckt, set, out);
        fputs("</figure>\n", out);
    }
    fputs("<pre>", out);
    html_escape(out, text);
    fputs("</pre>\n</body></html>\n", out);
    free(text);
    if (st)
        return st;
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

/* ---- sensitivities at a chosen frequency ---------------------------------------------------- */

/* Below 1e-12 a normalized sensitivity is rounding error: 0 in this table for people. */
static double for_people(double x)
{
    return fabs(x) < 1e-12 ? 0.0 : x;
}

/* The three entries with the largest |phase| effect, into best (SIZE_MAX where fewer). */
static void top_phase(const tb_sens_entry *e, size_t per, size_t best[3])
{
    best[0] = best[1] = best[2] = SIZE_MAX;
    for (size_t i = 0; i < per; i++) {
        if (!e[i].has_T)
            continue;
        for (size_t k = 0; k < 3; k++)
            if (best[k] == SIZE_MAX || fabs(e[i].T_phase_deg) > fabs(e[best[k]].T_phase_deg)) {
                for (size_t m = 2; m > k; m--)
                    best[m] = best[m - 1];
                best[k] = i;
                break;
            }
    }
}

static void ranked(FILE *out, const tb_sens_entry *e, const size_t idx[3], bool phase)
{
    char name[128];
    for (size_t k = 0; k < 3 && idx[k] != SIZE_MAX; k++)
        fprintf(out, "%s%s (%+.3g %s)", k == 0 ? "" : k + 1 < 3 && idx[k + 1] != SIZE_MAX ? ", " : " and ",
                tb_report_escape(e[idx[k]].element, name, sizeof name),
                phase ? e[idx[k]].T_phase_deg : e[idx[k]].T_mag, phase ? "deg/%" : "%/%");
}

/* "at 1.4MHz |T| is set by G2 (+1 %/%), E1 (+1 %/%) and G1 (+1 %/%);\n  its phase by ..." for one
 * loop's ranked entries (indent before each line). */
static void sens_sentence(FILE *out, const char *at, const tb_sens_entry *e, size_t per, const char *indent)
{
    if (per == 0) {
        fprintf(out, "%sno element has a value to vary\n", indent);
        return;
    }
    size_t mag[3] = {SIZE_MAX, SIZE_MAX, SIZE_MAX}, ph[3];
    for (size_t k = 0; k < 3 && k < per; k++)
        mag[k] = e[k].has_T ? k : SIZE_MAX;
    top_phase(e, per, ph);
    if (mag[0] == SIZE_MAX) {
        fprintf(out, "%sT is zero or infinite there: no sensitivities of T\n", indent);
        return;
    }
    fprintf(out, "%sat %s |T| is set by ", indent, at);
    ranked(out, e, mag, false);
    if (ph[0] != SIZE_MAX && fabs(e[ph[0]].T_phase_deg) > 1e-9) {
        fprintf(out, ";\n%sits phase by ", indent);
        ranked(out, e, ph, true);
        fputs("\n", out);
    } else {
        fputs("; no element moves its phase\n", out);
    }
}

static const char *where(double f, char *buf, size_t size)
{
    return f == 0 ? "DC" : tb_plot_eng(f, "Hz", buf, size);
}

tb_status tb_report_sensitivities_at_body(const tb_circuit *ckt, double f, const tb_sens_entry *entries, size_t per,
                                          FILE *out)
{
    if (!ckt || !out || (per > 0 && !entries))
        return TB_ERR_USAGE;
    char hz[32], name[512], v[32];
    const char *at = where(f, hz, sizeof hz);
    for (size_t l = 0; l < ckt->loop_count; l++) {
        const tb_sens_entry *e = entries + l * per;
        fprintf(out, "\nloop at %s\n", tb_report_escape(tb_circuit_loop_name(ckt, l), name, sizeof name));
        sens_sentence(out, at, e, per, "  ");
        fprintf(out, "  %-14s %-11s %-11s %-12s %-11s %-11s\n", "element", "value", "|T| %/%", "phase deg/%",
                "|A| %/%", "|A_inf| %/%");
        for (size_t i = 0; i < per; i++) {
            char a[32] = "--", b[32] = "--", c[32] = "--", d[32] = "--";
            if (e[i].has_T) {
                snprintf(a, sizeof a, "%+.4g", for_people(e[i].T_mag));
                snprintf(b, sizeof b, "%+.4g", for_people(e[i].T_phase_deg));
            }
            if (e[i].has_A)
                snprintf(c, sizeof c, "%+.4g", for_people(e[i].A_mag));
            if (e[i].has_A_inf)
                snprintf(d, sizeof d, "%+.4g", for_people(e[i].A_inf_mag));
            fprintf(out, "  %-14s %-11s %-11s %-12s %-11s %-11s\n", tb_report_escape(e[i].element, name, sizeof name),
                    tb_plot_eng(e[i].value, "", v, sizeof v), a, b, c, d);
        }
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

tb_status tb_report_sensitivities_at_text(const tb_circuit *ckt, double f, const tb_sens_entry *entries, size_t per,
                                          FILE *out)
{
    if (!ckt || !out || (per > 0 && !entries))
        return TB_ERR_USAGE;
    char hz[32], name[512];
    fprintf(out, "tbeta %s: sensitivities of %s at %s (adjoint; per 1 %% increase of each element or parameter)\n", TB_VERSION,
            tb_report_escape(ckt->file, name, sizeof name), where(f, hz, sizeof hz));
    tb_status st = tb_report_sensitivities_at_body(ckt, f, entries, per, out);
    fprintf(out, "\ncaution: %s\n", tb_report_caution);
    return st ? st : ferror(out) ? TB_ERR_IO : TB_OK;
}

void tb_report_sensitivities_at_sentence(double f, const tb_sens_entry *entries, size_t per, FILE *out)
{
    char hz[32];
    if (out && (per == 0 || entries))
        sens_sentence(out, where(f, hz, sizeof hz), entries, per, "");
}

/* The names of entries idx (SIZE_MAX ends them) as a JSON array. */
static json_t *names_json(const tb_sens_entry *e, const size_t idx[3])
{
    json_t *arr = json_array();
    for (size_t k = 0; arr && k < 3 && idx[k] != SIZE_MAX; k++)
        if (json_array_append_new(arr, tb_report_json_text(e[idx[k]].element)) != 0) {
            json_decref(arr);
            return NULL;
        }
    return arr;
}

/* One loop's sensitivities at f: the sentence, the three names that set |T| and its phase, every entry. */
static json_t *sens_loop_json(double f, const tb_sens_entry *e, size_t per)
{
    char hz[32], *text = NULL;
    size_t len = 0;
    FILE *mem = open_memstream(&text, &len);
    if (!mem)
        return NULL;
    sens_sentence(mem, where(f, hz, sizeof hz), e, per, "");
    bool ok = fclose(mem) == 0;
    for (size_t i = 0; ok && i < len; i++)
        text[i] = text[i] == '\n' ? ' ' : text[i];
    while (ok && len > 0 && text[len - 1] == ' ')
        text[--len] = '\0';
    size_t mag[3] = {SIZE_MAX, SIZE_MAX, SIZE_MAX}, ph[3];
    for (size_t k = 0; k < 3 && k < per; k++)
        mag[k] = e[k].has_T ? k : SIZE_MAX;
    top_phase(e, per, ph);
    if (ph[0] != SIZE_MAX && !(fabs(e[ph[0]].T_phase_deg) > 1e-9))
        ph[0] = SIZE_MAX;
    json_t *o = json_object();
    json_t *arr = json_array();
    ok = ok && o && arr && put(o, "summary", json_string(text)) && put(o, "T_mag_set_by", names_json(e, mag)) &&
         put(o, "T_phase_set_by", names_json(e, ph));
    free(text);
    for (size_t i = 0; ok && i < per; i++) {
        json_t *x = json_object();
        ok = x && json_array_append_new(arr, x) == 0 && put(x, "element", tb_report_json_text(e[i].element)) &&
             put(x, "value", num(e[i].value)) && put(x, "T_mag", e[i].has_T ? num(e[i].T_mag) : json_null()) &&
             put(x, "T_phase_deg_per_pct", e[i].has_T ? num(e[i].T_phase_deg) : json_null()) &&
             put(x, "A_mag", e[i].has_A ? num(e[i].A_mag) : json_null()) &&
             put(x, "A_inf_mag", e[i].has_A_inf ? num(e[i].A_inf_mag) : json_null());
    }
    ok = ok && put(o, "elements", json_incref(arr));
    json_decref(arr);
    if (!ok) {
        json_decref(o);
        return NULL;
    }
    return o;
}

struct json_t *tb_report_sensitivities_at_json(const tb_circuit *ckt, double f, const tb_sens_entry *entries,
                                               size_t per)
{
    if (!ckt || (per > 0 && !entries))
        return NULL;
    json_t *o = json_object();
    json_t *loops = json_object();
    bool ok = o && loops && put(o, "hz", num(f)) && put(o, "loops", json_incref(loops));
    for (size_t l = 0; ok && l < ckt->loop_count; l++)
        ok = put(loops, tb_circuit_loop_name(ckt, l), sens_loop_json(f, entries + l * per, per));
    json_decref(loops);
    if (!ok) {
        json_decref(o);
        return NULL;
    }
    return o;
}
