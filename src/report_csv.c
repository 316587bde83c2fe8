/* src/report_csv.c: the sweep table of one loop as CSV, every number at full precision */
#include <math.h>

#include "report.h"
#include "units.h"

/* Why a row's empty fields are empty (the last column; empty when every field is there). */
static const char *row_note(unsigned fl)
{
    static const char *const why[2][3] = {
        /* T finite: with .io, A_inf there; with .io, A_inf absent; no .io */
        {"", "T = 0 here: no A_inf or a", "no .io: no gains"},
        /* T infinite */
        {"T infinite here (a pole of T on the axis): no T or a or A0",
         "T infinite here (a pole of T on the axis): no T or a or A0; no A_inf",
         "T infinite here (a pole of T on the axis): no T; no .io: no gains"},
    };
    int gains = fl & TB_PT_NO_IO ? 2 : fl & TB_PT_AINF_NONE ? 1 : 0;
    return why[(fl & TB_PT_T_INF) ? 1 : 0][gains];
}

tb_status tb_report_csv(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *out)
{
    if (!ckt || !res || !out || l >= tb_result_loops(res))
        return TB_ERR_USAGE;
    const double *deg = tb_result_phase(res, l);
    const double *freqs = tb_result_freqs(res);
    const tb_point *pts = tb_result_loop(res, l);
    fputs("freq_hz,T_re,T_im,A_re,A_im,Ainf_re,Ainf_im,A0_re,A0_im,aol_re,aol_im,T_db,T_phase_deg,note\n",
          out);
    for (size_t i = 0; i < tb_result_points(res); i++) {
        unsigned fl = pts[i].flags;
        bool io = !(fl & TB_PT_NO_IO);
        bool t_ok = !(fl & TB_PT_T_INF);
        fprintf(out, "%.17g", freqs[i]);
        tb_report_cell_complex(out, t_ok, pts[i].T);
        tb_report_cell_complex(out, io, pts[i].A);
        tb_report_cell_complex(out, io && !(fl & TB_PT_AINF_NONE), pts[i].A_inf);
        tb_report_cell_complex(out, io && !(fl & TB_PT_A0_NONE), pts[i].A0);
        tb_report_cell_complex(out, io && t_ok && !(fl & TB_PT_AINF_NONE), pts[i].a);
        tb_report_cell_real(out, t_ok, tb_db(pts[i].T));
        tb_report_cell_real(out, t_ok, deg[i]);
        fprintf(out, ",%s\n", row_note(fl));
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}

tb_status tb_report_step_csv(const tb_result *res, FILE *out)
{
    const double *t = NULL, *y = NULL;
    size_t n = 0;
    if (!out || tb_step_samples(res, &t, &y, &n) || n == 0)
        return !out || !res ? TB_ERR_USAGE : TB_ERR_NOT_FOUND;
    fputs("t_s,y\n", out);
    for (size_t k = 0; k < n; k++) {
        fprintf(out, "%.17g", t[k]);
        tb_report_cell_real(out, true, y[k]);
        fputc('\n', out);
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
