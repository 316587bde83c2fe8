/* src/report_text.c: the loop report for people: rounded figures, units, notes and the caution */
#include <math.h>
#include <string.h>

#include "diag.h"
#include "units.h"
#include "report.h"
#include "report_distortion.h"
#include "report_spreadpart.h"

/* A frequency with an SI prefix: "1.2346 MHz". */
static const char *fmt_hz(double f, char *buf, size_t size)
{
    return tb_format_hz(f, 5, buf, size);
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

/* Names and comments escaped for the terminal (tb_report_escape); one buffer per name printed. */
typedef struct {
    char buf[3][256];
} names;

static const char *esc(names *nm, int i, const char *s)
{
    return tb_report_escape(s, nm->buf[i], sizeof nm->buf[i]);
}

static void line(FILE *out, const char *label, bool present, const char *value, const char *extra)
{
    fprintf(out, "    %-30s %s%s\n", label, present ? value : "--", present ? extra : "");
}

/* " ohm" or " S" after a gain or beta whose .io makes it dimensioned, "" otherwise. */
static const char *unit_suffix(const char *unit, char *buf, size_t size)
{
    snprintf(buf, size, "%s%s", unit[0] ? " " : "", unit);
    return buf;
}

/* The loop's gains at one point (DC, or midband) with the figures derived from them;
 * gain and beta units from .io. */
static void gain_lines(FILE *out, const tb_point *p, const tb_dc_figures *fig, const char *gain_unit,
                       const char *beta_unit)
{
    char v[96], extra[96], gu[16], bu[16];
    unit_suffix(gain_unit, gu, sizeof gu);
    unit_suffix(beta_unit, bu, sizeof bu);
    snprintf(extra, sizeof extra, "   (%+.2f dB)", fig->T_db);
    line(out, "loop gain T (return ratio)", true, fig->has_T ? fmt_value(p->T, v, sizeof v) : "infinite",
         fig->has_T_db ? extra : "");
    line(out, "open-loop gain a = A_inf*T", fig->has_a, fmt_value(p->a, v, sizeof v), gu);
    line(out, "loaded feedback beta = 1/A_inf", fig->has_beta, fmt_value(fig->beta, v, sizeof v), bu);
    line(out, "ideal gain A_inf", fig->has_A_inf, fmt_value(p->A_inf, v, sizeof v), gu);
    double scale = fmax(cabs(p->A), cabs(p->A_inf));
    line(out, "feedthrough A0", fig->has_A0, fmt_value(denoise(p->A0, scale), v, sizeof v), gu);
    line(out, "closed-loop gain A", fig->has_A, fmt_value(p->A, v, sizeof v), gu);
    snprintf(v, sizeof v, "%+.4g %%", creal(fig->gain_error_pct));
    line(out, "gain error (A - A_inf)/A_inf", fig->has_gain_error, v, "");
}

static void dc_block(FILE *out, const tb_measures *m, const tb_circuit *ckt)
{
    const char *gu = tb_circuit_gain_unit(ckt), *bu = tb_circuit_beta_unit(ckt);
    char v[96];
    if (m->dc_hz == 0.0)
        fprintf(out, "  at DC (f = 0)\n");
    else
        fprintf(out, "  at the lowest sweep point (f = %s; DC is singular)\n",
                fmt_hz(m->dc_hz, v, sizeof v));
    gain_lines(out, &m->dc, &m->fig, gu, bu);
    if (m->has_mid) {
        fprintf(out, "  at midband (f = %s, where |A| is largest; A(0) = 0: AC-coupled)\n",
                fmt_hz(m->mid_hz, v, sizeof v));
        gain_lines(out, &m->mid, &m->mid_fig, gu, bu);
    }
}

/* The closed-loop response beyond the -3 dB point: the low edge, peaking, the largest sensitivity. */
static void closed_loop_lines(FILE *out, const tb_result *res, const tb_measures *m)
{
    char v[96], f[64];
    tb_closed_loop cl;
    tb_closed_loop_get(res, &cl);
    if (cl.computed && cl.ac_coupled)
        line(out, "closed-loop low -3 dB edge", cl.has_low_edge, fmt_hz(cl.low_edge_hz, v, sizeof v),
             cl.low_edge_outside ? " (below the sweep)" : "");
    if (cl.computed && cl.high_edge_outside)
        fprintf(out, "      (the -3 dB edge lies outside the sweep; found by searching beyond it)\n");
    if (cl.computed && !cl.ac_coupled) {
        snprintf(v, sizeof v, "%+.3f dB at %s", cl.peak_db, fmt_hz(cl.peak_hz, f, sizeof f));
        line(out, "peaking of |A| over A(0)", cl.has_peak, v, m->stability_shown ? "" : "   [assumes a stable loop]");
    }
    double db = fabs(m->max_sensitivity_db) < 0.005 ? 0.0 : m->max_sensitivity_db; /* no "-0.00" */
    snprintf(v, sizeof v, "%+.2f dB at %s", db, fmt_hz(m->max_sensitivity_hz, f, sizeof f));
    line(out, "largest |1/(1+T)| = 1/min|1+T|", m->has_max_sensitivity, v, "");
}

static void crossing_block(FILE *out, const tb_measures *m, const tb_stability *st)
{
    char v[96], extra[96];
    fprintf(out, "  over frequency\n");
    extra[0] = '\0';
    if (st->computed && st->unity_count > 1)
        snprintf(extra, sizeof extra, "   (the headline crossing, %zu of %zu)", st->phase_margin_index + 1,
                 st->unity_count);
    line(out, "unity loop gain |T| = 1 at", m->has_unity, fmt_hz(m->unity_hz, v, sizeof v), extra);
    snprintf(v, sizeof v, "%.2f deg", m->phase_margin_deg);
    line(out, "phase margin", m->has_phase_margin, v, "");
    line(out, "closed-loop -3 dB at", m->has_f3db, fmt_hz(m->f3db_closed_hz, v, sizeof v),
         m->stability_shown ? "" : "   [assumes a stable loop]");
}

/* First in a loop's report: whether it is stable and, when it is not, what it will do. */
static void verdict_first(FILE *out, const tb_measures *m, const tb_stability *st)
{
    char f[64];
    if (!st->computed)
        return;
    if (st->verdict == TB_VERDICT_STABLE) {
        fprintf(out, "  verdict: stable\n");
        return;
    }
    fprintf(out, "  verdict: %s", st->verdict == TB_VERDICT_UNSTABLE ? "UNSTABLE" : tb_verdict_str(st->verdict));
    if (m->has_oscillation)
        fprintf(out, ": it will oscillate near %s", fmt_hz(m->oscillation_hz, f, sizeof f));
    else if (m->runaway)
        fprintf(out, ": a real right-half-plane pole, the output runs away (latches) rather than oscillates");
    fprintf(out, "\n    the closed-loop figures below (-3 dB point, peaking, desensitivity, step response) assume a\n"
                 "    stable loop and do not describe this circuit\n");
}

/* "", " [below the sweep]" or " [above the sweep]". */
static const char *sweep_mark(tb_sweep_side side)
{
    return side == TB_SWEEP_BELOW ? "   [below the sweep]" : side == TB_SWEEP_ABOVE ? "   [above the sweep]" : "";
}

static const char *fmt_hz_or_dc(double f, char *buf, size_t size)
{
    if (f == 0.0) {
        snprintf(buf, size, "DC");
        return buf;
    }
    return fmt_hz(f, buf, size);
}

static void crossing_lines(FILE *out, const tb_stability *st)
{
    char f[64];
    for (size_t i = 0; i < st->unity_count; i++) {
        const tb_crossing *c = &st->unity[i];
        fprintf(out, "      |T| = 1 (%s) at %-14s phase %9.3f deg   PM %8.3f deg   delay to -1 %.4g s%s%s\n",
                c->direction > 0 ? "rising " : "falling", fmt_hz(c->hz, f, sizeof f), c->phase_deg, c->margin,
                c->delay_s, sweep_mark(c->sweep),
                st->has_phase_margin && i == st->phase_margin_index ? "   <- headline" : "");
    }
    for (size_t i = 0; i < st->phase_count; i++) {
        const tb_crossing *c = &st->phase[i];
        fprintf(out, "      phase = %.0f deg at %-14s |T| %+9.3f dB   -1 reached if the gain %s by %.3f dB%s\n",
                c->phase_deg, fmt_hz_or_dc(c->hz, f, sizeof f), c->T_db, c->margin >= 0 ? "rises" : "falls",
                fabs(c->margin), sweep_mark(c->sweep));
    }
}

/* The right-half-plane counts by the argument principle, above the pole limit. */
static void winding_lines(FILE *out, const tb_stability *st)
{
    if (st->cl_count_by == TB_COUNT_WINDING)
        fprintf(out, "    closed loop by the argument principle on det M(jw): %zu poles, %zu in the right "
                     "half-plane, %zu on the axis\n", st->cl_finite, st->cl_rhp, st->cl_axis);
    if (st->ol_count_by == TB_COUNT_WINDING)
        fprintf(out, "    open loop by the argument principle on det M0(jw): %zu in the right half-plane, "
                     "%zu on the axis\n", st->ol_rhp, st->ol_axis);
    if (st->ol_count_by == TB_COUNT_PASSIVE_BLOCKS)
        fprintf(out, "    open loop: no right-half-plane pole (the circuit with the loop's source at zero splits "
                     "into %zu strongly connected part%s, every one passive); on the axis: %s\n", st->passive_blocks,
                st->passive_blocks == 1 ? "" : "s", st->ol_axis_counted ? (st->ol_axis ? "counted by the argument principle, see below" : "none")
                                    : "not counted");
    if (st->ol_count_by == TB_COUNT_PASSIVE_BLOCKS && st->ol_axis_counted && st->ol_axis)
        fprintf(out, "      %zu open-loop poles on the axis, by the argument principle on det M0(jw)\n", st->ol_axis);
    else if (st->passive_active > 0)
        fprintf(out, "    open loop not shown passive: %zu of %zu strongly connected parts hold active entries\n",
                st->passive_active, st->passive_blocks);
    if (st->winding_why)
        fprintf(out, "    no count by the argument principle: %s\n", st->winding_why);
    if (st->winding_evaluations > 0)
        fprintf(out, "      (%zu factorizations along the j-omega axis)\n", st->winding_evaluations);
    if (st->near_count > 0 || st->near_solves > 0)
        fprintf(out, "    poles nearest 0 Hz and the unity crossing (shift-invert Krylov-Schur, %zu solves%s):\n",
                st->near_solves, st->near_complete ? "" : "; some searches did not converge");
    for (size_t i = 0; i < st->near_count; i++) {
        double complex s = st->near_poles[i];
        char f[64], g[64];
        fprintf(out, "      %-6s s = %.6g %c j%.6g rad/s  (%s)  near %s\n", st->near_open[i] ? "open" : "closed",
                creal(s), cimag(s) < 0 ? '-' : '+', fabs(cimag(s)), fmt_hz(cabs(s) / TB_TWO_PI, f, sizeof f),
                fmt_hz_or_dc(st->near_shift_hz[i], g, sizeof g));
    }
}

static void pole_lines(FILE *out, const tb_stability *st)
{
    char f[64], checked[64] = "", weight[48] = "";
    if (!st->has_poles) {
        if (st->notes & (1u << TB_SNOTE_POLES_TOO_BIG))
            fprintf(out, "    poles not computed (%zu unknowns > limit %zu; --pole-limit N)\n", st->unknowns,
                    st->pole_limit);
        winding_lines(out, st);
        return;
    }
    if (st->cl_checked + st->ol_checked > 0)
        snprintf(checked, sizeof checked, " (%zu closed-loop, %zu open-loop placed by a check on the circuit)",
                 st->cl_checked, st->ol_checked);
    fprintf(out, "    closed-loop poles: %zu finite, %zu in the right half-plane, %zu on the axis; "
                 "open loop: %zu in the right half-plane%s\n",
            st->cl_finite, st->cl_rhp, st->cl_axis, st->ol_rhp, checked);
    if (st->has_weights)
        fprintf(out, "      (weight: |residue|/|Re s| in %s)\n", st->weights_of_a ? "A" : "T/(1+T)");
    for (size_t i = 0; i < st->pole_count && i < 6; i++) {
        double complex s = st->poles[i];
        if (cimag(s) < 0)
            continue;
        if (st->has_weights && st->pole_place[i] != TB_POLE_AXIS)
            snprintf(weight, sizeof weight, ", weight %.4g", st->pole_weight[i]);
        else
            weight[0] = '\0';
        fprintf(out, "      s = %.6g %s j%.6g rad/s  (%s)  %s%s%s\n", creal(s), cimag(s) > 0 ? "+-" : "+",
                fabs(cimag(s)), fmt_hz(cabs(s) / TB_TWO_PI, f, sizeof f), tb_pole_place_str(st->pole_place[i]),
                st->pole_checked[i] ? ", checked" : "", weight);
    }
}

/* The pair's weight against the other poles'. */
static void dominance_line(FILE *out, const tb_stability *st)
{
    char sep[96] = "no other pole of comparable weight";
    if (!st->has_weight_ratio) {
        fprintf(out, "      no other pole carries weight\n");
        return;
    }
    if (st->has_separation)
        snprintf(sep, sizeof sep, "the nearest pole of comparable weight %.3g times farther left", st->separation);
    fprintf(out, "      weight %.3g times the next pole's; %s\n", st->weight_ratio, sep);
}

/* The pair's second-order predictions next to what was computed. */
static void prediction_lines(FILE *out, const tb_stability *st)
{
    char f[64], g[64], got[96] = "no step response";
    if (st->has_step_overshoot)
        snprintf(got, sizeof got, "step response %.4g %%", st->step_overshoot_pct);
    fprintf(out, "      overshoot: second-order %.3g %%, %s\n", st->overshoot_pct, got);
    if (st->has_peaking)
        snprintf(g, sizeof g, "%.3f dB at %s", st->peaking_db, fmt_hz(st->peaking_hz, f, sizeof f));
    else
        snprintf(g, sizeof g, "none (zeta >= 0.707)");
    if (st->has_cl_peaking)
        snprintf(got, sizeof got, "closed loop %.3f dB at %s", st->cl_peaking_db,
                 fmt_hz(st->cl_peaking_hz, f, sizeof f));
    else
        snprintf(got, sizeof got, "no closed-loop figure (no .io, or A(0) = 0)");
    fprintf(out, "      peaking: second-order %s, %s\n", g, got);
    fprintf(out, "      2 %% settling (second-order): %.4g s\n", st->settling_s);
    if (st->pair_disagrees)
        fprintf(out, "      WARNING: a prediction misses the computed figure by more than 2x: "
                     "the pair does not describe this loop alone\n");
}

static void dominant_lines(FILE *out, const tb_stability *st)
{
    char f[64];
    if (!st->has_poles)
        return;
    if (!st->has_dominant) {
        fprintf(out, "    dominant pair: none (%s)\n", tb_dominance_str(st->dominance));
        if (st->has_cl_peaking)
            fprintf(out, "      closed-loop peaking %.3f dB at %s\n", st->cl_peaking_db,
                    fmt_hz(st->cl_peaking_hz, f, sizeof f));
        return;
    }
    fprintf(out, "    dominant pair: fn %s, zeta %.4f, Q %.4f\n", fmt_hz(st->fn_hz, f, sizeof f), st->zeta,
            st->q);
    dominance_line(out, st);
    prediction_lines(out, st);
}

static void phase_margin_line(FILE *out, const tb_stability *st)
{
    char v[160], f[64];
    if (!st->margins_determined) {
        snprintf(v, sizeof v, "not determined, see the notes (needs |PM| >= %g: FAILS)", st->pm_min_deg);
        line(out, "phase margin", true, v, "");
        return;
    }
    snprintf(v, sizeof v, "%.3f deg at %s (the worst of %zu unity crossing%s; needs |PM| >= %g: %s)",
             st->phase_margin_deg, fmt_hz(st->phase_margin_hz, f, sizeof f), st->unity_count,
             st->unity_count == 1 ? "" : "s", st->pm_min_deg, st->pm_ok ? "ok" : "FAILS");
    line(out, "phase margin", st->has_phase_margin, v, "");
}

/* "the loop gain may rise by X dB / fall by Y dB before instability", or what
 * the critical gains are when the loop is not stable. */
static void gain_margin_line(FILE *out, const tb_stability *st)
{
    char v[400], up[96], down[96], f[64], g[64];
    bool stable = st->verdict == TB_VERDICT_STABLE;
    if (!st->margins_determined) {
        snprintf(v, sizeof v, "not determined, see the notes (needs >= %g dB: FAILS)", st->gm_min_db);
        line(out, "gain margin", true, v, "");
        return;
    }
    bool has_up = st->has_gain_margin_up || st->has_gain_margin_up_above;
    if (st->has_gain_margin_up)
        snprintf(up, sizeof up, "rise by %.3f dB (at %s)", st->gain_margin_up_db,
                 fmt_hz_or_dc(st->gain_margin_up_hz, f, sizeof f));
    else
        snprintf(up, sizeof up, "rise by more than %g dB (the cap)", st->gm_cap_db);
    snprintf(down, sizeof down, "fall by %.3f dB (at %s)", st->gain_margin_down_db,
             fmt_hz_or_dc(st->gain_margin_down_hz, g, sizeof g));
    const char *both = has_up && st->has_gain_margin_down ? " / " : "";
    if (stable)
        snprintf(v, sizeof v, "the loop gain may %s%s%s before instability%s (needs >= %g dB: %s)",
                 has_up ? up : "", both, st->has_gain_margin_down ? down : "",
                 !has_up ? ", and rise without limit"
                 : !st->has_gain_margin_down ? ", and fall to zero" : "",
                 st->gm_min_db, st->gm_ok ? "ok" : "FAILS");
    else
        snprintf(v, sizeof v, "none: the loop is not shown stable (a pole reaches the axis if the gain would %s%s%s)",
                 has_up ? up : "", both, st->has_gain_margin_down ? down : "");
    line(out, "gain margin", has_up || st->has_gain_margin_down, v, "");
}

static void stability_block(FILE *out, const tb_stability *st)
{
    char v[96], reason[512], f[64], g[64];
    fprintf(out, "  stability\n");
    phase_margin_line(out, st);
    gain_margin_line(out, st);
    snprintf(v, sizeof v, "%.4g s (at %s)", st->delay_margin_s, fmt_hz(st->delay_margin_hz, f, sizeof f));
    line(out, "delay margin", st->has_delay_margin, v, "");
    snprintf(v, sizeof v, "%.4g at %s", st->vector_margin, fmt_hz_or_dc(st->vector_margin_hz, f, sizeof f));
    line(out, "vector margin min|1+T|", st->has_vector_margin, v, "");
    snprintf(v, sizeof v, "%s to %s%s", fmt_hz(st->search_lo_hz, f, sizeof f), fmt_hz(st->search_hi_hz, g, sizeof g),
             st->margins_determined ? " (T settled at both ends)" : "");
    line(out, "crossings searched", true, v, "");
    crossing_lines(out, st);
    pole_lines(out, st);
    if (st->has_nyquist)
        fprintf(out, "    Nyquist: %ld clockwise encirclements of -1\n", st->nyquist_n);
    dominant_lines(out, st);
    fprintf(out, "    verdict: %s (%s)\n", tb_verdict_str(st->verdict), tb_report_reason(st, reason, sizeof reason));
}

/* A complex ratio as a signed percentage (real) or a magnitude with its angle. */
static const char *fmt_pct(double complex z, char *buf, size_t size)
{
    if (fabs(cimag(z)) <= 1e-9 * fabs(creal(z)) || cabs(z) == 0)
        snprintf(buf, size, "%+.4g %%", 100.0 * creal(z) + 0.0); /* + 0.0: no "-0" */
    else
        snprintf(buf, size, "%.4g %% at %+.1f deg", 100.0 * cabs(z), carg(z) * 57.29577951308232);
    return buf;
}

/* What each part of the gain error means, for the sentence under the table. */
static const char *const part_meaning[TB_PART_COUNT] = {
    [TB_PART_LOADING] = "the feedback network is loaded by source, load and amplifier, so A_inf is not the estimate",
    [TB_PART_LOOP_GAIN] = "the loop gain is finite, A = A_inf T/(1+T) falls short of A_inf",
    [TB_PART_FEEDTHROUGH] = "signal reaches the output around the amplifier, A0/(1+T)",
};

static void breakdown_lines(FILE *out, const tb_circuit *ckt, const tb_feedback_summary *fs)
{
    char v[96], p[96], f[64];
    static const char *const label[TB_PART_COUNT] = {"loading A_inf - G", "finite loop gain -A_inf/(1+T)",
                                                     "feedthrough A0/(1+T)"};
    const tb_breakdown_point *b = &fs->dc;
    double G = fs->estimate;
    fprintf(out, "  hand estimate (.ideal %s=%.6g)\n", ckt->ideal.as_beta ? "beta" : "gain", ckt->ideal.value);
    line(out, "estimate G", true, fmt_value(G, v, sizeof v), "");
    snprintf(p, sizeof p, "   (%s of G, tolerance %g %%)", fmt_pct(b->total / G, f, sizeof f), fs->tol_pct);
    line(out, fs->dc_hz > 0 ? "A - G at the lowest point" : "A - G at DC", true, fmt_value(b->total, v, sizeof v), p);
    for (int k = 0; k < TB_PART_COUNT && b->has_parts; k++) {
        snprintf(p, sizeof p, "   (%s of G)", fmt_pct(b->part[k] / G, f, sizeof f));
        line(out, label[k], true, fmt_value(b->part[k], v, sizeof v), p);
    }
    if (b->has_parts)
        fprintf(out, "    the largest part is %s: %s\n", tb_part_str(fs->dominant_dc), part_meaning[fs->dominant_dc]);
    if (!fs->holds_at_dc)
        fprintf(out, "    the estimate misses by %.4g %% already at DC (tolerance %g %%)\n", fs->error_dc_pct, fs->tol_pct);
    else if (fs->has_limit)
        fprintf(out, "    the estimate holds within %g %% up to %s; there %s dominates (%s of G)\n", fs->tol_pct,
                fmt_hz(fs->limit_hz, f, sizeof f), tb_part_str(fs->dominant_limit),
                fmt_pct(fs->at_limit.part[fs->dominant_limit] / G, p, sizeof p));
    else
        fprintf(out, "    the estimate holds within %g %% over the whole sweep\n", fs->tol_pct);
}

static void desensitivity_lines(FILE *out, const tb_feedback_summary *fs)
{
    char v[96], a[64], b[64], c[64];
    fprintf(out, "  desensitivity (amplifier gain spread +-%g %%)\n", fs->spread_pct);
    snprintf(a, sizeof a, "   (%+.2f dB)", cabs(fs->dc.S) > 0 ? 20.0 * log10(cabs(fs->dc.S)) : -300.0);
    line(out, "S = 1/(1+T)", fs->dc.has_S, fmt_value(fs->dc.S, v, sizeof v), cabs(fs->dc.S) > 0 ? a : "");
    line(out, "dA/A per dk/k = (1-A0/A)/(1+T)", fs->dc.has_S_A, fmt_value(fs->dc.S_A, v, sizeof v), "");
    for (int side = 0; side < 2 && fs->has_change; side++) {
        snprintf(v, sizeof v, "gain %c%g %%: A changes by", side == 0 ? '+' : '-', fs->spread_pct);
        fprintf(out, "    %-30s %s (first order %s", v, fmt_pct(fs->change_model[side], a, sizeof a),
                fmt_pct(fs->change_first_order[side], b, sizeof b));
        if (fs->has_resolved)
            fprintf(out, ", re-solved %s", fmt_pct(fs->change_resolved[side], c, sizeof c));
        fprintf(out, ")\n");
    }
}

/* What the feedback does to the impedance at a port of each kind. */
static const char *side_effect(tb_side side)
{
    switch (side) {
    case TB_SIDE_SERIES:
        return "series: feedback raises the impedance by (1 + T_sc)";
    case TB_SIDE_SHUNT:
        return "shunt: feedback lowers the impedance by 1/(1 + T_oc)";
    case TB_SIDE_MIXED:
        return "feedback leaves the impedance unchanged here (T_sc = T_oc)";
    case TB_SIDE_NONE:
        break;
    }
    return "no feedback seen at this port";
}

static void impedance_lines(FILE *out, const tb_result *res, size_t l)
{
    char v[96], e[160];
    if (tb_zport_count(res) == 0)
        return;
    fprintf(out, "  impedances with feedback (Blackman: Z = Z0 (1 + T_sc)/(1 + T_oc))\n");
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary s;
        if (tb_zport_loop(res, p, l, &s, NULL) != TB_OK)
            continue;
        names nm;
        if (s.at_source)
            fprintf(out, "    port %s = the circuit as %s sees it%s\n", esc(&nm, 0, s.name), esc(&nm, 1, s.node_a),
                    s.dc_hz > 0 ? ", at the lowest sweep point" : ", at DC");
        else
            fprintf(out, "    port %s = v(%s%s%s)%s\n", esc(&nm, 0, s.name), esc(&nm, 1, s.node_a), s.node_b ? "," : "",
                    s.node_b ? esc(&nm, 2, s.node_b) : "", s.dc_hz > 0 ? " at the lowest sweep point" : " at DC");
        line(out, "  Z0 (source gain at zero)", s.dc.has_Z0, fmt_value(s.dc.Z0, v, sizeof v), " ohm");
        line(out, "  T_sc (port shorted)", s.dc.has_T_sc, fmt_value(denoise(s.dc.T_sc, cabs(s.dc.T_oc)), v, sizeof v), "");
        line(out, "  T_oc (port open)", s.dc.has_T_oc, fmt_value(denoise(s.dc.T_oc, cabs(s.dc.T_sc)), v, sizeof v), "");
        snprintf(e, sizeof e, " ohm   (direct solve %.10g ohm; largest difference over the sweep %.2g)", creal(s.dc.Z),
                 s.has_max_diff ? s.max_rel_diff : 0.0);
        line(out, "  Z with feedback", s.dc.has_blackman, fmt_value(s.dc.Z_blackman, v, sizeof v), e);
        if (!s.dc.has_blackman)
            line(out, "  Z (direct solve)", s.dc.has_Z, fmt_value(s.dc.Z, v, sizeof v), " ohm");
        if (!s.dc.has_blackman)
            fprintf(out, "      Blackman's form does not apply here (%s)\n",
                    !s.dc.has_T_oc ? "T is infinite: the circuit with the source's gain at zero is singular"
                    : "Z0 = 0: the port is a short with the source's gain at zero");
        else if (s.side == TB_SIDE_SERIES || s.side == TB_SIDE_SHUNT)
            fprintf(out, "      %s (%s)\n", side_effect(s.side),
                    s.purity <= 0.1 ? "pure" : "not pure: the resistance at the port carries part of the feedback");
        else
            fprintf(out, "      %s\n", side_effect(s.side));
    }
    tb_feedback_type ft;
    if (tb_feedback_type_loop(res, l, &ft) == TB_OK && ft.computed)
        fprintf(out, "    feedback topology: %s at the input, %s at the output: %s\n", tb_side_str(ft.input),
                tb_side_str(ft.output), tb_amp_type_str(ft.type));
}

/* One .zport at a chosen frequency. */
static void spot_port_lines(FILE *out, const tb_result *res, size_t l, size_t p, const tb_zpoint *z)
{
    char v[96], e[256], a[64], b[64], c[64];
    tb_zport_summary s;
    names nm;
    if (tb_zport_loop(res, p, l, &s, NULL) != TB_OK)
        return;
    snprintf(e, sizeof e, " ohm   (Z0 %s ohm, T_sc %s, T_oc %s)", z->has_Z0 ? fmt_value(z->Z0, a, sizeof a) : "--",
             z->has_T_sc ? fmt_value(denoise(z->T_sc, cabs(z->T_oc)), b, sizeof b) : "--",
             z->has_T_oc ? fmt_value(denoise(z->T_oc, cabs(z->T_sc)), c, sizeof c) : "--");
    snprintf(a, sizeof a, "  Z at port %s", esc(&nm, 0, s.name));
    line(out, a, z->has_Z, fmt_value(z->Z, v, sizeof v), e);
}

/* Loop l at every frequency of --at, each from a fresh solve there. */
static void spot_lines(FILE *out, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    char v[96], f[64], extra[96], gu[16];
    if (tb_spot_count(res) == 0)
        return;
    unit_suffix(tb_circuit_gain_unit(ckt), gu, sizeof gu);
    fprintf(out, "  at chosen frequencies (each by a fresh solve there)\n");
    for (size_t i = 0; i < tb_spot_count(res); i++) {
        tb_spot s;
        if (tb_spot_get(res, i, l, &s) != TB_OK)
            continue;
        fprintf(out, "    at %s%s\n", s.f_hz > 0 ? fmt_hz(s.f_hz, f, sizeof f) : "DC",
                s.solved ? "" : ": -- (the circuit matrix is singular at this frequency)");
        if (!s.solved)
            continue;
        const tb_point *p = &s.pt;
        bool io = !(p->flags & TB_PT_NO_IO);
        snprintf(extra, sizeof extra, "   (%+.2f dB, %.2f deg)", s.T_db, s.T_phase_deg);
        line(out, "  loop gain T", true, s.has_T ? fmt_value(p->T, v, sizeof v) : "infinite",
             s.has_T_db ? extra : "");
        snprintf(v, sizeof v, "%.6g", s.return_difference);
        line(out, "  |1 + T|", s.has_T, v, "");
        double scale = fmax(cabs(p->A), cabs(p->A_inf));
        if (io) { /* without .io there are no gains to show */
            line(out, "  closed-loop gain A", true, fmt_value(p->A, v, sizeof v), gu);
            line(out, "  ideal gain A_inf", !(p->flags & TB_PT_AINF_NONE), fmt_value(p->A_inf, v, sizeof v), gu);
            line(out, "  feedthrough A0", !(p->flags & TB_PT_A0_NONE), fmt_value(denoise(p->A0, scale), v, sizeof v),
                 gu);
        }
        const tb_breakdown_point *bd = &s.breakdown;
        for (int k = 0; k < TB_PART_COUNT && bd->has_parts; k++) {
            char label[64];
            snprintf(label, sizeof label, "  A - G from %s", tb_part_str((tb_part)k));
            line(out, label, true, fmt_value(denoise(bd->part[k], scale), v, sizeof v), gu);
        }
        for (size_t q = 0; q < s.ports; q++)
            spot_port_lines(out, res, l, q, &s.zports[q]);
    }
}

/* The loop gain at the .break wire, next to loop l's return ratio. */
static void break_lines(FILE *out, const tb_result *res, size_t l)
{
    char v[96], f[64];
    tb_break_summary s;
    if (tb_break_get(res, &s, NULL) != TB_OK || !s.computed)
        return;
    names nm;
    fprintf(out, "  loop gain at the wire break %s (signal from %s to %s)%s\n", esc(&nm, 0, s.source),
            esc(&nm, 1, s.node_x), esc(&nm, 2, s.node_y), s.dc_hz > 0 ? " at the lowest sweep point" : " at DC");
    line(out, "voltage injection Tv", s.dc.has_Tv, fmt_value(s.dc.Tv, v, sizeof v), "");
    if (!s.dc.has_Tv)
        fprintf(out, "      (Tv is infinite: v_y = 0)\n");
    line(out, "current injection Ti", s.dc.has_Ti, fmt_value(s.dc.Ti, v, sizeof v), "");
    if (!s.dc.has_Ti)
        fprintf(out, "      (Ti is infinite: no current returns to the y side)\n");
    line(out, "T = (Tv Ti - 1)/(Tv + Ti + 2)", s.dc.has_T, fmt_value(s.dc.T, v, sizeof v), "");
    line(out, "T from the probe quantities", s.dc.has_T_probe, fmt_value(s.dc.T_probe, v, sizeof v), "");
    line(out, "|T| = 1 at", s.has_unity, fmt_hz(s.unity_hz, f, sizeof f), "");
    snprintf(v, sizeof v, "%.2f deg", s.phase_margin_deg);
    line(out, "phase margin at the break", s.has_phase_margin, v, "");
    tb_break_vs_loop vs;
    tb_break_vs_loop_get(res, l, &vs);
    if (vs.kind == TB_BREAK_CMP_NO_LOOP)
        fprintf(out, "    the return ratio at the loop's source is 0 too: no loop at this frequency\n");
    else if (vs.kind == TB_BREAK_CMP_UNILATERAL)
        fprintf(out, "    equals the return ratio at the loop's source (%s): the break sees a unilateral loop\n",
                fmt_value(vs.T_return, v, sizeof v));
    else if (vs.kind == TB_BREAK_CMP_BILATERAL)
        fprintf(out, "    return ratio at the loop's source: %s (%.3g %% apart): the wire-break value includes the\n"
                     "    reverse transmission around the loop (bilateral elements) that the return ratio excludes\n",
                fmt_value(vs.T_return, v, sizeof v), 100.0 * vs.rel_diff);
}

/* The hand estimate's breakdown and the desensitivity of loop l (docs/feedback.md). */
static void feedback_block(FILE *out, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    impedance_lines(out, res, l);
    break_lines(out, res, l);
    tb_feedback_summary fs;
    if (tb_feedback_loop(res, l, &fs) != TB_OK)
        return;
    if (!fs.computed) {
        if (ckt->ideal.given)
            fprintf(out, "  hand estimate: -- (%s)\n", tb_fb_note_str(TB_FNOTE_NO_IO));
        return;
    }
    if (fs.has_estimate)
        breakdown_lines(out, ckt, &fs);
    desensitivity_lines(out, &fs);
    for (int n = 0; n < TB_FNOTE_COUNT; n++)
        if ((fs.notes & (1u << n)) && n != TB_FNOTE_NO_ESTIMATE && n != TB_FNOTE_HOLDS_IN_SWEEP &&
            n != TB_FNOTE_MISSES_AT_DC)
            fprintf(out, "    - %s\n", tb_fb_note_str((tb_fb_note)n));
}

/* The elements that move the loop most: a sentence for the phase margin, then a table. */
static void sensitivity_block(FILE *out, const tb_result *res, size_t l)
{
    tb_sensitivity s;
    char f[64];
    if (tb_sensitivity_get(res, l, &s) || !s.computed)
        return;
    fprintf(out, "  sensitivities (adjoint; per 1 %% increase of each element or parameter)\n");
    if (s.count > 0 && s.entries[0].has_pm) {
        fprintf(out, "    the phase margin is set by %s (%+.3g deg/%%)", s.entries[0].element, s.entries[0].pm_deg_pct);
        if (s.count > 1 && s.entries[1].has_pm)
            fprintf(out, " and %s (%+.3g deg/%%)", s.entries[1].element, s.entries[1].pm_deg_pct);
        fprintf(out, ", at %s\n", fmt_hz(s.pm_hz, f, sizeof f));
    }
    fprintf(out, "    %-12s %12s %12s %12s %12s %12s %12s\n", "element", "|T| %/%", "arg T deg/%", "|A| %/%",
            "f_unity %/%", "PM deg/%", "GM dB/%");
    for (size_t i = 0; i < s.count && i < 8; i++) {
        const tb_sens_entry *e = &s.entries[i];
        char c[6][24];
        snprintf(c[0], sizeof c[0], e->has_T ? "%+.4g" : "--", e->T_mag);
        snprintf(c[1], sizeof c[1], e->has_T ? "%+.4g" : "--", e->T_phase_deg);
        snprintf(c[2], sizeof c[2], e->has_A ? "%+.4g" : "--", e->A_mag);
        snprintf(c[3], sizeof c[3], e->has_unity ? "%+.4g" : "--", e->unity);
        snprintf(c[4], sizeof c[4], e->has_pm ? "%+.4g" : "--", e->pm_deg_pct);
        snprintf(c[5], sizeof c[5], e->has_gm ? "%+.4g" : "--", e->gm_db_pct);
        fprintf(out, "    %-12s %12s %12s %12s %12s %12s %12s\n", e->element, c[0], c[1], c[2], c[3], c[4], c[5]);
    }
    if (s.count > 8)
        fprintf(out, "    (%zu more in --json)\n", s.count - 8);
}

static tb_status loop_block(FILE *out, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_measures m;
    tb_status st = tb_measure_loop(res, l, &m);
    if (st)
        return st;
    const tb_element *e = &ckt->elems[ckt->loops[l].elem];
    names nm;
    fprintf(out, "\nloop at %s (%s, gain %.6g)\n", esc(&nm, 0, e->name), tb_elem_role_word(e), e->value);
    tb_stability stab;
    tb_stability_loop(res, l, &stab);
    verdict_first(out, &m, &stab);
    dc_block(out, &m, ckt);
    crossing_block(out, &m, &stab);
    closed_loop_lines(out, res, &m);
    spot_lines(out, ckt, res, l);
    feedback_block(out, ckt, res, l);
    sensitivity_block(out, res, l);
    if (stab.computed)
        stability_block(out, &stab);
    tb_closed_loop cl;
    tb_closed_loop_get(res, &cl);
    if (m.notes || stab.notes || (cl.notes & ~(1u << TB_CNOTE_NO_IO))) {
        fprintf(out, "  notes\n");
        for (int n = 0; n < TB_NOTE_COUNT; n++)
            if (m.notes & (1u << n))
                fprintf(out, "    - %s\n", tb_note_str((tb_note)n));
        if (m.t_inf_points > 0) {
            char v[48];
            fprintf(out, "      T is infinite at %zu sweep point%s, the first at %s\n", m.t_inf_points,
                    m.t_inf_points == 1 ? "" : "s", fmt_hz(m.t_inf_first_hz, v, sizeof v));
        }
        for (int n = 0; n < TB_SNOTE_COUNT; n++)
            if (stab.notes & (1u << n))
                fprintf(out, "    - %s\n", tb_stab_note_str((tb_stab_note)n));
        for (int n = 0; n < TB_CNOTE_COUNT; n++)
            if ((cl.notes & (1u << n)) && n != TB_CNOTE_NO_IO)
                fprintf(out, "    - %s\n", tb_cl_note_str((tb_cl_note)n));
    }
    return TB_OK;
}

static void step_block(FILE *out, const tb_result *res)
{
    tb_step_figures fig;
    char v[96];
    tb_step_figures_get(res, &fig);
    if (!fig.computed) {
        fprintf(out, "\nclosed-loop step response: -- (%s)\n", fig.why_absent ? fig.why_absent : "not computed");
        return;
    }
    fprintf(out, "\nclosed-loop step response (%s; %zu points to %.4g s, error estimate %.1g)\n", fig.method,
            fig.points, fig.t_end_s, fig.error_estimate);
    snprintf(v, sizeof v, "%.6g", fig.final_value);
    line(out, "final value A(0)", true, v, "");
    snprintf(v, sizeof v, "%.4g %% (peak %.6g at %.4g s)", fig.overshoot_pct, fig.peak_value, fig.peak_s);
    line(out, "overshoot", fig.has_overshoot, v, "");
    snprintf(v, sizeof v, "%.4g s", fig.rise_s);
    line(out, "rise time 10-90 %", fig.has_rise, v, "");
    snprintf(v, sizeof v, "%.4g s", fig.settling_s);
    line(out, "settling time (2 %)", fig.has_settling, v, "");
    if (fig.why_no_figures)
        fprintf(out, "    (%s)\n", fig.why_no_figures);
}

static void census_block(FILE *out, const tb_result *res)
{
    const tb_census_entry *e = NULL;
    size_t count = 0;
    char f[64], pm[32], t0[48];
    tb_census_get(res, &e, &count);
    fprintf(out, "\nloop census: the return ratio of every controlled source, largest |T| first\n");
    fprintf(out, "    %-12s %-7s %-12s %-22s %-9s %-12s %s\n", "source", "marked", "T(0)", "max |T|", "|T| = 1",
            "worst PM", "flag");
    for (size_t i = 0; i < count; i++) {
        names nm;
        char peak[128];
        if (e[i].in_loop)
            snprintf(peak, sizeof peak, "%+.1f dB at %s", e[i].max_T_db,
                     e[i].max_T_hz > 0 ? fmt_hz(e[i].max_T_hz, f, sizeof f) : "DC");
        else
            snprintf(peak, sizeof peak, "not in a loop");
        snprintf(pm, sizeof pm, e[i].has_phase_margin ? "%.2f deg" : "--", e[i].phase_margin_deg);
        if (e[i].has_T_dc)
            fmt_value(e[i].T_dc, t0, sizeof t0);
        else
            snprintf(t0, sizeof t0, "infinite");
        char flag[256];
        if (e[i].flagged)
            snprintf(flag, sizeof flag, "LOCAL LOOP: %s%s%s%s%s",
                     e[i].max_T_db >= 0 || e[i].t_infinite ? "|T| >= 1, check it" : "|T| < 1",
                     e[i].has_T_dc && creal(e[i].T_dc) < 0 ? "; positive feedback at DC" : "",
                     e[i].pm_ok ? "" : "; phase margin FAILS",
                     e[i].unstable_alone ? "; unstable on its own, relies on " : "",
                     e[i].unstable_alone ? esc(&nm, 1, e[i].relies_on) : "");
        else
            snprintf(flag, sizeof flag, "%s%s", e[i].same_loop_as ? "same loop as " : "",
                     e[i].same_loop_as ? esc(&nm, 1, e[i].same_loop_as) : "");
        fprintf(out, "    %-12s %-7s %-12s %-22s %-9zu %-12s %s\n", esc(&nm, 0, e[i].source), e[i].marked ? "yes" : "no", t0, peak,
                e[i].unity_count, pm, flag);
    }
}

tb_status tb_report_text(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    if (!ckt || !res || !out)
        return TB_ERR_USAGE;
    char f0[64], f1[64], o[512], file[1024], title[1024];
    names nm;
    fprintf(out, "tbeta %s: feedback report for %s\n", TB_VERSION, tb_report_escape(ckt->file, file, sizeof file));
    if (tb_circuit_title(ckt)[0])
        fprintf(out, "  title   %s\n", tb_report_escape(tb_circuit_title(ckt), title, sizeof title));
    fprintf(out, "  sweep   %s to %s, %zu points (%s %ld)\n", fmt_hz(ckt->ac.fstart, f0, sizeof f0),
            fmt_hz(ckt->ac.fstop, f1, sizeof f1), tb_result_points(res), tb_report_grid_word(ckt->ac.kind),
            ckt->ac.points);
    if (ckt->io.given)
        fprintf(out, "  gain    A = %s / %s\n", esc(&nm, 0, tb_report_output(&ckt->io, o, sizeof o)),
                esc(&nm, 1, ckt->io.source));
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        tb_status st = loop_block(out, ckt, res, l);
        if (st)
            return st;
    }
    if (tb_result_has_stability(res) && tb_result_has_io(res))
        step_block(out, res);
    if (tb_result_has_census(res))
        census_block(out, res);
    tb_report_distortion_text(ckt, res, out);
    tb_status sst = tb_report_spreadpart_text(ckt, res, out);
    if (sst)
        return sst;
    fprintf(out, "\ncaution: %s\n", tb_report_caution);
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
