/* src/report_feedback.c: the breakdown, port impedances and wire-break loop gain over frequency as CSV */
#include <math.h>
#include <strings.h>

#include "report.h"

static tb_status breakdown_csv(const tb_result *res, size_t l, FILE *out)
{
    tb_feedback_summary fs;
    const tb_breakdown_point *pts = NULL;
    if (tb_feedback_loop(res, l, &fs) || !fs.computed || !fs.has_estimate || tb_feedback_points(res, l, &pts))
        return TB_ERR_NOT_FOUND;
    fputs("freq_hz,AmG_re,AmG_im,loading_re,loading_im,loopgain_re,loopgain_im,feedthrough_re,feedthrough_im,"
          "error_pct,S_re,S_im,SA_re,SA_im\n", out);
    const double *f = tb_result_freqs(res);
    for (size_t i = 0; i < tb_result_points(res); i++) {
        const tb_breakdown_point *p = &pts[i];
        fprintf(out, "%.17g", f[i]);
        tb_report_cell_complex(out, true, p->total);
        for (int k = 0; k < TB_PART_COUNT; k++)
            tb_report_cell_complex(out, p->has_parts, p->part[k]);
        fprintf(out, ",%.17g", 100.0 * cabs(p->total) / fabs(fs.estimate));
        tb_report_cell_complex(out, p->has_S, p->S);
        tb_report_cell_complex(out, p->has_S_A, p->S_A);
        fputc('\n', out);
    }
    return TB_OK;
}

static tb_status zport_csv(const tb_result *res, size_t l, const char *name, FILE *out)
{
    for (size_t p = 0; p < tb_zport_count(res); p++) {
        tb_zport_summary s;
        const tb_zpoint *pts = NULL;
        if (tb_zport_loop(res, p, l, &s, &pts) || strcasecmp(s.name, name) != 0)
            continue;
        fputs("freq_hz,Z_re,Z_im,Z0_re,Z0_im,Tsc_re,Tsc_im,Toc_re,Toc_im,Zb_re,Zb_im\n", out);
        const double *f = tb_result_freqs(res);
        for (size_t i = 0; i < tb_result_points(res); i++) {
            const tb_zpoint *z = &pts[i];
            fprintf(out, "%.17g", f[i]);
            tb_report_cell_complex(out, z->has_Z, z->Z);
            tb_report_cell_complex(out, z->has_Z0, z->Z0);
            tb_report_cell_complex(out, z->has_T_sc, z->T_sc);
            tb_report_cell_complex(out, z->has_T_oc, z->T_oc);
            tb_report_cell_complex(out, z->has_blackman, z->Z_blackman);
            fputc('\n', out);
        }
        return TB_OK;
    }
    return TB_ERR_NOT_FOUND;
}

static tb_status break_csv(const tb_result *res, FILE *out)
{
    tb_break_summary s;
    const tb_break_point *pts = NULL;
    if (tb_break_get(res, &s, &pts) || !s.computed)
        return TB_ERR_NOT_FOUND;
    fputs("freq_hz,Tv_re,Tv_im,Ti_re,Ti_im,T_re,T_im,Tprobe_re,Tprobe_im\n", out);
    const double *f = tb_result_freqs(res);
    for (size_t i = 0; i < tb_result_points(res); i++) {
        fprintf(out, "%.17g", f[i]);
        tb_report_cell_complex(out, pts[i].has_Tv, pts[i].Tv);
        tb_report_cell_complex(out, pts[i].has_Ti, pts[i].Ti);
        tb_report_cell_complex(out, pts[i].has_T, pts[i].T);
        tb_report_cell_complex(out, pts[i].has_T_probe, pts[i].T_probe);
        fputc('\n', out);
    }
    return TB_OK;
}

tb_status tb_report_feedback_csv(const tb_circuit *ckt, const tb_result *res, size_t l, const char *table,
                                 FILE *out)
{
    if (!ckt || !res || !table || !out || l >= tb_result_loops(res))
        return TB_ERR_USAGE;
    tb_status st = TB_ERR_NOT_FOUND;
    if (strcasecmp(table, "breakdown") == 0)
        st = breakdown_csv(res, l, out);
    else if (strcasecmp(table, "break") == 0)
        st = break_csv(res, out);
    else if (strncasecmp(table, "zport:", 6) == 0)
        st = zport_csv(res, l, table + 6, out);
    if (st)
        return st;
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
