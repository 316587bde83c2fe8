/* src/sweep.c: the point loop: one factorization of M per frequency, handed to every per-point hook */
#include "sweep.h"

#include <pthread.h>
#include <unistd.h>

#include "alloc.h"
#include "diag.h"
#include "units.h"

/* One thread's share of the point loop: its own numeric factorization over the
 * shared symbolic analysis, M's values, loop workspace and row. Lane 0 owns the
 * symbolic analysis and serves DC and the probe. */
typedef struct {
    tb_solver *solver;
    double *Mx;
    tb_loop_work *work;
    tb_point *row;  /* one point of every loop */
    bool reference; /* the solver's reference order is that of the first grid point */
} lane;

struct tb_sweep {
    const tb_circuit *ckt;
    tb_diag *diag;
    tb_mna *mna;
    lane *lanes;
    size_t nlanes;
    pthread_t *threads; /* nlanes - 1 */
    double rcond_drop;
    tb_probe probe;
    tb_progress_fn progress; /* told of the grid points started, or NULL */
    void *progress_ctx;
};

size_t tb_sweep_chunk(size_t npoints)
{
    size_t c = npoints / 8;
    return c < 4 ? 4 : c > TB_SWEEP_CHUNK ? TB_SWEEP_CHUNK : c;
}

size_t tb_sweep_lanes_for(unsigned jobs, size_t npoints)
{
    size_t lanes = jobs;
    if (jobs == 0) {
        long cores = sysconf(_SC_NPROCESSORS_ONLN);
        lanes = cores > 0 ? (size_t)cores : 1;
    }
    size_t chunk = tb_sweep_chunk(npoints);
    size_t chunks = (npoints + chunk - 1) / chunk;
    if (lanes > chunks)
        lanes = chunks;
    if (lanes > TB_SWEEP_MAX_LANES)
        lanes = TB_SWEEP_MAX_LANES;
    return lanes > 0 ? lanes : 1;
}

void tb_sweep_free(tb_sweep *s)
{
    if (!s)
        return;
    /* lanes above 0 borrow lane 0's symbolic analysis: free them first */
    for (size_t l = s->nlanes; l-- > 0;) {
        tb_solver_free(s->lanes[l].solver);
        tb_loop_work_free(s->lanes[l].work);
        tb_free(s->lanes[l].Mx);
        tb_free(s->lanes[l].row);
    }
    tb_free(s->lanes);
    tb_free(s->threads);
    tb_mna_free(s->mna);
    tb_free(s);
}

static tb_status lane_new(const tb_sweep *s, lane *ln, const tb_solver *base)
{
    tb_status st = base ? tb_solver_new_sharing(base, &ln->solver) : tb_solver_new(s->mna, &ln->solver);
    if (!st)
        st = tb_loop_work_new(s->mna, &ln->work);
    if (st)
        return st;
    ln->Mx = tb_malloc(2 * s->mna->nnz, sizeof(double));
    ln->row = tb_calloc(s->ckt->loop_count, sizeof(tb_point));
    return ln->Mx && ln->row ? TB_OK : TB_ERR_NOMEM;
}

tb_status tb_sweep_new(const tb_circuit *ckt, double rcond_drop, size_t lanes, tb_diag *diag, tb_sweep **out)
{
    if (lanes == 0 || lanes > TB_SWEEP_MAX_LANES)
        return TB_ERR_USAGE;
    tb_sweep *s = tb_calloc(1, sizeof(*s));
    if (!s)
        return TB_ERR_NOMEM;
    s->ckt = ckt;
    s->diag = diag;
    s->rcond_drop = rcond_drop;
    tb_status st = tb_mna_build(ckt, diag, &s->mna);
    if (!st) {
        s->lanes = tb_calloc(lanes, sizeof(lane));
        s->threads = tb_calloc(lanes, sizeof(pthread_t));
        st = s->lanes && s->threads ? TB_OK : TB_ERR_NOMEM;
    }
    for (size_t l = 0; l < lanes && !st; l++) {
        s->nlanes = l + 1;
        st = lane_new(s, &s->lanes[l], l == 0 ? NULL : s->lanes[0].solver);
    }
    if (st) {
        tb_sweep_free(s);
        return st;
    }
    lane *ln = &s->lanes[0];
    s->probe = tb_probe_make(s->mna, ln->solver, ln->work, ln->Mx, ln->row, rcond_drop);
    *out = s;
    return TB_OK;
}

const tb_mna *tb_sweep_mna(const tb_sweep *s)
{
    return s->mna;
}

size_t tb_sweep_lanes(const tb_sweep *s)
{
    return s->nlanes;
}

tb_probe *tb_sweep_probe(tb_sweep *s)
{
    return &s->probe;
}

tb_solver_counts tb_sweep_counts(const tb_sweep *s)
{
    tb_solver_counts sum = {0};
    for (size_t l = 0; l < s->nlanes; l++)
        sum = tb_solver_counts_add(sum, tb_solver_get_counts(s->lanes[l].solver));
    return sum;
}

static tb_status singular_diag(const tb_sweep *s, tb_severity sev, double f, size_t culprit,
                               const char *consequence)
{
    /* Structural causes (floating nodes, loops of voltage sources or
     * inductors) were reported by tb_circuit_finish; at DC it has said so
     * already, and an error would have stopped the circuit before the sweep.
     * What is left is numerical: values that make the equations dependent. */
    if (sev == TB_SEV_WARNING && f == 0.0 && s->ckt->dc_singular)
        return TB_ERR_SINGULAR;
    char at[64];
    tb_format_hz(f, 6, at, sizeof at);
    char name[256];
    tb_mna_unknown_name(s->ckt, culprit, name, sizeof name);
    tb_status st = tb_diag_add(s->diag, sev, s->ckt->file, 0, 0, NULL, 0,
                               "the circuit matrix is singular at %s (zero pivot at %s): element "
                               "values make the equations dependent there, e.g. a loop whose "
                               "return difference 1 + T is zero%s",
                               at, name, consequence);
    return st ? st : TB_ERR_SINGULAR;
}

/* Every loop at the point lane l's solver holds, then every hook. */
static tb_status visit(const tb_sweep *s, size_t l, size_t index, double f, const tb_sweep_hook *hooks,
                       size_t nhooks)
{
    const lane *ln = &s->lanes[l];
    double omega = TB_TWO_PI * f;
    tb_status st = tb_loop_eval(s->mna, ln->solver, ln->Mx, omega, ln->work, ln->row);
    tb_sweep_point pt = {index, f, omega, s->mna, ln->solver, ln->Mx, ln->row, ln->work, l};
    for (size_t h = 0; h < nhooks && !st; h++)
        st = hooks[h].at(hooks[h].self, &pt);
    return st;
}

/* DC: an exact f = 0 factorization when M(0) is non-singular; otherwise
 * *culprit names the zero pivot (reported once the sweep has succeeded). */
static tb_status sweep_dc(tb_sweep *s, const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc, size_t *culprit)
{
    if (s->ckt->dc_singular)
        return TB_OK; /* singular by structure (warned); rounding could hide a zero pivot */
    lane *ln = &s->lanes[0];
    tb_mna_values(s->mna, 0.0, ln->Mx);
    tb_status st = tb_solver_factor(ln->solver, ln->Mx, culprit);
    if (st == TB_ERR_SINGULAR)
        return TB_OK;
    if (st || (st = visit(s, 0, TB_SWEEP_DC, 0.0, hooks, nhooks)))
        return st;
    *has_dc = true;
    return TB_OK;
}

/* The grid part of one tb_sweep_run, shared by its threads. */
typedef struct {
    const tb_sweep *s;
    const double *freqs;
    size_t npoints;
    size_t chunk;         /* points per chunk */
    const tb_sweep_hook *hooks;
    size_t nhooks;
    bool threaded;        /* lock is initialised and guards the fields below */
    pthread_mutex_t lock;
    size_t next_chunk;
    size_t fail_index;    /* the lowest grid point that failed; npoints while none */
    tb_status fail_status;
    size_t fail_culprit;
    tb_progress_fn progress;
    void *progress_ctx;
} grid_run;

typedef struct {
    grid_run *run;
    size_t lane;
} grid_worker;

/* The next chunk to do, false when none is left or every point after a failure. */
static bool take_chunk(grid_run *g, size_t *chunk)
{
    if (g->threaded)
        pthread_mutex_lock(&g->lock);
    size_t first = g->next_chunk * g->chunk;
    bool more = first < g->npoints && first < g->fail_index;
    if (more)
        *chunk = g->next_chunk++;
    if (more && g->progress) /* under the lock: one call at a time */
        g->progress(g->progress_ctx, first, g->npoints);
    if (g->threaded)
        pthread_mutex_unlock(&g->lock);
    return more;
}

static void record_failure(grid_run *g, size_t i, tb_status st, size_t culprit)
{
    if (g->threaded)
        pthread_mutex_lock(&g->lock);
    if (i < g->fail_index) {
        g->fail_index = i;
        g->fail_status = st;
        g->fail_culprit = culprit;
    }
    if (g->threaded)
        pthread_mutex_unlock(&g->lock);
}

/* The reference pivot order of the run: a pivoted factorization at the first
 * grid point, the same on every lane. */
static tb_status reference_factor(const tb_sweep *s, lane *ln, double f0, size_t *culprit)
{
    tb_mna_values(s->mna, TB_TWO_PI * f0, ln->Mx);
    tb_status st = tb_solver_factor(ln->solver, ln->Mx, culprit);
    ln->reference = st == TB_OK;
    return st;
}

/* M factored at grid point i of a chunk starting at first: point 0 is the
 * reference factorization itself; elsewhere a refactor with the reference
 * order, restarted at the chunk's first point, so that a re-pivoting where the
 * order degrades holds to the end of its chunk only. *failed is the point a
 * failure belongs to (0 when the reference factorization fails). */
static tb_status factor_point(const grid_run *g, lane *ln, size_t first, size_t i, size_t *culprit,
                              size_t *failed)
{
    *failed = 0;
    if (i == 0)
        return reference_factor(g->s, ln, g->freqs[0], culprit);
    if (i == first && ln->reference) {
        tb_solver_restart(ln->solver);
    } else if (i == first) {
        tb_status st = reference_factor(g->s, ln, g->freqs[0], culprit);
        if (st)
            return st;
    }
    *failed = i;
    tb_mna_values(g->s->mna, TB_TWO_PI * g->freqs[i], ln->Mx);
    return tb_solver_refactor(ln->solver, ln->Mx, g->s->rcond_drop, culprit);
}

/* One chunk on lane l. */
static void grid_chunk(grid_run *g, size_t l, size_t chunk)
{
    lane *ln = &g->s->lanes[l];
    size_t first = chunk * g->chunk;
    size_t end = first + g->chunk < g->npoints ? first + g->chunk : g->npoints;
    for (size_t i = first; i < end; i++) {
        size_t culprit = 0;
        size_t failed = i;
        tb_status st = factor_point(g, ln, first, i, &culprit, &failed);
        if (!st)
            st = visit(g->s, l, i, g->freqs[i], g->hooks, g->nhooks);
        if (st) {
            record_failure(g, failed, st, culprit);
            return;
        }
    }
}

static void *grid_worker_main(void *arg)
{
    grid_worker *w = arg;
    size_t chunk = 0;
    while (take_chunk(w->run, &chunk))
        grid_chunk(w->run, w->lane, chunk);
    return NULL;
}

/* The grid on every lane: lane 0 in the calling thread, the others in threads
 * of their own (fewer when a thread cannot be started: the chunks, and so the
 * numbers, stay the same). */
static void grid_run_all(tb_sweep *s, grid_run *g)
{
    grid_worker workers[TB_SWEEP_MAX_LANES];
    size_t started = 0;
    g->threaded = s->nlanes > 1 && pthread_mutex_init(&g->lock, NULL) == 0;
    for (size_t l = 1; g->threaded && l < s->nlanes; l++) {
        workers[l] = (grid_worker){g, l};
        if (pthread_create(&s->threads[started], NULL, grid_worker_main, &workers[l]) != 0)
            break;
        started++;
    }
    workers[0] = (grid_worker){g, 0};
    grid_worker_main(&workers[0]);
    for (size_t t = 0; t < started; t++)
        pthread_join(s->threads[t], NULL);
    if (g->threaded)
        pthread_mutex_destroy(&g->lock);
}

/* After the grid, the probe continues on lane 0 from the reference order,
 * whichever chunks lane 0 took (it factors at the first grid point when it took
 * none), so that what it computes does not depend on the number of lanes; the
 * other lanes' factorizations are freed. */
static tb_status hand_to_probe(tb_sweep *s, const double *freqs, size_t npoints)
{
    lane *ln = &s->lanes[0];
    size_t culprit = 0;
    tb_status st = !ln->reference && npoints > 0 ? reference_factor(s, ln, freqs[0], &culprit) : TB_OK;
    tb_solver_restart(ln->solver);
    for (size_t l = 1; l < s->nlanes; l++)
        tb_solver_release(s->lanes[l].solver);
    return st;
}

void tb_sweep_set_progress(tb_sweep *s, tb_progress_fn fn, void *ctx)
{
    s->progress = fn;
    s->progress_ctx = ctx;
}

tb_status tb_sweep_run(tb_sweep *s, const double *freqs, size_t npoints, bool dc,
                       const tb_sweep_hook *hooks, size_t nhooks, bool *has_dc)
{
    size_t dc_culprit = 0;
    *has_dc = false;
    s->probe.held = false;
    s->probe.row_valid = false;
    for (size_t l = 0; l < s->nlanes; l++)
        s->lanes[l].reference = false;
    tb_status st = dc ? sweep_dc(s, hooks, nhooks, has_dc, &dc_culprit) : TB_OK;
    if (!st) {
        grid_run g = {.s = s, .freqs = freqs, .npoints = npoints, .chunk = tb_sweep_chunk(npoints),
                      .hooks = hooks, .nhooks = nhooks, .fail_index = npoints,
                      .progress = s->progress, .progress_ctx = s->progress_ctx};
        grid_run_all(s, &g);
        st = g.fail_index < npoints ? g.fail_status : TB_OK;
        if (st == TB_ERR_SINGULAR)
            st = singular_diag(s, TB_SEV_ERROR, freqs[g.fail_index], g.fail_culprit, "");
    }
    if (!st)
        st = hand_to_probe(s, freqs, npoints);
    if (!st && dc && !*has_dc) {
        st = singular_diag(s, TB_SEV_WARNING, 0.0, dc_culprit, "; DC values are those at the lowest sweep frequency");
        st = st == TB_ERR_SINGULAR ? TB_OK : st;
    }
    return st;
}
