/* src/report_json.c: the loop report as one JSON document (jansson), full precision, null when absent */
#include <jansson.h>
#include <math.h>

#include "measure.h"
#include "report.h"

/* Builds a document while remembering whether any allocation failed. */
typedef struct {
    bool ok;
} builder;

static json_t *num(double x)
{
    return isfinite(x) ? json_real(x) : json_null();
}

/* A real number when the imaginary part is exactly zero, else {"re":…,"im":…}; null when absent. */
static json_t *cnum(bool present, double complex z)
{
    if (!present || !isfinite(creal(z)) || !isfinite(cimag(z)))
        return json_null();
    if (cimag(z) == 0.0)
        return json_real(creal(z));
    return json_pack("{s:f,s:f}", "re", creal(z), "im", cimag(z));
}

static void set(builder *b, json_t *obj, const char *key, json_t *val)
{
    if (!val || json_object_set_new(obj, key, val))
        b->ok = false;
}

static json_t *dc_object(builder *b, const tb_measures *m)
{
    json_t *dc = json_object();
    if (!dc) {
        b->ok = false;
        return NULL;
    }
    unsigned fl = m->dc.flags;
    bool io = !(fl & TB_PT_NO_IO);
    bool t_ok = !(fl & TB_PT_T_INF);
    bool ainf_ok = io && !(fl & TB_PT_AINF_NONE) && cabs(m->dc.A_inf) > 0;
    set(b, dc, "T", cnum(t_ok, m->dc.T));
    set(b, dc, "T_db", num(t_ok ? tb_db(m->dc.T) : NAN));
    set(b, dc, "a", cnum(io && t_ok && !(fl & TB_PT_AINF_NONE), m->dc.a));
    set(b, dc, "beta", cnum(ainf_ok, ainf_ok ? 1.0 / m->dc.A_inf : 0));
    set(b, dc, "A_inf", cnum(io && !(fl & TB_PT_AINF_NONE), m->dc.A_inf));
    set(b, dc, "A0", cnum(io && !(fl & TB_PT_A0_NONE), m->dc.A0));
    set(b, dc, "A", cnum(io, m->dc.A));
    double complex err = ainf_ok ? (m->dc.A - m->dc.A_inf) / m->dc.A_inf * 100.0 : 0;
    set(b, dc, "gain_error_pct", cnum(ainf_ok, err));
    return dc;
}

static json_t *notes_array(builder *b, unsigned notes)
{
    json_t *arr = json_array();
    if (!arr) {
        b->ok = false;
        return NULL;
    }
    for (int n = 0; n < TB_NOTE_COUNT; n++)
        if (notes & (1u << n))
            if (json_array_append_new(arr, json_string(tb_note_str((tb_note)n))))
                b->ok = false;
    return arr;
}

static json_t *loop_object(builder *b, const tb_circuit *ckt, const tb_result *res, size_t l)
{
    tb_measures m;
    if (tb_measure_loop(res, l, &m)) {
        b->ok = false;
        return NULL;
    }
    json_t *lp = json_object();
    if (!lp) {
        b->ok = false;
        return NULL;
    }
    const tb_element *e = &ckt->elems[ckt->loops[l].elem];
    set(b, lp, "source", json_string(e->name));
    set(b, lp, "kind", json_string(tb_elem_kind_word(e->kind)));
    set(b, lp, "gain", num(e->value));
    set(b, lp, "dc_hz", num(m.dc_hz));
    set(b, lp, "dc", dc_object(b, &m));
    set(b, lp, "unity_hz", m.has_unity ? num(m.unity_hz) : json_null());
    set(b, lp, "phase_margin_deg", m.has_phase_margin ? num(m.phase_margin_deg) : json_null());
    set(b, lp, "f3db_closed_hz", m.has_f3db ? num(m.f3db_closed_hz) : json_null());
    set(b, lp, "notes", notes_array(b, m.notes));
    return lp;
}

static json_t *sweep_object(builder *b, const tb_circuit *ckt, const tb_result *res)
{
    json_t *sw = json_object();
    if (!sw) {
        b->ok = false;
        return NULL;
    }
    set(b, sw, "grid", json_string(tb_report_grid_word(ckt->ac.kind)));
    set(b, sw, "n", json_integer(ckt->ac.points));
    set(b, sw, "fstart_hz", num(ckt->ac.fstart));
    set(b, sw, "fstop_hz", num(ckt->ac.fstop));
    set(b, sw, "points", json_integer((json_int_t)res->npoints));
    set(b, sw, "dc_solved", json_boolean(res->has_dc));
    return sw;
}

static json_t *document(builder *b, const tb_circuit *ckt, const tb_result *res)
{
    json_t *root = json_object();
    json_t *loops = json_array();
    if (!root || !loops) {
        json_decref(root);
        json_decref(loops);
        b->ok = false;
        return NULL;
    }
    set(b, root, "tool", json_string("tbeta"));
    set(b, root, "version", json_string(TB_VERSION));
    set(b, root, "netlist", json_string(ckt->file));
    set(b, root, "title", json_string(tb_circuit_title(ckt)));
    set(b, root, "sweep", sweep_object(b, ckt, res));
    if (ckt->io.given) {
        char buf[512];
        set(b, root, "input", json_string(ckt->io.source));
        set(b, root, "output", json_string(tb_report_output(&ckt->io, buf, sizeof buf)));
    }
    for (size_t l = 0; l < res->nloops; l++) {
        json_t *lp = loop_object(b, ckt, res, l);
        if (!lp || json_array_append_new(loops, lp))
            b->ok = false;
    }
    set(b, root, "loops", loops);
    set(b, root, "caution", json_string(tb_report_caution));
    return root;
}

tb_status tb_report_json(const tb_circuit *ckt, const tb_result *res, FILE *out)
{
    if (!ckt || !res || !out)
        return TB_ERR_USAGE;
    builder b = {true};
    json_t *root = document(&b, ckt, res);
    if (!b.ok) {
        json_decref(root);
        return TB_ERR_NOMEM;
    }
    int rc = json_dumpf(root, out, JSON_INDENT(2) | JSON_REAL_PRECISION(17) | JSON_PRESERVE_ORDER);
    json_decref(root);
    if (rc || fputc('\n', out) == EOF || ferror(out))
        return TB_ERR_IO;
    return TB_OK;
}
