/* src/spreadreport.c: the spread part of 'tbeta report': which spread runs a report makes, handed to the result */
#include "spreadreport.h"

#include <math.h>
#include <string.h>

#include "alloc.h"
#include "result.h"

void tb_spread_report_options_init(tb_spread_report_options *opt)
{
    *opt = (tb_spread_report_options){
        .run = true, .samples = TB_SPREAD_REPORT_SAMPLES, .seed = 1, .jobs = 1, .at_hz = NULL, .at_count = 0};
}

bool tb_spread_report_has_spread(const tb_circuit *ckt)
{
    return ckt && ckt->spread && ckt->spread->rule_count > 0;
}

/* The sensitivities at every chosen frequency into part. */
static tb_status sensitivities_at(const tb_circuit *ckt, const tb_options *analysis,
                                  const tb_spread_report_options *opt, tb_diag *diag, tb_spread_part *part)
{
    part->at_hz = tb_malloc(opt->at_count, sizeof(double));
    if (!part->at_hz)
        return TB_ERR_NOMEM;
    for (size_t k = 0; k < opt->at_count; k++) {
        tb_sens_entry *e = NULL;
        size_t per = 0;
        tb_status st = tb_spread_sensitivities_at(ckt, analysis, opt->at_hz[k], diag, &e, &per);
        if (st)
            return st;
        size_t one = ckt->loop_count * per;
        if (k == 0)
            part->at = tb_malloc(opt->at_count * (one ? one : 1), sizeof(tb_sens_entry));
        if (!part->at) {
            tb_free(e);
            return TB_ERR_NOMEM;
        }
        if (one)
            memcpy(part->at + k * one, e, one * sizeof(tb_sens_entry));
        tb_free(e);
        part->at_per = per;
        part->at_hz[k] = opt->at_hz[k];
        part->at_count = k + 1;
    }
    return TB_OK;
}

tb_status tb_spread_report_run(const tb_circuit *ckt, const tb_options *analysis, const tb_spread_report_options *opt,
                               tb_diag *diag, tb_result *res)
{
    if (!ckt || !analysis || !opt || !res || opt->at_count > TB_SPREAD_REPORT_AT_MAX ||
        (opt->at_count > 0 && !opt->at_hz) || opt->samples > TB_SPREAD_MAX_SAMPLES)
        return TB_ERR_USAGE;
    for (size_t k = 0; k < opt->at_count; k++)
        if (!(opt->at_hz[k] >= 0) || !isfinite(opt->at_hz[k]))
            return TB_ERR_USAGE;
    bool scans = ckt->spread && ckt->spread->axis_count > 0;
    bool spreads = tb_spread_report_has_spread(ckt);
    if (!scans && !spreads && opt->at_count == 0)
        return TB_OK;
    tb_spread_part *part = tb_spread_part_new();
    if (!part)
        return TB_ERR_NOMEM;
    tb_spread_options so;
    tb_spread_options_init(&so);
    so.analysis = *analysis;
    so.analysis.census = false;
    so.analysis.sensitivity = false;
    so.analysis.at_hz = NULL;
    so.analysis.at_count = 0;
    so.analysis.progress = NULL;
    so.analysis.progress_ctx = NULL;
    so.jobs = opt->jobs;
    so.samples = opt->samples;
    so.seed = opt->seed;
    part->skipped = (scans || spreads) && !opt->run;
    tb_status st = TB_OK;
    if (opt->run && scans)
        st = tb_spread_scan(ckt, &so, diag, &part->scan);
    if (!st && opt->run && spreads)
        st = tb_spread_corners(ckt, &so, diag, &part->corners);
    if (!st && opt->run && spreads && opt->samples > 0)
        st = tb_spread_monte_carlo(ckt, &so, diag, &part->samples);
    if (!st && opt->at_count > 0)
        st = sensitivities_at(ckt, &so.analysis, opt, diag, part);
    if (st) {
        tb_spread_part_free(part);
        return st;
    }
    if (res->spread && res->spread_free)
        res->spread_free(res->spread);
    res->spread = part;
    res->spread_free = tb_spread_part_free;
    return TB_OK;
}
