/* src/expect.c: .expect cards: the table of figures a netlist may bound, expectations, their evaluation */
#include "expect.h"

#include <complex.h>
#include <math.h>
#include <stdalign.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "diag.h"
#include "lex.h"
#include "suggest.h"

/* ---- getters: one per figure ---------------------------------------------- */

static bool has_io(const tb_figure_src *s, const char **why)
{
    if (s->m->dc.flags & TB_PT_NO_IO) {
        *why = "no .io directive";
        return false;
    }
    return true;
}

static bool finite_t(const tb_figure_src *s, const char **why)
{
    if (s->m->dc.flags & TB_PT_T_INF) {
        *why = "T is infinite at DC";
        return false;
    }
    return true;
}

static bool has_ainf(const tb_figure_src *s, const char **why)
{
    if (!has_io(s, why))
        return false;
    if (s->m->dc.flags & TB_PT_AINF_NONE) {
        *why = "A_inf is undefined at DC";
        return false;
    }
    return true;
}

static bool get_dc_t(const tb_figure_src *s, double *x, const char **why)
{
    *x = creal(s->m->dc.T);
    return finite_t(s, why);
}

static bool get_dc_t_db(const tb_figure_src *s, double *x, const char **why)
{
    if (!finite_t(s, why))
        return false;
    if (!s->m->fig.has_T_db) {
        *why = "T is zero at DC";
        return false;
    }
    *x = s->m->fig.T_db;
    return true;
}

static bool get_dc_a(const tb_figure_src *s, double *x, const char **why)
{
    *x = creal(s->m->dc.a);
    return has_ainf(s, why) && finite_t(s, why);
}

static bool get_dc_beta(const tb_figure_src *s, double *x, const char **why)
{
    if (!has_ainf(s, why))
        return false;
    if (!s->m->fig.has_beta) {
        *why = "A_inf is zero at DC";
        return false;
    }
    *x = creal(s->m->fig.beta);
    return true;
}

static bool get_dc_ainf(const tb_figure_src *s, double *x, const char **why)
{
    *x = creal(s->m->dc.A_inf);
    return has_ainf(s, why);
}

static bool get_dc_a0(const tb_figure_src *s, double *x, const char **why)
{
    if (!has_io(s, why))
        return false;
    if (s->m->dc.flags & TB_PT_A0_NONE) {
        *why = "A0 is undefined at DC (T infinite)";
        return false;
    }
    *x = creal(s->m->dc.A0);
    return true;
}

static bool get_dc_closed(const tb_figure_src *s, double *x, const char **why)
{
    *x = creal(s->m->dc.A);
    return has_io(s, why);
}

static bool get_gain_error(const tb_figure_src *s, double *x, const char **why)
{
    double beta = 0;
    if (!get_dc_beta(s, &beta, why))
        return false;
    *x = creal(s->m->fig.gain_error_pct);
    return true;
}

/* Why a headline margin is absent when the stability analysis ran. */
static const char *margin_why(const tb_figure_src *s, const char *none)
{
    if (!s->st->margins_determined)
        return "the margins could not be determined (see the notes)";
    return none;
}

static bool get_unity(const tb_figure_src *s, double *x, const char **why)
{
    *x = s->m->unity_hz;
    *why = s->st->computed ? margin_why(s, "|T| never crosses 1")
                           : "|T| never falls through 1 in the sweep";
    return s->m->has_unity;
}

/* The headline phase margin; tb_measures carries the stability analysis's when it ran. */
static bool get_pm(const tb_figure_src *s, double *x, const char **why)
{
    *why = s->st->computed ? margin_why(s, "no unity crossing of |T|") : "no unity crossing of |T| in the sweep";
    *x = s->m->phase_margin_deg;
    return s->m->has_phase_margin;
}

static bool stab(const tb_figure_src *s, const char **why)
{
    if (!s->st->computed) {
        *why = "stability analysis switched off";
        return false;
    }
    return true;
}

static bool get_gm_up(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = s->st->gain_margin_up_db;
    *why = margin_why(s, "the phase of T never reaches -180 deg where |T| < 1");
    return s->st->has_gain_margin_up;
}

static bool get_gm_down(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = s->st->gain_margin_down_db;
    *why = margin_why(s, "the phase of T never reaches -180 deg where |T| > 1");
    return s->st->has_gain_margin_down;
}

static bool get_delay(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = s->st->delay_margin_s;
    *why = margin_why(s, s->st->unity_count ? "the loop is not stable" : "no unity crossing of |T|");
    return s->st->has_delay_margin;
}

static bool get_vector(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = s->st->vector_margin;
    *why = "not computed";
    return s->st->has_vector_margin;
}

static bool get_f3db(const tb_figure_src *s, double *x, const char **why)
{
    if (!has_io(s, why))
        return false;
    *x = s->m->f3db_closed_hz;
    *why = "|A| never falls 3 dB below its DC value in the sweep";
    return s->m->has_f3db;
}

static bool get_peaking(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = s->st->has_peaking ? s->st->peaking_db : 0.0;
    *why = "no dominant closed-loop pole";
    return s->st->has_dominant;
}

static bool step_ok(const tb_figure_src *s, const char **why)
{
    if (!s->step || !s->step->computed) {
        *why = s->step && s->step->why_absent ? s->step->why_absent : "no step response";
        return false;
    }
    *why = "not defined for this response";
    return true;
}

static bool get_overshoot(const tb_figure_src *s, double *x, const char **why)
{
    *x = s->step ? s->step->overshoot_pct : 0;
    return step_ok(s, why) && s->step->has_overshoot;
}

static bool get_rise(const tb_figure_src *s, double *x, const char **why)
{
    *x = s->step ? s->step->rise_s : 0;
    return step_ok(s, why) && s->step->has_rise;
}

static bool get_settling(const tb_figure_src *s, double *x, const char **why)
{
    *x = s->step ? s->step->settling_s : 0;
    return step_ok(s, why) && s->step->has_settling;
}

static bool estimate(const tb_figure_src *s, const char **why)
{
    if (!s->fb || !s->fb->computed || !s->fb->has_estimate) {
        *why = s->fb && !s->fb->computed ? "no .io directive" : "no .ideal estimate";
        return false;
    }
    return true;
}

static bool get_ideal_error(const tb_figure_src *s, double *x, const char **why)
{
    if (!estimate(s, why))
        return false;
    *x = s->fb->error_dc_pct;
    return true;
}

static bool get_ideal_limit(const tb_figure_src *s, double *x, const char **why)
{
    if (!estimate(s, why))
        return false;
    *x = s->fb->limit_hz;
    *why = s->fb->holds_at_dc ? "the estimate holds over the whole sweep"
                              : "the estimate misses already at DC";
    return s->fb->has_limit;
}

static bool get_verdict(const tb_figure_src *s, double *x, const char **why)
{
    if (!stab(s, why))
        return false;
    *x = (double)s->st->verdict;
    return true;
}

/* ---- distortion (.volterra) ------------------------------------------------ */

static bool dist_ok(const tb_figure_src *s, const char **why)
{
    if (!s->dist || !s->dist->computed) {
        *why = s->dist && s->dist->why_absent ? s->dist->why_absent : "no .volterra directive";
        return false;
    }
    return true;
}

/* A ratio in dB (db) or percent. */
static bool ratio_fig(const tb_dist_ratio *r, bool db, double *x, const char **why)
{
    if (!r->present) {
        *why = "not computed (see the report)";
        return false;
    }
    if (db && !r->has_db) {
        *why = "the product vanishes (no dB value)";
        return false;
    }
    *x = db ? r->db : 100 * r->ratio;
    return true;
}

static bool open_ok(const tb_figure_src *s, const char **why)
{
    if (!dist_ok(s, why))
        return false;
    if (!s->dl || !s->dl->computed) {
        *why = s->dl && s->dl->why_absent ? s->dl->why_absent : "the loop could not be opened";
        return false;
    }
    return true;
}

static bool get_hd2_db(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.hd2, true, x, why);
}

static bool get_hd3_db(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.hd3, true, x, why);
}

static bool get_hd2_pct(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.hd2, false, x, why);
}

static bool get_hd3_pct(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.hd3, false, x, why);
}

static bool get_im2_db(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.im2, true, x, why);
}

static bool get_im3_db(const tb_figure_src *s, double *x, const char **why)
{
    return dist_ok(s, why) && ratio_fig(&s->dist->closed.im3, true, x, why);
}

static bool get_iip3(const tb_figure_src *s, double *x, const char **why)
{
    if (!dist_ok(s, why))
        return false;
    *x = s->dist->closed.iip3;
    *why = "IM3 vanishes";
    return s->dist->closed.has_iip3;
}

static bool get_hd2_open_db(const tb_figure_src *s, double *x, const char **why)
{
    return open_ok(s, why) && ratio_fig(&s->dl->open.hd2, true, x, why);
}

static bool get_hd3_open_db(const tb_figure_src *s, double *x, const char **why)
{
    return open_ok(s, why) && ratio_fig(&s->dl->open.hd3, true, x, why);
}

static bool get_hd2_reduction(const tb_figure_src *s, double *x, const char **why)
{
    if (!open_ok(s, why))
        return false;
    *x = s->dl->hd2_reduction;
    *why = "HD2 vanishes with or without feedback";
    return s->dl->has_hd2_reduction;
}

static bool get_hd3_reduction(const tb_figure_src *s, double *x, const char **why)
{
    if (!open_ok(s, why))
        return false;
    *x = s->dl->hd3_reduction;
    *why = "HD3 vanishes with or without feedback";
    return s->dl->has_hd3_reduction;
}

/* ---- the table ------------------------------------------------------------ */

/* Adding a figure is one row here (and one line in docs/check.md). */
static const tb_figure figures[] = {
    {"dc.T", "", TB_WORSE_LOWER, false, get_dc_t, "loop gain T at DC (real part)"},
    {"dc.T_db", "dB", TB_WORSE_LOWER, false, get_dc_t_db, "20 log10 |T| at DC"},
    {"dc.a", "", TB_WORSE_LOWER, false, get_dc_a, "equivalent open-loop gain a = A_inf*T at DC"},
    {"dc.beta", "", TB_WORSE_ANY, false, get_dc_beta, "loaded feedback factor 1/A_inf at DC"},
    {"dc.A_inf", "", TB_WORSE_ANY, false, get_dc_ainf, "ideal (asymptotic) gain A_inf at DC"},
    {"dc.A0", "", TB_WORSE_ANY, false, get_dc_a0, "feedthrough A0 at DC"},
    {"dc.A", "", TB_WORSE_ANY, false, get_dc_closed, "closed-loop gain A at DC"},
    {"dc.gain_error_pct", "%", TB_WORSE_FARTHER, false, get_gain_error,
     "gain error (A - A_inf)/A_inf at DC, in percent"},
    {"unity_hz", "Hz", TB_WORSE_ANY, false, get_unity,
     "the unity crossing of the headline phase margin"},
    {"phase_margin_deg", "deg", TB_WORSE_LOWER, false, get_pm, "phase margin (headline, signed)"},
    {"gain_margin_up_db", "dB", TB_WORSE_LOWER, false, get_gm_up,
     "how far the loop gain may rise before instability"},
    {"gain_margin_down_db", "dB", TB_WORSE_LOWER, false, get_gm_down,
     "how far the loop gain may fall before instability"},
    {"delay_margin_s", "s", TB_WORSE_LOWER, false, get_delay,
     "smallest delay that puts T through -1 (over every unity crossing)"},
    {"vector_margin", "", TB_WORSE_LOWER, false, get_vector, "min |1 + T| over the whole axis"},
    {"f3db_closed_hz", "Hz", TB_WORSE_ANY, false, get_f3db, "closed-loop -3 dB frequency"},
    {"peaking_db", "dB", TB_WORSE_HIGHER, false, get_peaking,
     "closed-loop peaking of the dominant pair (0 when it does not peak)"},
    {"overshoot_pct", "%", TB_WORSE_HIGHER, false, get_overshoot, "step-response overshoot"},
    {"rise_s", "s", TB_WORSE_HIGHER, false, get_rise, "step-response 10-90 % rise time"},
    {"settling_s", "s", TB_WORSE_HIGHER, false, get_settling, "step-response 2 % settling time"},
    {"ideal.error_pct", "%", TB_WORSE_HIGHER, false, get_ideal_error,
     "|A - G|/|G| at DC, G the .ideal hand estimate, in percent"},
    {"ideal.limit_hz", "Hz", TB_WORSE_LOWER, false, get_ideal_limit,
     "lowest frequency where A leaves the .ideal estimate's tolerance"},
    {"verdict", "", TB_WORSE_ANY, true, get_verdict,
     "stable, marginal, unstable or undecided"},
    {"hd2_db", "dB", TB_WORSE_HIGHER, false, get_hd2_db, "second harmonic at the .volterra tone, as drawn"},
    {"hd3_db", "dB", TB_WORSE_HIGHER, false, get_hd3_db, "third harmonic at the .volterra tone, as drawn"},
    {"hd2_pct", "%", TB_WORSE_HIGHER, false, get_hd2_pct, "second harmonic in percent of the fundamental"},
    {"hd3_pct", "%", TB_WORSE_HIGHER, false, get_hd3_pct, "third harmonic in percent of the fundamental"},
    {"im2_db", "dB", TB_WORSE_HIGHER, false, get_im2_db, "second-order intermodulation at f1 + f2"},
    {"im3_db", "dB", TB_WORSE_HIGHER, false, get_im3_db, "third-order intermodulation at 2 f1 - f2"},
    {"iip3", "", TB_WORSE_LOWER, false, get_iip3,
     "input-referred third-order intercept, per tone, in the input source's unit"},
    {"hd2_open_db", "dB", TB_WORSE_ANY, false, get_hd2_open_db,
     "second harmonic with the loop opened, at the same output amplitude"},
    {"hd3_open_db", "dB", TB_WORSE_ANY, false, get_hd3_open_db,
     "third harmonic with the loop opened, at the same output amplitude"},
    {"hd2_reduction", "", TB_WORSE_LOWER, false, get_hd2_reduction,
     "HD2 without feedback over HD2 with it, at equal output amplitude"},
    {"hd3_reduction", "", TB_WORSE_LOWER, false, get_hd3_reduction,
     "HD3 without feedback over HD3 with it, at equal output amplitude"},
};

size_t tb_figure_count(void)
{
    return sizeof figures / sizeof figures[0];
}

const tb_figure *tb_figure_at(size_t i)
{
    return i < tb_figure_count() ? &figures[i] : NULL;
}

int tb_figure_find(const char *name, size_t len)
{
    for (size_t i = 0; i < tb_figure_count(); i++)
        if (strlen(figures[i].name) == len && memcmp(figures[i].name, name, len) == 0)
            return (int)i;
    return -1;
}

tb_status tb_figure_measure(const tb_result *res, size_t l, tb_figure_value *out)
{
    tb_measures m;
    tb_stability st;
    tb_step_figures step;
    tb_feedback_summary fb;
    if (!out)
        return TB_ERR_USAGE;
    tb_status rc = tb_measure_loop(res, l, &m);
    if (rc == TB_OK)
        rc = tb_stability_loop(res, l, &st);
    if (rc == TB_OK)
        rc = tb_step_figures_get(res, &step);
    if (rc == TB_OK)
        rc = tb_feedback_loop(res, l, &fb);
    if (rc != TB_OK)
        return rc;
    tb_distortion dist;
    tb_distortion_loop dl;
    if (rc == TB_OK)
        rc = tb_distortion_get(res, &dist);
    if (rc == TB_OK)
        rc = tb_distortion_loop_get(res, l, &dl, NULL, NULL);
    if (rc != TB_OK)
        return rc;
    tb_figure_src src = {&m, &st, &step, &fb, &dist, &dl};
    for (size_t f = 0; f < tb_figure_count(); f++) {
        tb_figure_value *v = &out[f];
        const char *why = "absent";
        v->present = figures[f].get(&src, &v->value, &why);
        if (v->present && !isfinite(v->value)) {
            v->present = false;
            why = "not finite";
        }
        v->why = v->present ? NULL : why;
        if (!v->present)
            v->value = 0;
    }
    return TB_OK;
}

/* The words of the verdict figure, indexed by tb_verdict. */
static const char *const verdict_words[] = {
    [TB_VERDICT_UNKNOWN] = "undecided", [TB_VERDICT_STABLE] = "stable",
    [TB_VERDICT_MARGINAL] = "marginal",  [TB_VERDICT_UNSTABLE] = "unstable",
};
_Static_assert(sizeof verdict_words / sizeof verdict_words[0] == TB_VERDICT_UNSTABLE + 1,
               "verdict_words in step with tb_verdict");

const char *tb_figure_word(double x)
{
    int v = (int)x;
    return v >= 0 && v <= TB_VERDICT_UNSTABLE ? verdict_words[v] : "?";
}

int tb_figure_word_find(const char *s, size_t len)
{
    for (int v = 0; v <= TB_VERDICT_UNSTABLE; v++) {
        const char *w = verdict_words[v];
        bool same = strlen(w) == len;
        for (size_t i = 0; same && i < len; i++)
            same = tb_lex_lower(s[i]) == w[i];
        if (same)
            return v;
    }
    return -1;
}

const char *tb_figure_word_suggest(const char *s)
{
    return tb_suggest(s, verdict_words, sizeof verdict_words / sizeof verdict_words[0]);
}

/* ---- reading --------------------------------------------------------------- */

int tb_expect_split(const char *target, size_t len, size_t *loop_len)
{
    int best = -1;
    size_t best_len = 0;
    for (size_t i = 0; i < tb_figure_count(); i++) {
        size_t n = strlen(figures[i].name);
        if (n + 2 > len || n <= best_len || target[len - n - 1] != '.')
            continue;
        if (memcmp(target + len - n, figures[i].name, n) == 0) {
            best = (int)i;
            best_len = n;
        }
    }
    if (best >= 0)
        *loop_len = len - best_len - 1;
    return best;
}

const char *tb_expect_suggest(const char *target, size_t len, size_t *offset)
{
    char part[TB_SUGGEST_MAX_LEN + 1];
    for (size_t i = 0; i + 1 < len; i++) {
        size_t n = len - i - 1;
        if (target[i] != '.' || n > TB_SUGGEST_MAX_LEN)
            continue;
        memcpy(part, target + i + 1, n);
        part[n] = '\0';
        tb_suggester sg;
        tb_suggest_init(&sg, part);
        for (size_t k = 0; k < tb_figure_count(); k++)
            tb_suggest_offer(&sg, figures[k].name);
        if (tb_suggest_best(&sg)) {
            *offset = i + 1;
            return tb_suggest_best(&sg);
        }
    }
    return NULL;
}

bool tb_expect_find_pm(const char *s, size_t len, size_t *at, size_t *sign_len)
{
    for (size_t i = 0; i + 1 < len; i++) {
        if ((unsigned char)s[i] == 0xC2 && (unsigned char)s[i + 1] == 0xB1) {
            *at = i;
            *sign_len = 2;
            return true;
        }
        if (s[i] == '+' && s[i + 1] == '-') {
            *at = i;
            *sign_len = 2;
            return true;
        }
    }
    return false;
}

bool tb_expect_tolerance(const char *s, size_t len, double *tol, bool *pct)
{
    *pct = len > 0 && s[len - 1] == '%';
    if (*pct)
        len--;
    double x = 0;
    if (len == 0 || s[0] == '-' || s[0] == '+' || tb_lex_value(s, len, &x) != TB_VALUE_OK ||
        !(x >= 0) || !isfinite(x))
        return false;
    *tol = x;
    return true;
}

tb_status tb_expect_add(tb_circuit *ckt, const tb_expect *x)
{
    /* The record lives in the circuit's string arena (freed with the circuit):
     * room for one aligned copy. */
    char bytes[sizeof(tb_expect) + alignof(tb_expect)] = {0};
    size_t pad = alignof(tb_expect) - 1;
    const char *raw = tb_circuit_intern(ckt, bytes, sizeof *x + pad);
    if (!raw)
        return TB_ERR_NOMEM;
    uintptr_t at = ((uintptr_t)raw + pad) & ~(uintptr_t)pad;
    tb_expect *copy = (tb_expect *)at;
    memcpy(copy, x, sizeof *x);
    copy->next = NULL;
    if (ckt->expect_last)
        ckt->expect_last->next = copy;
    else
        ckt->expects = copy;
    ckt->expect_last = copy;
    ckt->expect_count++;
    return TB_OK;
}

/* "unknown loop 'E2' in .expect (did you mean 'E1'?)" at x's target. */
static tb_status unknown_loop(const tb_circuit *ckt, const tb_expect *x, tb_diag *diag)
{
    tb_suggester sg;
    tb_suggest_init(&sg, x->loop_name);
    for (size_t l = 0; l < ckt->loop_count; l++)
        tb_suggest_offer(&sg, ckt->loops[l].source);
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, x->loc.file, x->loc.line, &len);
    const char *best = tb_suggest_best(&sg);
    tb_status st;
    if (best)
        st = tb_diag_add(diag, TB_SEV_ERROR, x->loc.file, x->loc.line, x->loc.col, line, len,
                         "unknown loop '%s' in .expect (did you mean '%s'?)", x->loop_name, best);
    else
        st = tb_diag_add(diag, TB_SEV_ERROR, x->loc.file, x->loc.line, x->loc.col, line, len,
                         "unknown loop '%s' in .expect: no .loop names it", x->loop_name);
    return st ? TB_ERR_NOMEM : TB_ERR_INPUT;
}

tb_status tb_expect_resolve(tb_circuit *ckt, tb_diag *diag)
{
    if (!ckt)
        return TB_ERR_USAGE;
    tb_status result = TB_OK;
    for (tb_expect *x = ckt->expects; x; x = x->next) {
        size_t l = 0;
        while (l < ckt->loop_count && !tb_name_eq(ckt->loops[l].source, x->loop_name))
            l++;
        x->loop = l;
        if (l < ckt->loop_count)
            continue;
        tb_status st = unknown_loop(ckt, x, diag);
        if (st == TB_ERR_NOMEM)
            return st;
        result = st;
    }
    return result;
}

/* ---- evaluating ------------------------------------------------------------ */

bool tb_expect_holds(const tb_expect *x, bool present, double v)
{
    if (x->op == TB_XOP_NONE)
        return !present;
    if (!present)
        return false;
    switch (x->op) {
    case TB_XOP_EQ:
        if (figures[x->figure].word)
            return v == x->value;
        return fabs(v - x->value) <= (x->tol_pct ? x->tol / 100.0 * fabs(x->value) : x->tol);
    case TB_XOP_GE:
        return v >= x->lo;
    case TB_XOP_LE:
        return v <= x->hi;
    case TB_XOP_IN:
        return v >= x->lo && v <= x->hi;
    default:
        return false;
    }
}

const char *tb_expect_bound_text(const tb_expect *x, char *buf, size_t size)
{
    const char *unit = figures[x->figure].unit;
    const char *sep = unit[0] ? " " : "";
    double tol = x->tol_pct ? x->tol / 100.0 * fabs(x->value) : x->tol;
    switch (x->op) {
    case TB_XOP_EQ:
        if (figures[x->figure].word)
            snprintf(buf, size, "= %s", tb_figure_word(x->value));
        else
            snprintf(buf, size, "= %.6g +- %.6g%s [%.6g, %.6g]%s%s", x->value, x->tol,
                     x->tol_pct ? "%" : "", x->value - tol, x->value + tol, sep, unit);
        break;
    case TB_XOP_GE:
        snprintf(buf, size, ">= %.6g%s%s", x->lo, sep, unit);
        break;
    case TB_XOP_LE:
        snprintf(buf, size, "<= %.6g%s%s", x->hi, sep, unit);
        break;
    case TB_XOP_IN:
        snprintf(buf, size, "in [%.6g, %.6g]%s%s", x->lo, x->hi, sep, unit);
        break;
    default:
        snprintf(buf, size, "= none (absent)");
        break;
    }
    return buf;
}

const char *tb_figure_text(int figure, bool present, double v, char *buf, size_t size)
{
    const tb_figure *f = tb_figure_at((size_t)figure);
    if (!present)
        snprintf(buf, size, "absent");
    else if (f && f->word)
        snprintf(buf, size, "%s", tb_figure_word(v));
    else
        snprintf(buf, size, "%.6g%s%s", v, f && f->unit[0] ? " " : "", f ? f->unit : "");
    return buf;
}
