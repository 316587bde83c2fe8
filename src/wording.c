/* src/wording.c: the English of every enumeration in the results: notes, verdicts, parts, sides, types */
#include "tbeta.h"

static const char *const note_text[TB_NOTE_COUNT] = {
    [TB_NOTE_NO_IO] = "no .io directive: A, A_inf, A0, a and the closed-loop -3 dB point are not computed",
    [TB_NOTE_NOT_IN_LOOP] = "the source never sees its own output: it is not in a loop",
    [TB_NOTE_DC_FROM_SWEEP] = "the circuit is singular at DC: DC values are those at the lowest sweep frequency",
    [TB_NOTE_T_INF_DC] = "T is infinite at DC (the circuit with the source's gain at zero is singular there, e.g. an integrator)",
    [TB_NOTE_POSITIVE_FB_DC] = "T(0) < 0: positive feedback at DC: the phase of T starts at 180 degrees (without the stability analysis no phase margin is given)",
    [TB_NOTE_NO_UNITY] = "|T| never falls through 1 in the sweep: no unity-gain frequency or phase margin",
    [TB_NOTE_NO_F3DB] = "|A| never falls 3 dB below its DC value in the sweep",
    [TB_NOTE_AINF_NONE_DC] = "T has a zero at DC: A_inf is undefined there",
    [TB_NOTE_FEEDTHROUGH] = "the feedthrough A0/(1+T) is more than 1 % of A at DC: A differs from a/(1+a*beta)",
    [TB_NOTE_T_INF_SWEEP] = "T is infinite at sweep points (a pole of T on the j-omega axis, e.g. a lossless resonance "
                            "on a grid frequency): T, its dB and phase are absent there (the sweep table says so in "
                            "its note column); crossings next to them are found on either side",
};
_Static_assert(sizeof(note_text) / sizeof(note_text[0]) == TB_NOTE_COUNT, "note_text in step");

const char *tb_note_str(tb_note note)
{
    return (unsigned)note < TB_NOTE_COUNT ? note_text[note] : "unknown note";
}

static const char *const snote_text[TB_SNOTE_COUNT] = {
    [TB_SNOTE_NO_PHASE_CROSSING] = "the phase of T never reaches -180 degrees (mod 360) from DC to far above the sweep: no gain margin",
    [TB_SNOTE_NO_UNITY] = "|T| never crosses 1 from DC to far above the sweep: no phase or delay margin",
    [TB_SNOTE_TRUNCATED] = "more crossings than are kept: only the lowest ones are listed, and the margins are not determined",
    [TB_SNOTE_POLES_TOO_BIG] = "poles not computed: more unknowns than the pole limit",
    [TB_SNOTE_POLES_FAILED] = "poles not computed: the dense eigenvalue solver did not converge",
    [TB_SNOTE_NYQUIST_ON_AXIS] = "poles on the j-omega axis: the Nyquist count is not compared",
    [TB_SNOTE_NYQUIST_ASSUMES_P0] = "verdict from the Nyquist count alone, assuming the circuit with this source's gain at zero is stable",
    [TB_SNOTE_NOT_STABLE] = "the loop is not shown stable: no delay margin, and the gain figures are distances to the nearest critical gains, not margins",
    [TB_SNOTE_REFINE_BUDGET] = "adaptive refinement stopped at its budget: a narrow feature may be missed, so the margins are not determined",
    [TB_SNOTE_PROBE_FAILED] = "a fresh solve failed on the j-omega axis (the circuit singular there, a closed-loop pole, or T infinite): the margins are not determined",
    [TB_SNOTE_MULTIPLE_UNITY] = "|T| crosses 1 more than once: margins alone do not decide stability, see the poles",
    [TB_SNOTE_UNSETTLED_LOW] = "T did not settle to its low-frequency asymptote within the search: crossings further down are not ruled out, so the margins are not determined",
    [TB_SNOTE_UNSETTLED_HIGH] = "T did not settle to its high-frequency asymptote within the search: crossings further up are not ruled out, so the margins are not determined",
    [TB_SNOTE_OUTSIDE_SWEEP] = "a crossing lies outside the .ac range (found by following T beyond it)",
    [TB_SNOTE_NO_GAIN_UP] = "the phase never reaches -180 degrees (mod 360) where |T| < 1: no critical gain above the present one",
    [TB_SNOTE_NO_GAIN_DOWN] = "the phase never reaches -180 degrees (mod 360) where |T| > 1: no critical gain below the present one",
    [TB_SNOTE_COUNTS_DISAGREE] = "the poles and the Nyquist count give different numbers of right-half-plane poles: the worse verdict is taken",
    [TB_SNOTE_PAIR_DISAGREES] = "the dominant pair's second-order predictions miss the computed step response or closed-loop peaking by more than 2x",
    [TB_SNOTE_RHP_BY_WINDING] = "poles not computed: the right-half-plane counts come from the argument principle on det M(jw) along the j-omega axis",
    [TB_SNOTE_WINDING_FAILED] = "poles not computed and no right-half-plane count by the argument principle either",
    [TB_SNOTE_BELOW_GM_CAP] = "where |T| is below the gain-margin cap (--gm-cap) its phase is not followed: -180 degree crossings there are not listed, and would give gain margins above the cap",
    [TB_SNOTE_RHP_BY_PASSIVE] = "poles not computed: the open loop has no right-half-plane pole because every strongly connected part of the circuit with this source's gain at zero is passive (docs/stability.md)",
};
_Static_assert(sizeof(snote_text) / sizeof(snote_text[0]) == TB_SNOTE_COUNT, "snote_text in step");

const char *tb_stab_note_str(tb_stab_note note)
{
    return (unsigned)note < TB_SNOTE_COUNT ? snote_text[note] : "unknown note";
}

const char *tb_verdict_str(tb_verdict verdict)
{
    switch (verdict) {
    case TB_VERDICT_STABLE:
        return "stable";
    case TB_VERDICT_MARGINAL:
        return "marginal";
    case TB_VERDICT_UNSTABLE:
        return "unstable";
    case TB_VERDICT_UNKNOWN:
        break;
    }
    return "undecided";
}

const char *tb_count_method_str(tb_count_method method)
{
    static const char *const method_text[] = {[TB_COUNT_NONE] = "none", [TB_COUNT_POLES] = "poles",
                                              [TB_COUNT_WINDING] = "argument principle",
                                              [TB_COUNT_GIVEN] = "nominal circuit",
                                              [TB_COUNT_PASSIVE_BLOCKS] = "passive blocks"};
    return (unsigned)method <= TB_COUNT_PASSIVE_BLOCKS ? method_text[method] : "unknown";
}

const char *tb_pole_place_str(tb_pole_place place)
{
    static const char *const place_text[] = {[TB_POLE_LEFT] = "left", [TB_POLE_AXIS] = "axis",
                                             [TB_POLE_RIGHT] = "right"};
    return (unsigned)place <= TB_POLE_RIGHT ? place_text[place] : "unknown";
}

static const char *const dominance_text[TB_DOMINANT_COUNT] = {
    [TB_DOMINANT_PAIR] = "dominant",
    [TB_DOMINANT_NO_WEIGHTS] = "the poles or their residues are not available",
    [TB_DOMINANT_NOT_STABLE] = "the closed loop is not stable",
    [TB_DOMINANT_NO_PAIR] = "no complex closed-loop pair shows in the closed-loop response",
    [TB_DOMINANT_OUTWEIGHED] = "another pole weighs at least as much as every complex pair",
    [TB_DOMINANT_CROWDED] = "another pole of comparable weight lies less than 5 times farther left",
};
_Static_assert(sizeof(dominance_text) / sizeof(dominance_text[0]) == TB_DOMINANT_COUNT, "dominance_text in step");

const char *tb_dominance_str(tb_dominance dominance)
{
    return (unsigned)dominance < TB_DOMINANT_COUNT ? dominance_text[dominance] : "unknown";
}

static const char *const part_text[TB_PART_COUNT] = {
    [TB_PART_LOADING] = "loading",
    [TB_PART_LOOP_GAIN] = "finite loop gain",
    [TB_PART_FEEDTHROUGH] = "feedthrough",
};
_Static_assert(sizeof(part_text) / sizeof(part_text[0]) == TB_PART_COUNT, "part_text in step");

const char *tb_part_str(tb_part part)
{
    return (unsigned)part < TB_PART_COUNT ? part_text[part] : "unknown part";
}

static const char *const fnote_text[TB_FNOTE_COUNT] = {
    [TB_FNOTE_NO_IO] = "no .io directive: no breakdown of A and no desensitivity check",
    [TB_FNOTE_NO_ESTIMATE] = "no .ideal directive: no hand estimate to break the gain error down against",
    [TB_FNOTE_MISSES_AT_DC] = "the hand estimate misses A by more than the tolerance already at DC",
    [TB_FNOTE_HOLDS_IN_SWEEP] = "the hand estimate holds within the tolerance over the whole sweep",
    [TB_FNOTE_POINTS_ABSENT] = "at some frequencies A_inf or T does not exist: no breakdown there",
    [TB_FNOTE_A_ZERO_DC] = "A = 0 at DC: the relative change of A is not defined",
    [TB_FNOTE_RESOLVE_FAILED] = "the circuit with the changed amplifier gain is singular at DC: no re-solve",
};
_Static_assert(sizeof(fnote_text) / sizeof(fnote_text[0]) == TB_FNOTE_COUNT, "fnote_text in step");

const char *tb_fb_note_str(tb_fb_note note)
{
    return (unsigned)note < TB_FNOTE_COUNT ? fnote_text[note] : "unknown note";
}

static const char *const side_text[] = {"no feedback", "series", "shunt", "mixed"};
_Static_assert(sizeof(side_text) / sizeof(side_text[0]) == TB_SIDE_MIXED + 1, "side_text in step");

const char *tb_side_str(tb_side side)
{
    return (unsigned)side <= TB_SIDE_MIXED ? side_text[side] : "unknown";
}

static const char *const type_text[] = {
    [TB_AMP_UNKNOWN] = "not one of the four classic types",
    [TB_AMP_VOLTAGE] = "voltage amplifier (series-shunt feedback)",
    [TB_AMP_CURRENT] = "current amplifier (shunt-series feedback)",
    [TB_AMP_TRANSCONDUCTANCE] = "transconductance amplifier (series-series feedback)",
    [TB_AMP_TRANSRESISTANCE] = "transresistance amplifier (shunt-shunt feedback)",
};
_Static_assert(sizeof(type_text) / sizeof(type_text[0]) == TB_AMP_TRANSRESISTANCE + 1, "type_text in step");

const char *tb_amp_type_str(tb_amp_type type)
{
    return (unsigned)type <= TB_AMP_TRANSRESISTANCE ? type_text[type] : "unknown";
}

static const char *const cnote_text[TB_CNOTE_COUNT] = {
    [TB_CNOTE_NO_IO] = "no .io directive: no closed-loop gain",
    [TB_CNOTE_AC_COUPLED] = "A(0) = 0 (AC-coupled): A, A_inf, beta and the gain error are referred to midband, where |A| is largest",
    [TB_CNOTE_EDGE_OUTSIDE] = "a -3 dB edge lies outside the sweep; it was found by searching beyond the sweep",
    [TB_CNOTE_NO_HIGH_EDGE] = "|A| does not fall 3 dB below its reference up to six decades above the sweep",
    [TB_CNOTE_NO_LOW_EDGE] = "|A| does not fall 3 dB below midband down to six decades below the sweep",
    [TB_CNOTE_PROBE_FAILED] = "a fresh solve found the circuit singular on the j-omega axis: a -3 dB edge is left out",
};
_Static_assert(sizeof(cnote_text) / sizeof(cnote_text[0]) == TB_CNOTE_COUNT, "cnote_text in step");

const char *tb_cl_note_str(tb_cl_note note)
{
    return (unsigned)note < TB_CNOTE_COUNT ? cnote_text[note] : "unknown note";
}
