/* tests/fuzz/fuzz_netlist.c: libFuzzer harness over the whole read-parse-analyse-report path.
 * Any input must end in a status (never a crash, a leak or undefined behaviour); inputs
 * whose sweep or size would make one run slow are parsed but not analysed. An analysed
 * input goes through every writer (text, JSON, sweep, step and feedback CSV tables) and
 * has every figure of every loop read and every .expect card evaluated; a small one also gets
 * the report's spread part (its .scan and .spread cards, a Monte Carlo of three samples and the
 * sensitivities at 1 kHz) through the text, JSON and HTML writers. */
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>

#include "circuit.h"
#include "expect.h"
#include "grid.h"
#include "spreadreport.h"
#include "tbeta.h"

/* Keeps one run fast: analyse small circuits on short grids only. */
#define FUZZ_MAX_UNKNOWNS 400
#define FUZZ_MAX_POINTS 64
/* The spread part only for this many elements or fewer: at most 2^8 + 1 corners. */
#define FUZZ_MAX_SPREAD_ELEMENTS 8
/* Room for the figure table (checked on every run). */
#define FUZZ_MAX_FIGURES 64

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

/* Every feedback table of loop l the result may have, and one it cannot. */
static void feedback_tables(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *sink)
{
    (void)tb_report_feedback_csv(ckt, res, l, "breakdown", sink);
    (void)tb_report_feedback_csv(ckt, res, l, "break", sink);
    (void)tb_report_feedback_csv(ckt, res, l, "zport:", sink);
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary zs;
        char table[256];
        if (tb_zport_loop(res, p, l, &zs, NULL) != TB_OK)
            continue;
        int n = snprintf(table, sizeof table, "zport:%s", zs.name);
        if (n > 0 && (size_t)n < sizeof table && tb_report_feedback_csv(ckt, res, l, table, sink) == TB_ERR_NOT_FOUND)
            abort(); /* a port the result lists has its table */
    }
}

static void write_all(const tb_circuit *ckt, const tb_result *res, FILE *sink)
{
    (void)tb_report_text(ckt, res, sink);
    (void)tb_report_json(ckt, res, sink);
    (void)tb_report_step_csv(res, sink);
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        (void)tb_report_csv(ckt, res, l, sink);
        feedback_tables(ckt, res, l, sink);
    }
}

/* Every figure of every loop, then every .expect card against its loop's figures, as the
 * regression runner evaluates them. A present figure is finite. */
static void expectations(const tb_circuit *ckt, const tb_result *res)
{
    tb_figure_value figs[FUZZ_MAX_FIGURES];
    char bound[160];
    char measured[96];
    if (tb_figure_count() > FUZZ_MAX_FIGURES)
        abort();
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        if (tb_figure_measure(res, l, figs) != TB_OK)
            continue;
        for (size_t f = 0; f < tb_figure_count(); f++)
            if ((figs[f].present && !isfinite(figs[f].value)) || (!figs[f].present && !figs[f].why))
                abort();
    }
    for (const tb_expect *x = ckt->expects; x; x = x->next) {
        if (tb_figure_measure(res, x->loop, figs) != TB_OK)
            continue;
        const tb_figure_value *v = &figs[x->figure];
        (void)tb_expect_holds(x, v->present, v->value);
        tb_expect_bound_text(x, bound, sizeof bound);
        tb_figure_text(x->figure, v->present, v->value, measured, sizeof measured);
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_result *res = NULL;
    if (!diag)
        return 0;
    /* includes stay in the folder the fuzzer runs in (its corpus and findings), and small */
    tb_read_options ropt;
    tb_read_options_init(&ropt);
    ropt.include_root = ".";
    ropt.max_bytes = (size_t)1 << 20;
    if (tb_circuit_parse_with((const char *)data, size, "fuzz.net", &ropt, diag, &ckt) == TB_OK &&
        tb_circuit_unknowns(ckt) <= FUZZ_MAX_UNKNOWNS && tb_grid_count(&ckt->ac) <= FUZZ_MAX_POINTS &&
        tb_analyse(ckt, NULL, diag, &res) == TB_OK) {
        FILE *sink = fopen("/dev/null", "w");
        if (sink) {
            write_all(ckt, res, sink);
            tb_options opt;
            tb_options_init(&opt);
            tb_spread_report_options so;
            tb_spread_report_options_init(&so);
            so.samples = 3;
            static const double at[] = {1e3};
            so.at_hz = at;
            so.at_count = 1;
            if (ckt->elem_count <= FUZZ_MAX_SPREAD_ELEMENTS && tb_spread_report_run(ckt, &opt, &so, diag, res) == TB_OK) {
                (void)tb_report_text(ckt, res, sink);
                (void)tb_report_json(ckt, res, sink);
                (void)tb_report_html(ckt, res, sink);
            }
            fclose(sink);
        }
        expectations(ckt, res);
    }
    char buf[4096];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        (void)tb_diag_format(diag, i, buf, sizeof buf);
        for (const char *c = buf; *c; c++) /* user text is escaped: no control code but line ends and tabs */
            if (((unsigned char)*c < 0x20 && *c != '\n' && *c != '\t') || *c == 0x7F)
                abort();
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
    tb_diag_free(diag);
    return 0;
}
