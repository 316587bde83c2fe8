/* src/report_common.c: words shared by the text and JSON writers, and how they read odd bytes */
#include "report.h"

#include <jansson.h>
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"

const char *const tb_report_caution =
    "tbeta is a small-signal, linear analysis of the netlist as written: its figures do not "
    "replace full simulation, bench measurement or design review. Anyone working on "
    "mains-powered or high-voltage circuits follows local codes and licensed practice.";

void tb_report_cell_complex(FILE *out, bool present, double complex z)
{
    if (present && isfinite(creal(z)) && isfinite(cimag(z)))
        fprintf(out, ",%.17g,%.17g", creal(z), cimag(z));
    else
        fputs(",,", out);
}

void tb_report_cell_real(FILE *out, bool present, double x)
{
    if (present && isfinite(x))
        fprintf(out, ",%.17g", x);
    else
        fputs(",", out);
}

const char *tb_report_grid_word(tb_grid_kind kind)
{
    return kind == TB_GRID_DEC ? "dec" : kind == TB_GRID_OCT ? "oct" : "lin";
}

const char *tb_report_output(const tb_io_spec *io, char *buf, size_t size)
{
    if (io->out_kind == TB_OUT_I)
        snprintf(buf, size, "i(%s)", io->out_a);
    else if (io->out_b)
        snprintf(buf, size, "v(%s,%s)", io->out_a, io->out_b);
    else
        snprintf(buf, size, "v(%s)", io->out_a);
    return buf;
}

/* "s = -1.2e+03 +- j4.5e+05 rad/s": the first kept closed-loop pole placed at
 * place (the first pole when none of those kept is). */
static const char *first_pole(const tb_stability *st, tb_pole_place place, char *buf, size_t size)
{
    size_t i = 0;
    while (i < st->pole_count && st->pole_place[i] != place)
        i++;
    double complex s = i < st->pole_count ? st->poles[i] : st->pole_count ? st->poles[0] : 0;
    if (fabs(cimag(s)) > 0)
        snprintf(buf, size, "s = %.4g +- j%.4g rad/s", creal(s), fabs(cimag(s)));
    else
        snprintf(buf, size, "s = %.4g rad/s", creal(s));
    return buf;
}

/* Whether P (the open-loop right-half-plane count) is known, by the poles or the argument principle. */
static bool p_known(const tb_stability *st)
{
    return st->has_poles || st->ol_count_by != TB_COUNT_NONE;
}

/* How P was obtained, for the verdict's sentence. */
static const char *p_how(const tb_stability *st)
{
    switch (st->ol_count_by) {
    case TB_COUNT_PASSIVE_BLOCKS:
        return "(none: every strongly connected part of the circuit with the loop's source at zero is passive)";
    case TB_COUNT_GIVEN:
        return "taken from the nominal circuit";
    default:
        return "by the argument principle on det M0(jw)";
    }
}

static const char *nyquist_words(const tb_stability *st, char *buf, size_t size)
{
    if (!st->has_nyquist)
        snprintf(buf, size, "; no Nyquist count (path broken or through -1)");
    else if (p_known(st))
        snprintf(buf, size, "; Nyquist: N = %ld encirclements of -1, P = %zu, N + P = %ld", st->nyquist_n,
                 st->ol_rhp, st->nyquist_n + (long)st->ol_rhp);
    else
        snprintf(buf, size, "; Nyquist: N = %ld encirclements of -1", st->nyquist_n);
    return buf;
}

/* The clause saying that the pole count and the Nyquist count disagree. */
static const char *disagree_words(const tb_stability *st, char *buf, size_t size)
{
    long z = st->nyquist_n + (long)st->ol_rhp;
    const char *who = st->has_poles ? "the poles" : "the argument principle";
    buf[0] = '\0';
    if (!st->counts_disagree)
        return buf;
    if (z > 0)
        snprintf(buf, size, "; %s say%s %s, but N + P = %ld says %ld in the right half-plane: the counts "
                 "disagree and the worse verdict is taken", who, st->has_poles ? "" : "s",
                 tb_verdict_str(st->pole_verdict), z, z);
    else
        snprintf(buf, size, "; N + P = %ld is no count of right-half-plane poles: the counts disagree and %s "
                 "decide%s", z, who, st->has_poles ? "" : "s");
    return buf;
}

/* The sentence for a verdict reached with the poles. */
static void pole_reason(const tb_stability *st, const char *nyq, const char *dis, char *buf, size_t size)
{
    char pole[96], checked[64] = "";
    if (st->cl_checked > 0)
        snprintf(checked, sizeof checked, " (%zu placed by a check on the circuit)", st->cl_checked);
    if (st->verdict == TB_VERDICT_UNSTABLE && st->cl_rhp > 0)
        snprintf(buf, size, "%zu closed-loop poles in the right half-plane%s, the first at %s%s%s", st->cl_rhp,
                 checked, first_pole(st, TB_POLE_RIGHT, pole, sizeof pole), nyq, dis);
    else if (st->verdict == TB_VERDICT_UNSTABLE)
        snprintf(buf, size, "no closed-loop pole in the right half-plane%s%s%s", checked, nyq, dis);
    else if (st->verdict == TB_VERDICT_MARGINAL)
        snprintf(buf, size, "%zu closed-loop poles on the j-omega axis and none to its right%s, the first at %s",
                 st->cl_axis, checked, first_pole(st, TB_POLE_AXIS, pole, sizeof pole));
    else
        snprintf(buf, size, "all %zu finite closed-loop poles in the left half-plane%s%s%s", st->cl_finite,
                 checked, nyq, dis);
}

/* The sentence for a verdict reached with the closed-loop count of the argument principle. */
static void winding_reason(const tb_stability *st, const char *nyq, const char *dis, char *buf, size_t size)
{
    const char *by = "counted by the argument principle on det M(jw)";
    if (st->verdict == TB_VERDICT_UNSTABLE && st->cl_rhp > 0)
        snprintf(buf, size, "%zu closed-loop poles in the right half-plane, %s%s%s", st->cl_rhp, by, nyq, dis);
    else if (st->verdict == TB_VERDICT_UNSTABLE)
        snprintf(buf, size, "no closed-loop pole in the right half-plane, %s%s%s", by, nyq, dis);
    else if (st->verdict == TB_VERDICT_MARGINAL)
        snprintf(buf, size, "%zu closed-loop poles on the j-omega axis and none to its right, %s", st->cl_axis, by);
    else
        snprintf(buf, size, "none of the %zu finite closed-loop poles in the right half-plane or on the axis, %s%s%s",
                 st->cl_finite, by, nyq, dis);
}

const char *tb_report_reason(const tb_stability *st, char *buf, size_t size)
{
    char nyq[128], dis[256];
    nyquist_words(st, nyq, sizeof nyq);
    disagree_words(st, dis, sizeof dis);
    if (st->has_poles && st->verdict != TB_VERDICT_UNKNOWN)
        pole_reason(st, nyq, dis, buf, size);
    else if (st->cl_count_by == TB_COUNT_WINDING && st->verdict != TB_VERDICT_UNKNOWN)
        winding_reason(st, nyq, dis, buf, size);
    else if (p_known(st) && st->verdict != TB_VERDICT_UNKNOWN)
        snprintf(buf, size, "Nyquist: N = %ld clockwise encirclements of -1, P = %zu open-loop right-half-plane "
                 "poles %s, N + P = %ld", st->nyquist_n, st->ol_rhp, p_how(st), st->nyquist_n + (long)st->ol_rhp);
    else if (st->verdict == TB_VERDICT_STABLE)
        snprintf(buf, size, "Nyquist: N = 0 encirclements of -1, open loop assumed stable");
    else if (st->verdict == TB_VERDICT_UNSTABLE)
        snprintf(buf, size, "Nyquist: N = %ld clockwise encirclements of -1", st->nyquist_n);
    else
        snprintf(buf, size, "neither the poles nor a Nyquist count are available");
    return buf;
}

/* ---- odd bytes in names and comments ---------------------------------------------- */

/* Length of the valid UTF-8 sequence at p and its character; 0 when p starts no valid
 * sequence (a stray continuation byte, an overlong form, a surrogate, beyond U+10FFFF). */
static size_t utf8_seq(const unsigned char *p, uint32_t *cp)
{
    static const uint32_t least[5] = {0, 0, 0x80, 0x800, 0x10000};
    size_t n = p[0] < 0x80 ? 1 : p[0] >= 0xC2 && p[0] <= 0xDF ? 2 : (p[0] & 0xF0) == 0xE0 ? 3
                             : p[0] >= 0xF0 && p[0] <= 0xF4 ? 4 : 0;
    if (n == 0)
        return 0;
    uint32_t c = n == 1 ? p[0] : p[0] & (0x7Fu >> n);
    for (size_t i = 1; i < n; i++) {
        if ((p[i] & 0xC0) != 0x80)
            return 0;
        c = c << 6 | (p[i] & 0x3Fu);
    }
    if (c < least[n] || c > 0x10FFFF || (c >= 0xD800 && c <= 0xDFFF))
        return 0;
    *cp = c;
    return n;
}

size_t tb_report_char(const char *s, uint32_t *cp)
{
    const unsigned char *p = (const unsigned char *)s;
    if (*p == 0) {
        *cp = 0;
        return 0;
    }
    size_t n = utf8_seq(p, cp);
    if (n)
        return n;
    *cp = *p; /* a stray byte: the Latin-1 character of its value */
    return 1;
}

size_t tb_report_utf8(uint32_t cp, char out[4])
{
    if (cp < 0x80) {
        out[0] = (char)cp;
        return 1;
    }
    if (cp < 0x800) {
        out[0] = (char)(0xC0 | cp >> 6);
        out[1] = (char)(0x80 | (cp & 0x3F));
        return 2;
    }
    if (cp < 0x10000) {
        out[0] = (char)(0xE0 | cp >> 12);
        out[1] = (char)(0x80 | (cp >> 6 & 0x3F));
        out[2] = (char)(0x80 | (cp & 0x3F));
        return 3;
    }
    out[0] = (char)(0xF0 | cp >> 18);
    out[1] = (char)(0x80 | (cp >> 12 & 0x3F));
    out[2] = (char)(0x80 | (cp >> 6 & 0x3F));
    out[3] = (char)(0x80 | (cp & 0x3F));
    return 4;
}

bool tb_report_is_control(uint32_t cp)
{
    return cp < 0x20 || (cp >= 0x7F && cp <= 0x9F);
}

/* true when s is valid UTF-8 without control characters: written as it is. */
static bool plain(const char *s)
{
    uint32_t cp = 0;
    for (const unsigned char *p = (const unsigned char *)s; *p;) {
        size_t n = utf8_seq(p, &cp);
        if (n == 0 || tb_report_is_control(cp))
            return false;
        p += n;
    }
    return true;
}

const char *tb_report_escape(const char *s, char *buf, size_t size)
{
    if (plain(s))
        return s;
    if (size < 4)
        return "...";
    size_t used = 0;
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(s, &cp)) != 0; s += n) {
        char piece[8];
        size_t len = tb_report_is_control(cp) ? (size_t)snprintf(piece, sizeof piece, "\\x%02X", (unsigned)cp)
                                              : tb_report_utf8(cp, piece);
        if (used + len + 4 > size) { /* room for "..." and the NUL */
            memcpy(buf + used, "...", 3);
            used += 3;
            break;
        }
        memcpy(buf + used, piece, len);
        used += len;
    }
    buf[used] = '\0';
    return buf;
}

json_t *tb_report_json_text(const char *s)
{
    json_t *str = json_string(s);
    if (str || !s)
        return str;
    /* not UTF-8 (or out of memory): each odd byte becomes the character of its value */
    size_t len = strlen(s);
    char *clean = tb_malloc(len + 1, 2); /* a stray byte takes two bytes in UTF-8 */
    if (!clean)
        return NULL;
    size_t used = 0;
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(s, &cp)) != 0; s += n)
        used += tb_report_utf8(cp, clean + used);
    str = json_stringn(clean, used);
    tb_free(clean);
    return str;
}
