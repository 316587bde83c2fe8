/* src/report_text.c: the loop report for people: rounded figures, units, notes and the caution */
#include <math.h>
#include <string.h>

#include "measure.h"
#include "report.h"

/* A frequency with an SI prefix: "1.2346 MHz". */
static const char *fmt_hz(double f, char *buf, size_t size)
{
    static const char *const prefix[] = {"", "k", "M", "G", "T"};
    int p = 0;
    double v = f;
    while (fabs(v) >= 1000.0 && p < 4) {
        v /= 1000.0;
        p++;
    }
    snprintf(buf, size, "%.5g %sHz", v, prefix[p]);
    return buf;
}

/* A value that is real at DC, or re+im j when the DC point comes from the sweep. */
static const char *fmt_value(double complex z, char *buf, size_t size)
{
    if (cimag(z) == 0.0 || fabs(cimag(z)) < 1e-12 * fabs(creal(z)))
        snprintf(buf, size, "%.6g", creal(z));
    else
        snprintf(buf, size, "%.6g%+.6gj", creal(z), cimag(z));
    return buf;
}

/* Rounding noise of a quantity that is zero in exact arithmetic (below 1e-13 of
 * the gains it is compared with) reads as 0 for people; JSON and CSV keep it. */
static double complex denoise(double complex z, double scale)
{
    return cabs(z) < 1e-13 * scale ? 0 : z;
}

static void line(FILE *out, const char *label, bool present, const char *value, const char *extra)
{
    fprintf(out, "    %-30s %s%s\n", label, present ? value : "--", present ? extra : "");
}

static void dc_block(FILE *out, const tb_measures *m)
{
    char v[96], extra[96];
    unsigned fl = m->dc.flags;
    bool io = !(fl & TB_PT_NO_IO);
    bool t_ok = !(fl & TB_PT_T_INF);
    bool ainf_ok = io && !(fl & TB_PT_AINF_NONE);
    bool beta_ok = ainf_ok && cabs(m->dc.A_inf) > 0;
    if (m->dc_hz == 0.0)
        fprintf(out, "  at DC (f = 0)\n");
    else
        fprintf(out, "  at the lowest sweep point (f = %s; DC is singular)\n",
                fmt_hz(m->dc_hz, v, sizeof v));
    snprintf(extra, sizeof extra, "   (%+.2f dB)", t_ok ? 20.0 * log10(cabs(m->dc.T)) : 0.0);
    line(out, "loop gain T (return ratio)", true, t_ok ? fmt_value(m->dc.T, v, sizeof v) : "infinite",
         t_ok && cabs(m->dc.T) > 0 ? extra : "");
    line(out, "open-loop gain a = A_inf*T", ainf_ok && t_ok, fmt_value(m->dc.a, v, sizeof v), "");
    line(out, "loaded feedback beta = 1/A_inf", beta_ok,
         fmt_value(beta_ok ? 1.0 / m->dc.A_inf : 0, v, sizeof v), "");
    line(out, "ideal gain A_inf", ainf_ok, fmt_value(m->dc.A_inf, v, sizeof v), "");
    double scale = fmax(cabs(m->dc.A), cabs(m->dc.A_inf));
    line(out, "feedthrough A0", io && !(fl & TB_PT_A0_NONE),
         fmt_value(denoise(m->dc.A0, scale), v, sizeof v), "");
    line(out, "closed-loop gain A", io, fmt_value(m->dc.A, v, sizeof v), "");
    double complex err = beta_ok ? (m->dc.A - m->dc.A_inf) / m->dc.A_inf * 100.0 : 0;
    snprintf(v, sizeof v, "%+.4g %%", creal(err));
    line(out, "gain error (A - A_inf)/A_inf", beta_ok, v, "");
}

static void crossing_block(FILE *out, const tb_measures *m)
{
    char v[96];
    fprintf(out, "  over frequency\n");
    line(out, "unity loop gain |T| = 1 at", m->has_unity, fmt_hz(m->unity_hz, v, sizeof v), "");
    snprintf(v, sizeof v, "%.2f deg", m->phase_margin_deg);
    line(out, "phase margin", m->has_phase_margin, v, "");
    line(out, "closed-loop -3 dB at", m->has_f3db, fmt_hz(m->f3db_closed_hz, v, sizeof v), "");
}

static tb_status loop_block(FILE *out, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_measures m;
    tb_status st = tb_measure_loop(res, l, &m);
    if (st)
        return st;
    const tb_element *e = &ckt->elems[ckt->loops[l].elem];
    fprintf(out, "\nloop at %s (%s, gain %.6g)\n", e->name, tb_elem_kind_word(e->kind), e->value);
    dc_block(out, &m);
    crossing_block(out, &m);
    if (m.notes) {
        fprintf(out, "  notes\n");
        for (int n = 0; n < TB_NOTE_COUNT; n++)
            if (m.notes & (1u << n))
                fprintf(out, "    - %s\n", tb_note_str((tb_note)n));
    }
    return TB_OK;
}

tb_status tb_report_text(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    if (!ckt || !res || !out)
        return TB_ERR_USAGE;
    char f0[64], f1[64], o[512];
    fprintf(out, "tbeta %s: feedback report for %s\n", TB_VERSION, ckt->file);
    if (tb_circuit_title(ckt)[0])
        fprintf(out, "  title   %s\n", tb_circuit_title(ckt));
    fprintf(out, "  sweep   %s to %s, %zu points (%s %ld)\n", fmt_hz(ckt->ac.fstart, f0, sizeof f0),
            fmt_hz(ckt->ac.fstop, f1, sizeof f1), res->npoints, tb_report_grid_word(ckt->ac.kind),
            ckt->ac.points);
    if (ckt->io.given)
        fprintf(out, "  gain    A = %s / %s\n", tb_report_output(&ckt->io, o, sizeof o),
                ckt->io.source);
    for (size_t l = 0; l < res->nloops; l++) {
        tb_status st = loop_block(out, ckt, res, l);
        if (st)
            return st;
    }
    fprintf(out, "\ncaution: %s\n", tb_report_caution);
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
