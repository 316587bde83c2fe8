/* src/spreadset.c: the table of a spread run: storage, the figures it records, statistics */
#include "spreadset.h"

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "alloc.h"

/* The figures of the list: T(0), unity, PM, GM, delay margin, A, gain error, -3 dB, verdict. */
static const char *const figure_names[TB_SPREAD_FIGURES] = {
    "dc.T", "unity_hz", "phase_margin_deg", "gain_margin_up_db", "delay_margin_s",
    "dc.A", "dc.gain_error_pct", "f3db_closed_hz", "verdict",
};

int tb_spreadset_figure(size_t i)
{
    return i < TB_SPREAD_FIGURES ? tb_figure_find(figure_names[i], strlen(figure_names[i])) : -1;
}

const double tb_spread_percentiles[5] = {0.01, 0.05, 0.50, 0.95, 0.99};

/* a * b, at least 1; SIZE_MAX when it overflows (the allocation then fails). */
static size_t cells(size_t a, size_t b)
{
    if (a != 0 && b > SIZE_MAX / a)
        return SIZE_MAX;
    return a * b > 0 ? a * b : 1;
}

tb_spreadset *tb_spreadset_new(tb_spreadset_kind kind, size_t runs, size_t params, size_t loops, size_t probes)
{
    tb_spreadset *set = tb_calloc(1, sizeof *set);
    if (!set)
        return NULL;
    set->kind = kind;
    set->runs = runs;
    set->params = params;
    set->loops = loops;
    set->nominal = SIZE_MAX;
    set->param_names = tb_calloc(params ? params : 1, sizeof(char *));
    set->param_values = tb_calloc(cells(runs, params), sizeof(double));
    set->fig = tb_calloc(cells(cells(runs, loops), TB_SPREAD_FIGURES), sizeof(tb_figure_value));
    set->status = tb_malloc(runs ? runs : 1, sizeof(tb_run_status));
    set->probes.count = probes;
    set->probes.hz = tb_calloc(probes ? probes : 1, sizeof(double));
    set->A = tb_calloc(cells(runs, probes), sizeof(double complex));
    set->k = tb_calloc(cells(runs, loops), sizeof(double));
    set->T_nom = tb_calloc(cells(loops, probes), sizeof(double complex));
    set->A_nom = tb_calloc(cells(1, probes), sizeof(double complex));
    if (!set->param_names || !set->param_values || !set->fig || !set->status || !set->probes.hz || !set->A ||
        !set->k || !set->T_nom || !set->A_nom) {
        tb_spreadset_free(set);
        return NULL;
    }
    for (size_t r = 0; r < runs; r++)
        set->status[r] = TB_RUN_ERROR;
    for (size_t i = 0; i < runs * loops * TB_SPREAD_FIGURES; i++)
        set->fig[i] = (tb_figure_value){false, 0, "not analysed"};
    return set;
}

void tb_spreadset_free(tb_spreadset *set)
{
    if (!set)
        return;
    tb_free(set->ol_rhp_nominal);
    tb_free(set->factorizations);
    tb_free(set->param_names);
    tb_free(set->param_values);
    tb_free(set->fig);
    tb_free(set->status);
    tb_free(set->probes.hz);
    tb_free(set->A);
    tb_free(set->k);
    tb_free(set->T_nom);
    tb_free(set->A_nom);
    tb_free(set);
}

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a;
    double y = *(const double *)b;
    return (x > y) - (x < y);
}

double tb_spread_quantile(const double *sorted, size_t n, double q)
{
    if (n == 0)
        return 0;
    double h = (double)(n - 1) * q;
    size_t lo = (size_t)floor(h);
    if (lo + 1 >= n)
        return sorted[n - 1];
    return sorted[lo] + (h - (double)lo) * (sorted[lo + 1] - sorted[lo]);
}

tb_status tb_spreadset_stats(const tb_spreadset *set, size_t l, size_t i, tb_spread_stats *out)
{
    if (!set || !out || l >= set->loops || i >= TB_SPREAD_FIGURES)
        return TB_ERR_USAGE;
    double *x = tb_malloc(set->runs ? set->runs : 1, sizeof(double));
    if (!x)
        return TB_ERR_NOMEM;
    tb_spread_stats s = {0};
    double sum = 0;
    for (size_t r = 0; r < set->runs; r++) {
        const tb_figure_value *v = &tb_spreadset_row(set, r, l)[i];
        if (!v->present)
            continue;
        if (s.present == 0 || v->value < s.min) {
            s.min = v->value;
            s.min_run = r;
        }
        if (s.present == 0 || v->value > s.max) {
            s.max = v->value;
            s.max_run = r;
        }
        x[s.present++] = v->value;
        sum += v->value;
    }
    if (s.present > 0) {
        s.mean = sum / (double)s.present;
        double ss = 0;
        for (size_t k = 0; k < s.present; k++)
            ss += (x[k] - s.mean) * (x[k] - s.mean);
        s.sigma = s.present > 1 ? sqrt(ss / (double)(s.present - 1)) : 0;
        qsort(x, s.present, sizeof(double), by_value);
        for (size_t k = 0; k < 5; k++)
            s.p[k] = tb_spread_quantile(x, s.present, tb_spread_percentiles[k]);
    }
    tb_free(x);
    *out = s;
    return TB_OK;
}

size_t tb_spreadset_passed(const tb_spreadset *set, size_t *analysed)
{
    size_t pass = 0, done = 0;
    for (size_t r = 0; r < set->runs; r++) {
        pass += set->status[r] == TB_RUN_PASS;
        done += set->status[r] != TB_RUN_ERROR;
    }
    if (analysed)
        *analysed = done;
    return pass;
}

/* sqrt(sum |x_r - mean|^2 / (n - 1)) / |mean| over the analysed runs, x_r = A at probe i
 * (A true) or k at x[r * stride]; false with fewer than two runs or a zero mean. */
static bool relative_spread(const tb_spreadset *set, const double *x, size_t stride, bool A, size_t i, double *out)
{
    double complex sum = 0;
    double complex first = 0;
    bool same = true; /* every run the same value: no spread (the mean would differ by rounding) */
    double sum2 = 0;
    size_t n = 0;
    for (size_t r = 0; r < set->runs; r++)
        if (set->status[r] != TB_RUN_ERROR) {
            double complex v = A ? set->A[r * set->probes.count + i] : x[r * stride];
            first = n ? first : v;
            same = same && v == first;
            sum += v;
            n++;
        }
    if (n < 2 || cabs(sum) == 0)
        return false;
    if (same) {
        *out = 0;
        return true;
    }
    double complex mean = sum / (double)n;
    for (size_t r = 0; r < set->runs; r++)
        if (set->status[r] != TB_RUN_ERROR) {
            double complex v = A ? set->A[r * set->probes.count + i] : x[r * stride];
            sum2 += cabs(v - mean) * cabs(v - mean);
        }
    *out = sqrt(sum2 / (double)(n - 1)) / cabs(mean);
    return isfinite(*out);
}

bool tb_spreadset_desens(const tb_spreadset *set, size_t l, size_t i, tb_spread_desens *out)
{
    if (!set || !out || !set->has_nominal || l >= set->loops || i >= set->probes.count)
        return false;
    tb_spread_desens d = {.hz = set->probes.hz[i]};
    double complex one_plus_T = 1.0 + set->T_nom[l * set->probes.count + i];
    if (cabs(one_plus_T) == 0 || !relative_spread(set, NULL, 0, true, i, &d.spread_A) ||
        !relative_spread(set, set->k + l, set->loops, false, i, &d.spread_k))
        return false;
    d.S = 1.0 / cabs(one_plus_T);
    *out = d;
    return isfinite(d.S);
}

bool tb_spreadset_correlation(const tb_spreadset *set, size_t l, size_t i, size_t p, double *r)
{
    if (!set || !r || l >= set->loops || i >= TB_SPREAD_FIGURES || p >= set->params)
        return false;
    double sx = 0, sy = 0;
    size_t n = 0;
    for (size_t k = 0; k < set->runs; k++) {
        const tb_figure_value *v = &tb_spreadset_row(set, k, l)[i];
        if (v->present) {
            sx += set->param_values[k * set->params + p];
            sy += v->value;
            n++;
        }
    }
    if (n < 3)
        return false;
    double mx = sx / (double)n, my = sy / (double)n;
    double sxx = 0, syy = 0, sxy = 0;
    for (size_t k = 0; k < set->runs; k++) {
        const tb_figure_value *v = &tb_spreadset_row(set, k, l)[i];
        if (v->present) {
            double dx = set->param_values[k * set->params + p] - mx;
            double dy = v->value - my;
            sxx += dx * dx;
            syy += dy * dy;
            sxy += dx * dy;
        }
    }
    if (!(sxx > 0 && syy > 0))
        return false;
    *r = sxy / sqrt(sxx * syy);
    return isfinite(*r);
}
