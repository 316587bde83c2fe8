/* src/report_csv.c: the sweep table of one loop as CSV, every number at full precision */
#include <math.h>

#include "alloc.h"
#include "measure.h"

/* Writes ",re,im" or ",," when the value is absent (or, defensively, not finite). */
static void put_complex(FILE *out, bool present, double complex z)
{
    if (present && isfinite(creal(z)) && isfinite(cimag(z)))
        fprintf(out, ",%.17g,%.17g", creal(z), cimag(z));
    else
        fputs(",,", out);
}

static void put_real(FILE *out, bool present, double x)
{
    if (present && isfinite(x))
        fprintf(out, ",%.17g", x);
    else
        fputs(",", out);
}

tb_status tb_report_csv(const tb_circuit *ckt, const tb_result *res, size_t l, FILE *out)
{
    if (!ckt || !res || !out || l >= res->nloops)
        return TB_ERR_USAGE;
    double *deg = tb_malloc(res->npoints, sizeof(double));
    if (!deg)
        return TB_ERR_NOMEM;
    tb_measure_phase(res, l, deg);
    const tb_point *pts = tb_result_loop(res, l);
    fputs("freq_hz,T_re,T_im,A_re,A_im,Ainf_re,Ainf_im,A0_re,A0_im,aol_re,aol_im,T_db,T_phase_deg\n",
          out);
    for (size_t i = 0; i < res->npoints; i++) {
        unsigned fl = pts[i].flags;
        bool io = !(fl & TB_PT_NO_IO);
        bool t_ok = !(fl & TB_PT_T_INF);
        fprintf(out, "%.17g", res->freqs[i]);
        put_complex(out, t_ok, pts[i].T);
        put_complex(out, io, pts[i].A);
        put_complex(out, io && !(fl & TB_PT_AINF_NONE), pts[i].A_inf);
        put_complex(out, io && !(fl & TB_PT_A0_NONE), pts[i].A0);
        put_complex(out, io && t_ok && !(fl & TB_PT_AINF_NONE), pts[i].a);
        put_real(out, t_ok, tb_db(pts[i].T));
        put_real(out, t_ok, deg[i]);
        fputc('\n', out);
    }
    tb_free(deg);
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
        put_real(out, true, y[k]);
        fputc('\n', out);
    }
    return ferror(out) ? TB_ERR_IO : TB_OK;
}
