/* src/report_common.c: words shared by the text and JSON writers */
#include "report.h"

#include <math.h>
#include <stdio.h>

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

/* "s = -1.2e+03 +- j4.5e+05 rad/s" for the first closed-loop pole (least damped). */
static const char *first_pole(const tb_stability *st, char *buf, size_t size)
{
    double complex s = st->pole_count ? st->poles[0] : 0;
    if (fabs(cimag(s)) > 0)
        snprintf(buf, size, "s = %.4g +- j%.4g rad/s", creal(s), fabs(cimag(s)));
    else
        snprintf(buf, size, "s = %.4g rad/s", creal(s));
    return buf;
}

static const char *nyquist_words(const tb_stability *st, char *buf, size_t size)
{
    if (!st->has_nyquist)
        snprintf(buf, size, "; no Nyquist count (path broken or through -1)");
    else if (st->has_poles)
        snprintf(buf, size, "; Nyquist: N = %ld encirclements of -1, P = %zu, N + P = %ld", st->nyquist_n,
                 st->ol_rhp, st->nyquist_n + (long)st->ol_rhp);
    else
        snprintf(buf, size, "; Nyquist: N = %ld encirclements of -1", st->nyquist_n);
    return buf;
}

const char *tb_report_reason(const tb_stability *st, char *buf, size_t size)
{
    char pole[96], nyq[128];
    nyquist_words(st, nyq, sizeof nyq);
    switch (st->verdict) {
    case TB_VERDICT_STABLE:
        if (st->has_poles)
            snprintf(buf, size, "all %zu finite closed-loop poles in the left half-plane%s",
                     st->cl_finite, nyq);
        else
            snprintf(buf, size, "Nyquist: N = 0 encirclements of -1, open loop assumed stable");
        break;
    case TB_VERDICT_UNSTABLE:
        if (st->has_poles)
            snprintf(buf, size, "%zu closed-loop poles in the right half-plane, the first at %s%s",
                     st->cl_rhp, first_pole(st, pole, sizeof pole), nyq);
        else
            snprintf(buf, size, "Nyquist: N = %ld clockwise encirclements of -1", st->nyquist_n);
        break;
    case TB_VERDICT_MARGINAL:
        snprintf(buf, size, "%zu closed-loop poles on the j-omega axis, the first at %s",
                 st->cl_axis, first_pole(st, pole, sizeof pole));
        break;
    case TB_VERDICT_DISAGREE:
        snprintf(buf, size, "the poles give %zu in the right half-plane%s: not decided", st->cl_rhp, nyq);
        break;
    case TB_VERDICT_UNKNOWN:
        snprintf(buf, size, "neither the poles nor a Nyquist count are available");
        break;
    }
    return buf;
}
