/* src/report_json.c: the loop report as one JSON document (jansson), full precision, null when absent */
#include <jansson.h>
#include <math.h>
#include <string.h>

#include "units.h"
#include "report.h"
#include "report_distortion.h"
#include "report_spreadpart.h"

/* Builds a document while remembering whether any allocation failed. */
typedef struct {
    bool ok;
} builder;

static json_t *num(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

/* A real number when the imaginary part is exactly zero, else {"re":…,"im":…}; null when absent. */
static json_t *cnum(bool present, double complex z)
{
    if (!present || !isfinite(creal(z)) || !isfinite(cimag(z)))
        return json_null();
    if (cimag(z) == 0.0)
        return json_real(creal(z));
    return json_pack("{s:f,s:f}", "re", creal(z), "im", cimag(z));
}

static void set(builder *b, json_t *obj, const char *key, json_t *val)
{
    if (!val || json_object_set_new(obj, key, val))
        b->ok = false;
}

/* A loop's gains at one point (DC, or midband) and the figures derived from them. */
static json_t *gains_object(builder *b, const tb_point *p, const tb_dc_figures *fig)
{
    json_t *dc = json_object();
    if (!dc) {
        b->ok = false;
        return NULL;
    }
    set(b, dc, "T", cnum(fig->has_T, p->T));
    set(b, dc, "T_db", fig->has_T_db ? num(fig->T_db) : json_null());
    set(b, dc, "a", cnum(fig->has_a, p->a));
    set(b, dc, "beta", cnum(fig->has_beta, fig->beta));
    set(b, dc, "A_inf", cnum(fig->has_A_inf, p->A_inf));
    set(b, dc, "A0", cnum(fig->has_A0, p->A0));
    set(b, dc, "A", cnum(fig->has_A, p->A));
    set(b, dc, "gain_error_pct", cnum(fig->has_gain_error, fig->gain_error_pct));
    return dc;
}

static json_t *dc_object(builder *b, const tb_measures *m)
{
    return gains_object(b, &m->dc, &m->fig);
}

/* AC-coupled: the loop at midband; null otherwise. */
static json_t *midband_object(builder *b, const tb_measures *m)
{
    if (!m->has_mid)
        return json_null();
    json_t *o = gains_object(b, &m->mid, &m->mid_fig);
    if (o)
        set(b, o, "hz", num(m->mid_hz));
    return o;
}

static json_t *notes_array(builder *b, unsigned notes)
{
    json_t *arr = json_array();
    if (!arr) {
        b->ok = false;
        return NULL;
    }
    for (int n = 0; n < TB_NOTE_COUNT; n++)
        if (notes & (1u << n))
            if (json_array_append_new(arr, json_string(tb_note_str((tb_note)n))))
                b->ok = false;
    return arr;
}

static json_t *obj(builder *b)
{
    json_t *o = json_object();
    if (!o)
        b->ok = false;
    return o;
}

static const char *sweep_word(tb_sweep_side side)
{
    return side == TB_SWEEP_BELOW ? "below" : side == TB_SWEEP_ABOVE ? "above" : "inside";
}

static json_t *crossing_object(builder *b, const tb_crossing *c, bool unity)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "hz", num(c->hz));
    set(b, o, "sweep", json_string(sweep_word(c->sweep)));
    set(b, o, "T_db", num(c->T_db));
    set(b, o, "phase_deg", num(c->phase_deg));
    set(b, o, "direction", json_string(c->direction > 0 ? "rising" : c->direction < 0 ? "falling" : "dc"));
    if (unity) {
        set(b, o, "phase_margin_deg", num(c->margin));
        set(b, o, "delay_margin_s", num(c->delay_s));
    } else {
        set(b, o, "gain_change_db", num(c->margin));
    }
    return o;
}

static json_t *crossings_object(builder *b, const tb_stability *st)
{
    json_t *o = obj(b);
    json_t *unity = json_array();
    json_t *phase = json_array();
    if (!unity || !phase)
        b->ok = false;
    for (size_t i = 0; unity && i < st->unity_count; i++)
        if (json_array_append_new(unity, crossing_object(b, &st->unity[i], true)))
            b->ok = false;
    for (size_t i = 0; phase && i < st->phase_count; i++)
        if (json_array_append_new(phase, crossing_object(b, &st->phase[i], false)))
            b->ok = false;
    if (!o) {
        json_decref(unity);
        json_decref(phase);
        return NULL;
    }
    set(b, o, "unity", unity);
    set(b, o, "phase", phase);
    return o;
}

static json_t *complex_value(builder *b, double complex z)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "re", num(creal(z)));
    set(b, o, "im", num(cimag(z)));
    return o;
}

/* Closed-loop pole i: where it lies, whether the circuit was asked, its residue and weight. */
static json_t *pole_value(builder *b, const tb_stability *st, size_t i)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    double complex s = st->poles[i];
    bool weighed = st->has_weights && st->pole_place[i] != TB_POLE_AXIS;
    set(b, o, "re", num(creal(s)));
    set(b, o, "im", num(cimag(s)));
    set(b, o, "hz", num(cabs(s) / TB_TWO_PI));
    set(b, o, "place", json_string(tb_pole_place_str(st->pole_place[i])));
    set(b, o, "checked_on_circuit", json_boolean(st->pole_checked[i]));
    set(b, o, "residue", st->has_weights ? complex_value(b, st->pole_residue[i]) : json_null());
    set(b, o, "weight", weighed ? num(st->pole_weight[i]) : json_null());
    return o;
}

static json_t *poles_object(builder *b, const tb_stability *st)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "computed", json_boolean(st->has_poles));
    set(b, o, "unknowns", json_integer((json_int_t)st->unknowns));
    set(b, o, "limit", json_integer((json_int_t)st->pole_limit));
    if (!st->has_poles)
        return o;
    set(b, o, "closed_loop_finite", json_integer((json_int_t)st->cl_finite));
    set(b, o, "closed_loop_rhp", json_integer((json_int_t)st->cl_rhp));
    set(b, o, "closed_loop_axis", json_integer((json_int_t)st->cl_axis));
    set(b, o, "closed_loop_checked", json_integer((json_int_t)st->cl_checked));
    set(b, o, "open_loop_rhp", json_integer((json_int_t)st->ol_rhp));
    set(b, o, "open_loop_axis", json_integer((json_int_t)st->ol_axis));
    set(b, o, "open_loop_checked", json_integer((json_int_t)st->ol_checked));
    set(b, o, "weights_of", st->has_weights ? json_string(st->weights_of_a ? "A" : "T/(1+T)") : json_null());
    json_t *list = json_array();
    if (!list)
        b->ok = false;
    for (size_t i = 0; list && i < st->pole_count; i++)
        if (json_array_append_new(list, pole_value(b, st, i)))
            b->ok = false;
    set(b, o, "closed_loop_rightmost_first", list);
    return o;
}

/* One right-half-plane count: how it was made and what it found. */
static json_t *count_object(builder *b, tb_count_method by, size_t rhp, size_t axis)
{
    if (by == TB_COUNT_NONE)
        return json_null();
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "method", json_string(tb_count_method_str(by)));
    set(b, o, "rhp", json_integer((json_int_t)rhp));
    set(b, o, "axis", json_integer((json_int_t)axis));
    return o;
}

/* The open loop's count: by passive blocks, its axis count only when a walk made one. */
static json_t *open_count_object(builder *b, const tb_stability *st)
{
    json_t *o = count_object(b, st->ol_count_by, st->ol_rhp, st->ol_axis);
    if (o && st->ol_count_by == TB_COUNT_PASSIVE_BLOCKS && !st->ol_axis_counted)
        set(b, o, "axis", json_null());
    return o;
}

/* The right-half-plane counts the verdict rests on (by the poles, or above the
 * pole limit by the argument principle). */
static json_t *counts_object(builder *b, const tb_stability *st)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "closed_loop", count_object(b, st->cl_count_by, st->cl_rhp, st->cl_axis));
    set(b, o, "open_loop", open_count_object(b, st));
    set(b, o, "passive_blocks", json_integer((json_int_t)st->passive_blocks));
    set(b, o, "passive_blocks_active", json_integer((json_int_t)st->passive_active));
    set(b, o, "closed_loop_degree",
        st->cl_count_by == TB_COUNT_WINDING ? json_integer((json_int_t)st->cl_finite) : json_null());
    set(b, o, "evaluations", json_integer((json_int_t)st->winding_evaluations));
    set(b, o, "not_counted_because", st->winding_why ? json_string(st->winding_why) : json_null());
    return o;
}

/* Above the pole limit: the poles found near s = 0 and near the unity crossing. */
static json_t *near_object(builder *b, const tb_stability *st)
{
    if (st->has_poles || (st->near_count == 0 && st->near_solves == 0))
        return json_null();
    json_t *o = obj(b);
    json_t *list = json_array();
    if (!o || !list) {
        json_decref(list);
        b->ok = false;
        return o;
    }
    set(b, o, "method", json_string("shift-invert Krylov-Schur"));
    set(b, o, "complete", json_boolean(st->near_complete));
    set(b, o, "solves", json_integer((json_int_t)st->near_solves));
    for (size_t i = 0; i < st->near_count; i++) {
        json_t *p = obj(b);
        if (!p)
            break;
        set(b, p, "loop", json_string(st->near_open[i] ? "open" : "closed"));
        set(b, p, "re", num(creal(st->near_poles[i])));
        set(b, p, "im", num(cimag(st->near_poles[i])));
        set(b, p, "hz", num(cabs(st->near_poles[i]) / TB_TWO_PI));
        set(b, p, "near_hz", num(st->near_shift_hz[i]));
        if (json_array_append_new(list, p))
            b->ok = false;
    }
    set(b, o, "poles", list);
    return o;
}

static json_t *dominant_object(builder *b, const tb_stability *st)
{
    if (!st->has_dominant)
        return json_null();
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "re", num(creal(st->dominant)));
    set(b, o, "im", num(cimag(st->dominant)));
    set(b, o, "fn_hz", num(st->fn_hz));
    set(b, o, "zeta", num(st->zeta));
    set(b, o, "q", num(st->q));
    set(b, o, "weight", num(st->dominant_weight));
    set(b, o, "weight_ratio", st->has_weight_ratio ? num(st->weight_ratio) : json_null());
    set(b, o, "separation", st->has_separation ? num(st->separation) : json_null());
    set(b, o, "peaking_db", st->has_peaking ? num(st->peaking_db) : json_null());
    set(b, o, "peaking_hz", st->has_peaking ? num(st->peaking_hz) : json_null());
    set(b, o, "overshoot_pct", st->has_overshoot ? num(st->overshoot_pct) : json_null());
    set(b, o, "settling_s", num(st->settling_s));
    set(b, o, "step_overshoot_pct", st->has_step_overshoot ? num(st->step_overshoot_pct) : json_null());
    set(b, o, "predictions_agree", st->pair_checked ? json_boolean(!st->pair_disagrees) : json_null());
    return o;
}

static json_t *thresholds_object(builder *b, const tb_stability *st)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "pm_min_deg", num(st->pm_min_deg));
    set(b, o, "gm_min_db", num(st->gm_min_db));
    set(b, o, "pm_ok", json_boolean(st->pm_ok));
    set(b, o, "gm_ok", json_boolean(st->gm_ok));
    return o;
}

/* The stability keys of one loop (margins by root finding, poles, Nyquist, verdict). */
static void stability_keys(builder *b, json_t *lp, const tb_stability *st)
{
    char reason[512];
    set(b, lp, "phase_margin_hz", st->has_phase_margin ? num(st->phase_margin_hz) : json_null());
    set(b, lp, "gain_margin_up_db", st->has_gain_margin_up ? num(st->gain_margin_up_db) : json_null());
    set(b, lp, "gain_margin_up_hz", st->has_gain_margin_up ? num(st->gain_margin_up_hz) : json_null());
    /* only a bound: no -180 crossing listed where |T| < 1, and some not followed below the cap */
    set(b, lp, "gain_margin_up_above_db", st->has_gain_margin_up_above ? num(st->gm_cap_db) : json_null());
    set(b, lp, "gain_margin_down_db", st->has_gain_margin_down ? num(st->gain_margin_down_db) : json_null());
    set(b, lp, "gain_margin_down_hz", st->has_gain_margin_down ? num(st->gain_margin_down_hz) : json_null());
    set(b, lp, "delay_margin_s", st->has_delay_margin ? num(st->delay_margin_s) : json_null());
    set(b, lp, "delay_margin_hz", st->has_delay_margin ? num(st->delay_margin_hz) : json_null());
    set(b, lp, "vector_margin", st->has_vector_margin ? num(st->vector_margin) : json_null());
    set(b, lp, "vector_margin_hz", st->has_vector_margin ? num(st->vector_margin_hz) : json_null());
    set(b, lp, "margins_determined", json_boolean(st->margins_determined));
    set(b, lp, "searched_from_hz", num(st->search_lo_hz));
    set(b, lp, "searched_to_hz", num(st->search_hi_hz));
    set(b, lp, "crossings", crossings_object(b, st));
    set(b, lp, "poles", poles_object(b, st));
    set(b, lp, "rhp_counts", counts_object(b, st));
    set(b, lp, "poles_near", near_object(b, st));
    set(b, lp, "nyquist_encirclements", st->has_nyquist ? json_integer(st->nyquist_n) : json_null());
    set(b, lp, "dominant_pair", dominant_object(b, st));
    set(b, lp, "dominance", json_string(tb_dominance_str(st->dominance)));
    set(b, lp, "closed_loop_peaking_db", st->has_cl_peaking ? num(st->cl_peaking_db) : json_null());
    set(b, lp, "closed_loop_peaking_hz", st->has_cl_peaking ? num(st->cl_peaking_hz) : json_null());
    set(b, lp, "verdict", json_string(tb_verdict_str(st->verdict)));
    set(b, lp, "pole_verdict", st->cl_count_by != TB_COUNT_NONE ? json_string(tb_verdict_str(st->pole_verdict))
                                                                 : json_null());
    set(b, lp, "counts_disagree", json_boolean(st->counts_disagree));
    set(b, lp, "verdict_reason", json_string(tb_report_reason(st, reason, sizeof reason)));
    set(b, lp, "thresholds", thresholds_object(b, st));
    set(b, lp, "refinement_solves", json_integer((json_int_t)st->evaluations));
}

static json_t *notes_all(builder *b, unsigned notes, const tb_stability *st)
{
    json_t *arr = notes_array(b, notes);
    for (int n = 0; arr && n < TB_SNOTE_COUNT; n++)
        if (st->notes & (1u << n))
            if (json_array_append_new(arr, json_string(tb_stab_note_str((tb_stab_note)n))))
                b->ok = false;
    return arr;
}

/* One point of the breakdown: the parts of A - G (null without .ideal) and the sensitivities. */
static json_t *breakdown_object(builder *b, const tb_breakdown_point *p, double G, bool has_estimate)
{
    static const char *const key[TB_PART_COUNT] = {"loading", "finite_loop_gain", "feedthrough"};
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "A_minus_G", cnum(has_estimate, p->total));
    set(b, o, "error_pct", has_estimate ? num(100.0 * cabs(p->total) / fabs(G)) : json_null());
    for (int k = 0; k < TB_PART_COUNT; k++)
        set(b, o, key[k], cnum(p->has_parts, p->part[k]));
    set(b, o, "S", cnum(p->has_S, p->S));
    set(b, o, "S_A", cnum(p->has_S_A, p->S_A));
    return o;
}

static json_t *change_object(builder *b, const tb_feedback_summary *fs, int side)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "gain_change_pct", num((side == 0 ? 1.0 : -1.0) * fs->spread_pct));
    set(b, o, "first_order", cnum(true, fs->change_first_order[side]));
    set(b, o, "model", cnum(true, fs->change_model[side]));
    set(b, o, "resolved", cnum(fs->has_resolved, fs->change_resolved[side]));
    return o;
}

static json_t *zpoint_object(builder *b, const tb_zpoint *z)
{
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "Z", cnum(z->has_Z, z->Z));
    set(b, o, "Z0", cnum(z->has_Z0, z->Z0));
    set(b, o, "T_sc", cnum(z->has_T_sc, z->T_sc));
    set(b, o, "T_oc", cnum(z->has_T_oc, z->T_oc));
    set(b, o, "Z_blackman", cnum(z->has_blackman, z->Z_blackman));
    return o;
}

/* Every .zport seen by loop l, and the feedback topology. */
static json_t *ports_object(builder *b, const tb_result *res, size_t l)
{
    json_t *o = obj(b);
    json_t *arr = json_array();
    if (!o || !arr) {
        json_decref(o);
        json_decref(arr);
        b->ok = false;
        return NULL;
    }
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary s;
        json_t *po = obj(b);
        if (!po || tb_zport_loop(res, p, l, &s, NULL) != TB_OK || json_array_append_new(arr, po)) {
            b->ok = false;
            continue;
        }
        set(b, po, "name", tb_report_json_text(s.name));
        set(b, po, "seen_by_source", s.at_source ? tb_report_json_text(s.node_a) : json_null());
        set(b, po, "node_a", s.at_source ? json_null() : tb_report_json_text(s.node_a));
        set(b, po, "node_b", s.at_source ? json_null() : tb_report_json_text(s.node_b ? s.node_b : "0"));
        set(b, po, "dc_hz", num(s.dc_hz));
        set(b, po, "dc", zpoint_object(b, &s.dc));
        set(b, po, "side", json_string(tb_side_str(s.side)));
        set(b, po, "purity", num(s.purity));
        set(b, po, "max_rel_diff_blackman_vs_direct", s.has_max_diff ? num(s.max_rel_diff) : json_null());
    }
    set(b, o, "ports", arr);
    tb_feedback_type ft;
    bool typed = tb_feedback_type_loop(res, l, &ft) == TB_OK && ft.computed;
    set(b, o, "input_side", typed ? json_string(tb_side_str(ft.input)) : json_null());
    set(b, o, "output_side", typed ? json_string(tb_side_str(ft.output)) : json_null());
    set(b, o, "amplifier_type", typed ? json_string(tb_amp_type_str(ft.type)) : json_null());
    if (!typed)
        set(b, o, "note", json_string("the topology needs ports labelled in and out (.zport in ..., .zport out ...)"));
    return o;
}

/* The loop gain at the .break wire; null without .break. */
static json_t *break_object(builder *b, const tb_result *res)
{
    tb_break_summary s;
    if (tb_break_get(res, &s, NULL) != TB_OK || !s.computed)
        return json_null();
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "source", tb_report_json_text(s.source));
    set(b, o, "node_x", tb_report_json_text(s.node_x));
    set(b, o, "node_y", tb_report_json_text(s.node_y));
    set(b, o, "dc_hz", num(s.dc_hz));
    set(b, o, "Tv", cnum(s.dc.has_Tv, s.dc.Tv));
    set(b, o, "Ti", cnum(s.dc.has_Ti, s.dc.Ti));
    set(b, o, "T", cnum(s.dc.has_T, s.dc.T));
    set(b, o, "T_probe", cnum(s.dc.has_T_probe, s.dc.T_probe));
    set(b, o, "unity_hz", s.has_unity ? num(s.unity_hz) : json_null());
    set(b, o, "phase_margin_deg", s.has_phase_margin ? num(s.phase_margin_deg) : json_null());
    if (!s.dc.has_Tv || !s.dc.has_Ti)
        set(b, o, "note", json_string(!s.dc.has_Tv ? "Tv is infinite (v_y = 0): T = Ti"
                                                   : "Ti is infinite (no current returns to the y side): T = Tv"));
    return o;
}

/* The hand estimate's breakdown and the desensitivity of loop l (docs/feedback.md). */
static json_t *feedback_object(builder *b, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_feedback_summary fs;
    if (tb_feedback_loop(res, l, &fs) != TB_OK)
        return json_null();
    json_t *o = obj(b);
    json_t *notes = json_array();
    if (!o || !notes) {
        json_decref(o);
        json_decref(notes);
        b->ok = false;
        return NULL;
    }
    bool est = fs.has_estimate;
    set(b, o, "estimate", est ? num(fs.estimate) : json_null());
    set(b, o, "stated_as", est ? json_string(ckt->ideal.as_beta ? "beta" : "gain") : json_null());
    set(b, o, "tol_pct", num(fs.tol_pct));
    set(b, o, "dc_hz", num(fs.dc_hz));
    set(b, o, "dc", fs.computed ? breakdown_object(b, &fs.dc, fs.estimate, est) : json_null());
    set(b, o, "dominant_dc", est && fs.dc.has_parts ? json_string(tb_part_str(fs.dominant_dc)) : json_null());
    set(b, o, "holds_at_dc", est ? json_boolean(fs.holds_at_dc) : json_null());
    set(b, o, "limit_hz", fs.has_limit ? num(fs.limit_hz) : json_null());
    set(b, o, "dominant_at_limit", fs.has_limit ? json_string(tb_part_str(fs.dominant_limit)) : json_null());
    set(b, o, "at_limit", fs.has_limit ? breakdown_object(b, &fs.at_limit, fs.estimate, est) : json_null());
    set(b, o, "spread_pct", num(fs.spread_pct));
    set(b, o, "gain_plus", fs.has_change ? change_object(b, &fs, 0) : json_null());
    set(b, o, "gain_minus", fs.has_change ? change_object(b, &fs, 1) : json_null());
    for (int n = 0; n < TB_FNOTE_COUNT; n++)
        if ((fs.notes & (1u << n)) && json_array_append_new(notes, json_string(tb_fb_note_str((tb_fb_note)n))))
            b->ok = false;
    set(b, o, "notes", notes);
    set(b, o, "impedances", ports_object(b, res, l));
    set(b, o, "wire_break", break_object(b, res));
    return o;
}

/* The loop's sensitivities to every element, ranked; null when not asked for. */
static json_t *sensitivity_object(builder *b, const tb_result *res, size_t l)
{
    tb_sensitivity s;
    if (tb_sensitivity_get(res, l, &s) || !s.computed)
        return json_null();
    json_t *o = obj(b);
    json_t *arr = json_array();
    if (!o || !arr) {
        json_decref(o);
        json_decref(arr);
        b->ok = false;
        return NULL;
    }
    set(b, o, "dc_hz", num(s.dc_hz));
    set(b, o, "phase_margin_hz", s.has_pm_hz ? num(s.pm_hz) : json_null());
    set(b, o, "gain_margin_hz", s.has_gm_hz ? num(s.gm_hz) : json_null());
    for (size_t i = 0; i < s.count; i++) {
        const tb_sens_entry *e = &s.entries[i];
        json_t *x = obj(b);
        if (!x)
            break;
        set(b, x, "element", tb_report_json_text(e->element));
        set(b, x, "value", num(e->value));
        set(b, x, "T_mag", e->has_T ? num(e->T_mag) : json_null());
        set(b, x, "T_phase_deg_per_pct", e->has_T ? num(e->T_phase_deg) : json_null());
        set(b, x, "A_mag", e->has_A ? num(e->A_mag) : json_null());
        set(b, x, "A_inf_mag", e->has_A_inf ? num(e->A_inf_mag) : json_null());
        set(b, x, "unity_hz", e->has_unity ? num(e->unity) : json_null());
        set(b, x, "phase_margin_deg_per_pct", e->has_pm ? num(e->pm_deg_pct) : json_null());
        set(b, x, "gain_margin_up_db_per_pct", e->has_gm ? num(e->gm_db_pct) : json_null());
        if (json_array_append_new(arr, x))
            b->ok = false;
    }
    set(b, o, "elements", arr);
    return o;
}

static json_t *loop_object(builder *b, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_measures m;
    if (tb_measure_loop(res, l, &m)) {
        b->ok = false;
        return NULL;
    }
    json_t *lp = json_object();
    if (!lp) {
        b->ok = false;
        return NULL;
    }
    const tb_element *e = &ckt->elems[ckt->loops[l].elem];
    set(b, lp, "source", tb_report_json_text(e->name));
    set(b, lp, "kind", json_string(tb_elem_kind_word(e->kind)));
    set(b, lp, "gain", num(e->value));
    set(b, lp, "dc_hz", num(m.dc_hz));
    set(b, lp, "dc", dc_object(b, &m));
    tb_stability st;
    tb_stability_loop(res, l, &st);
    /* the headline crossing: the same in tb_measures and tb_stability when the latter ran */
    set(b, lp, "unity_hz", m.has_unity ? num(m.unity_hz) : json_null());
    set(b, lp, "phase_margin_deg", m.has_phase_margin ? num(m.phase_margin_deg) : json_null());
    if (st.computed)
        stability_keys(b, lp, &st);
    set(b, lp, "f3db_closed_hz", m.has_f3db ? num(m.f3db_closed_hz) : json_null());
    set(b, lp, "t_infinite_points", json_integer((json_int_t)m.t_inf_points));
    set(b, lp, "t_infinite_first_hz", m.t_inf_points ? num(m.t_inf_first_hz) : json_null());
    set(b, lp, "midband", midband_object(b, &m));
    set(b, lp, "stability_shown", json_boolean(m.stability_shown));
    set(b, lp, "oscillation_hz", m.has_oscillation ? num(m.oscillation_hz) : json_null());
    set(b, lp, "runaway", json_boolean(m.runaway));
    set(b, lp, "max_sensitivity_db", m.has_max_sensitivity ? num(m.max_sensitivity_db) : json_null());
    set(b, lp, "max_sensitivity_hz", m.has_max_sensitivity ? num(m.max_sensitivity_hz) : json_null());
    set(b, lp, "feedback", feedback_object(b, ckt, res, l));
    set(b, lp, "sensitivities", sensitivity_object(b, res, l));
    set(b, lp, "notes", notes_all(b, m.notes, &st));
    return lp;
}

static json_t *sweep_object(builder *b, const tb_circuit *ckt, const tb_result *res)
{
    json_t *sw = json_object();
    if (!sw) {
        b->ok = false;
        return NULL;
    }
    set(b, sw, "grid", json_string(tb_report_grid_word(ckt->ac.kind)));
    set(b, sw, "n", json_integer(ckt->ac.points));
    set(b, sw, "fstart_hz", num(ckt->ac.fstart));
    set(b, sw, "fstop_hz", num(ckt->ac.fstop));
    set(b, sw, "points", json_integer((json_int_t)tb_result_points(res)));
    set(b, sw, "dc_solved", json_boolean(tb_result_has_dc(res)));
    return sw;
}

static json_t *opt_num(bool present, double x)
{
    return present ? num(x) : json_null();
}

/* The closed-loop response |A(jw)|: reference, -3 dB edges, peaking (null without .io). */
static json_t *closed_loop_object(builder *b, const tb_result *res)
{
    tb_closed_loop cl;
    tb_closed_loop_get(res, &cl);
    if (!cl.computed)
        return json_null();
    json_t *o = obj(b);
    json_t *notes = json_array();
    if (!o || !notes) {
        json_decref(o);
        json_decref(notes);
        b->ok = false;
        return NULL;
    }
    set(b, o, "ac_coupled", json_boolean(cl.ac_coupled));
    set(b, o, "ref_hz", num(cl.ref_hz));
    set(b, o, "A_ref", cnum(true, cl.A_ref));
    set(b, o, "low_edge_hz", cl.has_low_edge ? num(cl.low_edge_hz) : json_null());
    set(b, o, "low_edge_outside_sweep", json_boolean(cl.low_edge_outside));
    set(b, o, "high_edge_hz", cl.has_high_edge ? num(cl.high_edge_hz) : json_null());
    set(b, o, "high_edge_outside_sweep", json_boolean(cl.high_edge_outside));
    set(b, o, "peak_hz", cl.has_peak ? num(cl.peak_hz) : json_null());
    set(b, o, "peak_db", cl.has_peak ? num(cl.peak_db) : json_null());
    for (int n = 0; n < TB_CNOTE_COUNT; n++)
        if (cl.notes & (1u << n))
            if (json_array_append_new(notes, json_string(tb_cl_note_str((tb_cl_note)n))))
                b->ok = false;
    set(b, o, "notes", notes);
    return o;
}

/* The closed-loop step response's figures (the samples: tbeta step NETLIST). */
static json_t *step_object(builder *b, const tb_result *res)
{
    tb_step_figures fig;
    tb_step_figures_get(res, &fig);
    json_t *o = obj(b);
    if (!o)
        return NULL;
    set(b, o, "computed", json_boolean(fig.computed));
    if (!fig.computed) {
        set(b, o, "note", json_string(fig.why_absent ? fig.why_absent : "not computed"));
        return o;
    }
    set(b, o, "method", json_string(fig.method));
    set(b, o, "error_estimate", num(fig.error_estimate));
    set(b, o, "points", json_integer((json_int_t)fig.points));
    set(b, o, "t_end_s", num(fig.t_end_s));
    set(b, o, "final_value", num(fig.final_value));
    set(b, o, "peak_value", opt_num(fig.has_peak, fig.peak_value));
    set(b, o, "peak_s", opt_num(fig.has_peak, fig.peak_s));
    set(b, o, "overshoot_pct", opt_num(fig.has_overshoot, fig.overshoot_pct));
    set(b, o, "rise_s", opt_num(fig.has_rise, fig.rise_s));
    set(b, o, "settling_s", opt_num(fig.has_settling, fig.settling_s));
    if (fig.why_no_figures)
        set(b, o, "note", json_string(fig.why_no_figures));
    return o;
}

static json_t *census_entry(builder *b, const tb_census_entry *e)
{
    json_t *o = obj(b);
    json_t *unity = json_array();
    if (!unity)
        b->ok = false;
    for (size_t i = 0; unity && i < e->unity_count; i++) {
        json_t *c = obj(b);
        if (c) {
            set(b, c, "hz", num(e->unity_hz[i]));
            set(b, c, "phase_margin_deg", num(e->margin_deg[i]));
        }
        if (!c || json_array_append_new(unity, c))
            b->ok = false;
    }
    if (!o) {
        json_decref(unity);
        return NULL;
    }
    set(b, o, "source", tb_report_json_text(e->source));
    set(b, o, "marked", json_boolean(e->marked));
    set(b, o, "in_loop", json_boolean(e->in_loop));
    set(b, o, "max_T_db", e->in_loop ? num(e->max_T_db) : json_null());
    set(b, o, "max_T_hz", e->in_loop ? num(e->max_T_hz) : json_null());
    set(b, o, "T_infinite_somewhere", json_boolean(e->t_infinite));
    set(b, o, "unity", unity);
    set(b, o, "phase_margin_deg", e->has_phase_margin ? num(e->phase_margin_deg) : json_null());
    set(b, o, "T_dc", cnum(e->has_T_dc, e->T_dc));
    set(b, o, "same_loop_as", e->same_loop_as ? tb_report_json_text(e->same_loop_as) : json_null());
    set(b, o, "flagged", json_boolean(e->flagged));
    set(b, o, "phase_margin_ok", json_boolean(e->pm_ok));
    set(b, o, "unstable_alone", json_boolean(e->unstable_alone));
    set(b, o, "relies_on", e->relies_on ? tb_report_json_text(e->relies_on) : json_null());
    return o;
}

static json_t *census_array(builder *b, const tb_result *res)
{
    const tb_census_entry *entries = NULL;
    size_t count = 0;
    tb_census_get(res, &entries, &count);
    json_t *arr = json_array();
    if (!arr)
        b->ok = false;
    for (size_t i = 0; arr && i < count; i++)
        if (json_array_append_new(arr, census_entry(b, &entries[i])))
            b->ok = false;
    return arr;
}

/* Loop l at chosen frequency i (--at): its gains, |1 + T|, the breakdown and the ports. */
static json_t *spot_loop_object(builder *b, const tb_circuit *ckt, const tb_result *res, size_t i, size_t l)
{
    tb_spot s;
    json_t *o = obj(b);
    if (!o || tb_spot_get(res, i, l, &s) != TB_OK)
        return o;
    const tb_point *p = &s.pt;
    bool io = s.solved && !(p->flags & TB_PT_NO_IO);
    set(b, o, "loop", tb_report_json_text(tb_circuit_loop_name(ckt, l)));
    set(b, o, "solved", json_boolean(s.solved));
    set(b, o, "T", cnum(s.solved && s.has_T, p->T));
    set(b, o, "T_db", s.solved && s.has_T_db ? num(s.T_db) : json_null());
    set(b, o, "T_phase_deg", s.solved && s.has_T_db ? num(s.T_phase_deg) : json_null());
    set(b, o, "return_difference", s.solved && s.has_T ? num(s.return_difference) : json_null());
    set(b, o, "A", cnum(io, p->A));
    set(b, o, "A_inf", cnum(io && !(p->flags & TB_PT_AINF_NONE), p->A_inf));
    set(b, o, "A0", cnum(io && !(p->flags & TB_PT_A0_NONE), p->A0));
    set(b, o, "a", cnum(io && s.has_T && !(p->flags & TB_PT_AINF_NONE), p->a));
    tb_feedback_summary fs = {0};
    tb_feedback_loop(res, l, &fs);
    bool est = s.solved && fs.computed && fs.has_estimate;
    set(b, o, "breakdown", s.solved ? breakdown_object(b, &s.breakdown, fs.estimate, est) : json_null());
    json_t *ports = json_array();
    if (!ports)
        b->ok = false;
    for (size_t q = 0; ports && q < s.ports; q++) {
        tb_zport_summary zs;
        tb_zport_loop(res, q, l, &zs, NULL);
        json_t *zo = s.solved ? zpoint_object(b, &s.zports[q]) : obj(b);
        if (zo)
            set(b, zo, "name", tb_report_json_text(zs.name));
        if (!zo || json_array_append_new(ports, zo))
            b->ok = false;
    }
    set(b, o, "ports", ports);
    return o;
}

/* Every chosen frequency (--at), each with every loop. */
static json_t *spot_array(builder *b, const tb_circuit *ckt, const tb_result *res)
{
    json_t *arr = json_array();
    if (!arr)
        b->ok = false;
    for (size_t i = 0; arr && i < tb_spot_count(res); i++) {
        json_t *o = obj(b);
        json_t *loops = json_array();
        tb_spot s = {0};
        tb_spot_get(res, i, 0, &s);
        if (o)
            set(b, o, "hz", num(s.f_hz));
        for (size_t l = 0; loops && l < tb_result_loops(res); l++)
            if (json_array_append_new(loops, spot_loop_object(b, ckt, res, i, l)))
                b->ok = false;
        if (!loops)
            b->ok = false;
        if (o)
            set(b, o, "loops", loops);
        else
            json_decref(loops);
        if (!o || json_array_append_new(arr, o))
            b->ok = false;
    }
    return arr;
}

static json_t *document(builder *b, const tb_circuit *ckt, const tb_result *res)
{
    json_t *root = json_object();
    json_t *loops = json_array();
    if (!root || !loops) {
        json_decref(root);
        json_decref(loops);
        b->ok = false;
        return NULL;
    }
    set(b, root, "tool", json_string("tbeta"));
    set(b, root, "version", json_string(TB_VERSION));
    set(b, root, "netlist", tb_report_json_text(ckt->file));
    set(b, root, "title", tb_report_json_text(tb_circuit_title(ckt)));
    set(b, root, "sweep", sweep_object(b, ckt, res));
    if (ckt->io.given) {
        char buf[512];
        set(b, root, "input", tb_report_json_text(ckt->io.source));
        set(b, root, "output", tb_report_json_text(tb_report_output(&ckt->io, buf, sizeof buf)));
    }
    for (size_t l = 0; l < tb_result_loops(res); l++) {
        json_t *lp = loop_object(b, ckt, res, l);
        if (!lp || json_array_append_new(loops, lp))
            b->ok = false;
    }
    set(b, root, "gain_unit", json_string(tb_circuit_gain_unit(ckt)));
    set(b, root, "beta_unit", json_string(tb_circuit_beta_unit(ckt)));
    set(b, root, "loops", loops);
    set(b, root, "closed_loop", closed_loop_object(b, res));
    if (tb_result_has_stability(res))
        set(b, root, "step_response", step_object(b, res));
    if (tb_result_has_census(res))
        set(b, root, "census", census_array(b, res));
    if (ckt->volterra.given)
        set(b, root, "distortion", tb_report_distortion_json(ckt, res, tb_report_json_text));
    if (tb_spot_count(res) > 0)
        set(b, root, "at", spot_array(b, ckt, res));
    if (!tb_report_spreadpart_json(ckt, res, root))
        b->ok = false;
    set(b, root, "caution", json_string(tb_report_caution));
    return root;
}

tb_status tb_report_json(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    if (!ckt || !res || !out)
        return TB_ERR_USAGE;
    builder b = {true};
    json_t *root = document(&b, ckt, res);
    if (!b.ok) {
        json_decref(root);
        return TB_ERR_NOMEM;
    }
    int rc = json_dumpf(root, out, JSON_INDENT(2) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (rc && !ferror(out))
        return TB_ERR_NOMEM; /* json_dumpf fails without a write error only when it runs out of memory */
    if (rc || fputc('\n', out) == EOF || ferror(out))
        return TB_ERR_IO;
    return TB_OK;
}
