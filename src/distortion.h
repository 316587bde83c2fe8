/* src/distortion.h: harmonic and intermodulation distortion by nonlinear currents (Volterra series
 * to third order), with and without each loop's feedback */
#ifndef TB_DISTORTION_H
#define TB_DISTORTION_H

#include "probe.h"
#include "result.h"

/* Most tone frequencies of the HD2/HD3 sweep: the .ac grid, every k-th point so that at most
 * this many remain (three factorizations each: f, 2f, 3f). */
#define TB_DIST_SWEEP_MAX 100

/* Fills res->dist for ckt's .volterra request (nothing without one): the circuit as drawn and
 * each loop opened at the stated amplitude and tones, then HD2/HD3 over the thinned .ac grid;
 * every solve on the probe's solver, one factorization per distinct frequency (f, 2f, 3f,
 * f2, f2 - f, f + f2, 2f - f2 at the stated tones). A matrix singular at a product frequency
 * leaves that figure absent with its reason. Errors: TB_ERR_NOMEM, TB_ERR_NUMERIC. */
tb_status tb_distortion_run(const tb_circuit *ckt, tb_probe *probe, tb_result *res);

#endif
