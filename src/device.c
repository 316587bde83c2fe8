/* src/device.c: transistors at a bias point (Q and M cards) expanded into their small-signal
 * parts, and the refusal of cards that are not small-signal (docs/netlist.md, "Devices at a
 * bias point", which gives the formulas and their sources) */
#include "device.h"

#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "suggest.h"
#include "units.h"

#define SECTION "docs/netlist.md, section \"Devices at a bias point\""
#define QUOTE_MAX 40

/* Thermal voltage VT = k*T/q: the Boltzmann constant and the elementary charge, both exact
 * in the SI since 2019 (BIPM, The International System of Units, 9th edition). */
#define BOLTZMANN 1.380649e-23       /* J/K */
#define ELEMENTARY_CHARGE 1.602176634e-19 /* C */
#define ZERO_CELSIUS 273.15          /* K */
#define DEFAULT_TJ 25.0              /* degrees Celsius: the datasheet reference temperature */
#define TJ_MIN -200.0
#define TJ_MAX 300.0

typedef enum { DEV_BJT = 1, DEV_MOS = 2 } dev_kind;

typedef enum {
    K_ICQ, K_BETA, K_VEARLY, K_FT, K_CPI, K_CMU, K_RBB, K_CCS, K_TJ,
    K_GM, K_GDS, K_ID, K_VOV, K_CLM, K_GMB, K_CHI, K_CGS, K_CGD, K_CDB, K_CSB,
    K_COUNT
} key_id;

typedef struct {
    const char *word;
    unsigned devices; /* DEV_BJT | DEV_MOS */
    bool zero_ok;     /* zero allowed (the part is left out) */
} key_info;

/* Every key, in the order docs/netlist.md lists them. */
static const key_info KEYS[K_COUNT] = {
    [K_ICQ] = {"icq", DEV_BJT, false},   [K_BETA] = {"beta", DEV_BJT, false},
    [K_VEARLY] = {"vearly", DEV_BJT, false}, [K_FT] = {"ft", DEV_BJT | DEV_MOS, false},
    [K_CPI] = {"cpi", DEV_BJT, true},    [K_CMU] = {"cmu", DEV_BJT, true},
    [K_RBB] = {"rbb", DEV_BJT, true},    [K_CCS] = {"ccs", DEV_BJT, true},
    [K_TJ] = {"tj", DEV_BJT, true},      [K_GM] = {"gm", DEV_MOS, false},
    [K_GDS] = {"gds", DEV_MOS, true},    [K_ID] = {"id", DEV_MOS, false},
    [K_VOV] = {"vov", DEV_MOS, false},   [K_CLM] = {"clm", DEV_MOS, true},
    [K_GMB] = {"gmb", DEV_MOS, true},    [K_CHI] = {"chi", DEV_MOS, true},
    [K_CGS] = {"cgs", DEV_MOS, true},    [K_CGD] = {"cgd", DEV_MOS, true},
    [K_CDB] = {"cdb", DEV_MOS, true},    [K_CSB] = {"csb", DEV_MOS, true},
};

/* The ranges of derived parts: those the parser holds written values to (docs/netlist.md,
 * "Value ranges"). */
typedef struct {
    double lo;
    double hi;
    const char *unit;
} part_range;

static const part_range R_PART = {1e-12, 1e18, "ohms"};
static const part_range C_PART = {1e-21, 1e12, "F"};
static const part_range G_PART = {1e-15, 1e15, "S"};

/* The keys of one card, by id. */
typedef struct {
    const tb_device_card *card;
    tb_device_error *err;
    bool has[K_COUNT];
    double v[K_COUNT];
    const tb_token *at[K_COUNT];
} key_set;

/* ---- messages ----------------------------------------------------------- */

static tb_status refuse(tb_device_error *err, const tb_token *at, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

static tb_status refuse(tb_device_error *err, const tb_token *at, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err->message, sizeof err->message, fmt, ap);
    va_end(ap);
    err->at = *at;
    return TB_ERR_INPUT;
}

/* The length of t's text to quote: at most QUOTE_MAX bytes, cut on a UTF-8 boundary. */
static int quoted_len(const tb_token *t)
{
    size_t n = t->len;
    if (n > QUOTE_MAX) {
        n = QUOTE_MAX;
        while (n > 0 && ((unsigned char)t->ptr[n] & 0xC0) == 0x80)
            n--;
    }
    return (int)n;
}

static dev_kind kind_of(char letter)
{
    return tb_lex_lower(letter) == 'q' ? DEV_BJT : DEV_MOS;
}

/* What the tool needs of each device instead of a model name. */
static const char *needs(dev_kind kind)
{
    return kind == DEV_BJT ? "icq= and beta=, with vearly= ft= cmu= rbb= as known"
                           : "gm= or id= with vov=, with gds= or clm=, cgs= or ft=, cgd= as known";
}

/* ---- the shape of the card ---------------------------------------------- */

tb_status tb_device_shape(const char *label, const tb_token *name, const tb_token *words,
                          size_t word_count, bool has_keys, tb_device_error *err)
{
    dev_kind kind = kind_of(name->ptr[0]);
    const char *pins = kind == DEV_BJT ? "c b e [s]" : "d g s [b]";
    const char *what = kind == DEV_BJT ? "a bipolar transistor" : "a MOSFET";
    size_t nodes = word_count;
    if ((!has_keys && nodes >= 4) || nodes == TB_DEVICE_MAX_NODES + 1) {
        const tb_token *last = &words[word_count - 1];
        return refuse(err, last,
                      "%s refers to model '%.*s' by name: tbeta needs the small-signal parameters "
                      "at the operating point instead (%s), see " SECTION,
                      label, quoted_len(last), last->ptr, needs(kind));
    }
    if (!has_keys && nodes == 3)
        return refuse(err, name,
                      "%s has no operating point: tbeta needs the small-signal parameters (%s), "
                      "see " SECTION, label, needs(kind));
    if (nodes < 3 || nodes > TB_DEVICE_MAX_NODES)
        return refuse(err, nodes < 3 ? name : &words[TB_DEVICE_MAX_NODES],
                      "%s has %zu node%s, but %s has 3 or 4 (%s)", label, nodes,
                      nodes == 1 ? "" : "s", what, pins);
    return TB_OK;
}

/* ---- keys ----------------------------------------------------------------- */

/* "did you mean" among the keys of the device, or the list of its keys. */
static tb_status unknown_key(key_set *ks, dev_kind kind, const tb_token *key)
{
    const char *label = ks->card->label;
    char text[QUOTE_MAX + 1];
    int n = quoted_len(key);
    memcpy(text, key->ptr, (size_t)n);
    text[n] = '\0';
    tb_suggester sg;
    tb_suggest_init(&sg, text);
    char list[200] = "";
    size_t used = 0;
    for (int k = 0; k < K_COUNT; k++) {
        if (!(KEYS[k].devices & kind))
            continue;
        tb_suggest_offer(&sg, KEYS[k].word);
        used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", used ? " " : "", KEYS[k].word);
    }
    const char *best = tb_suggest_best(&sg);
    if (best)
        return refuse(ks->err, key, "%s has no key '%s' (did you mean '%s'?)", label, text, best);
    return refuse(ks->err, key, "%s has no key '%s' (the keys of %s: %s)", label, text,
                  kind == DEV_BJT ? "a bipolar transistor" : "a MOSFET", list);
}

/* One key=value into ks: known for this device, once, and in its range. */
static tb_status take_key(key_set *ks, dev_kind kind, const tb_device_key *dk)
{
    const char *label = ks->card->label;
    int k = 0;
    while (k < K_COUNT && !((KEYS[k].devices & kind) && tb_lex_is(&dk->key, KEYS[k].word)))
        k++;
    if (k == K_COUNT)
        return unknown_key(ks, kind, &dk->key);
    if (ks->has[k])
        return refuse(ks->err, &dk->key, "key '%s' of %s is given twice", KEYS[k].word, label);
    double x = dk->value;
    if (k == K_TJ) {
        if (!(x >= TJ_MIN && x <= TJ_MAX))
            return refuse(ks->err, &dk->at, "tj of %s must be from %g to %g degrees Celsius, got '%.*s'",
                          label, TJ_MIN, TJ_MAX, quoted_len(&dk->at), dk->at.ptr);
    } else if (x < 0 || (x == 0 && !KEYS[k].zero_ok)) {
        return refuse(ks->err, &dk->at, "%s of %s must be %s, got '%.*s'", KEYS[k].word, label,
                      KEYS[k].zero_ok ? "zero or positive" : "positive", quoted_len(&dk->at),
                      dk->at.ptr);
    }
    ks->has[k] = true;
    ks->v[k] = x;
    ks->at[k] = &dk->at;
    return TB_OK;
}

static tb_status take_keys(key_set *ks, dev_kind kind)
{
    for (size_t i = 0; i < ks->card->key_count; i++) {
        tb_status st = take_key(ks, kind, &ks->card->keys[i]);
        if (st)
            return st;
    }
    return TB_OK;
}

/* The card lacks key k, which it needs (`why` says what it is). */
static tb_status missing(key_set *ks, key_id k, const char *why)
{
    return refuse(ks->err, &ks->card->first, "%s needs %s= (%s), see " SECTION, ks->card->label,
                  KEYS[k].word, why);
}

/* Keys a and b may not both be given (b is blamed). */
static tb_status exclusive(key_set *ks, key_id a, key_id b, const char *what)
{
    if (ks->has[a] && ks->has[b])
        return refuse(ks->err, ks->at[b], "%s gives both %s= and %s=: %s comes from one of them",
                      ks->card->label, KEYS[a].word, KEYS[b].word, what);
    return TB_OK;
}

/* ---- parts ---------------------------------------------------------------- */

/* Appends a part named "NAME" (suffix NULL) or "NAME.suffix" with value x, which must lie
 * in r (else a refusal at the key `cause`, naming the formula). */
static tb_status add_part(tb_circuit *ckt, key_set *ks, tb_device_parts *out, tb_elem_kind kind,
                          const char *suffix, const int node[4], double x, key_id cause,
                          const char *formula)
{
    const tb_device_card *card = ks->card;
    const part_range *r = kind == TB_EL_R ? &R_PART : kind == TB_EL_C ? &C_PART : &G_PART;
    if (!(x >= r->lo && x <= r->hi))
        return refuse(ks->err, ks->at[cause] ? ks->at[cause] : &card->first,
                      "%s of %s is %g %s, outside %g to %g %s (from %s)", suffix ? suffix : "gm",
                      card->label, x, r->unit, r->lo, r->hi, r->unit, formula);
    tb_element e = {.kind = kind, .branch = -1, .loc = card->loc, .value = x};
    memcpy(e.node, node, sizeof e.node);
    if (!suffix) {
        e.name = card->name;
    } else {
        size_t n = strlen(card->name);
        size_t s = strlen(suffix);
        char *full = tb_malloc(n + s + 2, 1);
        if (!full)
            return TB_ERR_NOMEM;
        memcpy(full, card->name, n);
        full[n] = '.';
        memcpy(full + n + 1, suffix, s + 1);
        e.name = tb_circuit_intern(ckt, full, n + s + 1);
        tb_free(full);
        if (!e.name)
            return TB_ERR_NOMEM;
    }
    out->part[out->count++] = e;
    return TB_OK;
}

/* A two-terminal part between a and b (controlling nodes unused). */
static tb_status add_two(tb_circuit *ckt, key_set *ks, tb_device_parts *out, tb_elem_kind kind,
                         const char *suffix, int a, int b, double x, key_id cause, const char *formula)
{
    int node[4] = {a, b, 0, 0};
    return add_part(ckt, ks, out, kind, suffix, node, x, cause, formula);
}

/* The internal node NAME.suffix. */
static tb_status internal_node(tb_circuit *ckt, key_set *ks, const char *suffix, int *index)
{
    const char *name = ks->card->name;
    size_t n = strlen(name);
    size_t s = strlen(suffix);
    char *full = tb_malloc(n + s + 2, 1);
    if (!full)
        return TB_ERR_NOMEM;
    memcpy(full, name, n);
    full[n] = '.';
    memcpy(full + n + 1, suffix, s + 1);
    tb_status st = TB_OK;
    if (ckt->node_count >= TB_MAX_NODES && !tb_circuit_find_node(ckt, full, n + s + 1, index))
        st = refuse(ks->err, &ks->card->first, "too many nodes (limit is %zu)", TB_MAX_NODES);
    else
        st = tb_circuit_node(ckt, full, n + s + 1, index);
    tb_free(full);
    return st;
}

/* The input capacitance `input` (Cpi, Cgs): given, or from ft as gm/(2 pi ft) less the
 * feedback capacitance `feedback` (Cmu, Cgd), which must not exceed it. */
static tb_status input_cap(key_set *ks, key_id input, key_id feedback, double gm, double *out)
{
    double cf = ks->has[feedback] ? ks->v[feedback] : 0;
    *out = ks->has[input] ? ks->v[input] : 0;
    if (!ks->has[K_FT])
        return TB_OK;
    double total = gm / (TB_TWO_PI * ks->v[K_FT]);
    *out = total - cf;
    if (*out < 0)
        return refuse(ks->err, ks->at[K_FT],
                      "%s has a negative %s: gm/(2*pi*ft) = %g F is less than %s = %g F (ft is too "
                      "high for this %s and %s)", ks->card->label, input == K_CPI ? "Cpi" : "Cgs",
                      total, KEYS[feedback].word, cf, input == K_CPI ? "icq" : "gm",
                      KEYS[feedback].word);
    return TB_OK;
}

/* ---- the bipolar transistor ----------------------------------------------- */

/* The substrate node and ccs= come together. */
static tb_status bjt_substrate(key_set *ks, bool substrate)
{
    const tb_device_card *card = ks->card;
    if (substrate && !ks->has[K_CCS])
        return refuse(ks->err, &card->node_tok[3],
                      "%s has a substrate node '%.*s' but no ccs= (collector-substrate capacitance); "
                      "a model name is not read, see " SECTION,
                      card->label, quoted_len(&card->node_tok[3]), card->node_tok[3].ptr);
    if (!substrate && ks->has[K_CCS])
        return refuse(ks->err, ks->at[K_CCS], "ccs= of %s needs a substrate node (Q c b e s)",
                      card->label);
    return TB_OK;
}

/* Q c b e [s]: gm = icq/VT from c to e controlled by v(bi, e); rpi = beta/gm (bi-e);
 * ro = vearly/icq (c-e); Cpi = gm/(2 pi ft) - cmu or cpi= (bi-e); Cmu (bi-c); rbb (b-bi);
 * Ccs (c-s). bi is b itself when rbb is absent or zero. */
static tb_status bjt(tb_circuit *ckt, key_set *ks, tb_device_parts *out)
{
    const tb_device_card *card = ks->card;
    tb_status st = TB_OK;
    if (!ks->has[K_ICQ])
        return missing(ks, K_ICQ, "the collector current at the operating point");
    if (!ks->has[K_BETA])
        return missing(ks, K_BETA, "the small-signal current gain");
    if ((st = exclusive(ks, K_FT, K_CPI, "Cpi")))
        return st;
    bool substrate = card->node_count == 4;
    if ((st = bjt_substrate(ks, substrate)))
        return st;
    double tj = ks->has[K_TJ] ? ks->v[K_TJ] : DEFAULT_TJ;
    double vt = BOLTZMANN * (tj + ZERO_CELSIUS) / ELEMENTARY_CHARGE;
    double gm = ks->v[K_ICQ] / vt;
    double cmu = ks->has[K_CMU] ? ks->v[K_CMU] : 0;
    double cpi = 0;
    if ((st = input_cap(ks, K_CPI, K_CMU, gm, &cpi)))
        return st;
    int c = card->node[0];
    int b = card->node[1];
    int e = card->node[2];
    int bi = b;
    if (ks->has[K_RBB] && ks->v[K_RBB] > 0 && (st = internal_node(ckt, ks, "bi", &bi)))
        return st;
    int g_nodes[4] = {c, e, bi, e};
    if ((st = add_part(ckt, ks, out, TB_EL_G, NULL, g_nodes, gm, K_ICQ, "icq/VT")) ||
        (st = add_two(ckt, ks, out, TB_EL_R, "rpi", bi, e, ks->v[K_BETA] / gm, K_BETA, "beta/gm")))
        return st;
    if (ks->has[K_VEARLY] &&
        (st = add_two(ckt, ks, out, TB_EL_R, "ro", c, e, ks->v[K_VEARLY] / ks->v[K_ICQ], K_VEARLY,
                      "vearly/icq")))
        return st;
    if (cpi > 0 && (st = add_two(ckt, ks, out, TB_EL_C, "cpi", bi, e, cpi, ks->has[K_FT] ? K_FT : K_CPI,
                                  ks->has[K_FT] ? "gm/(2*pi*ft) - cmu" : "cpi")))
        return st;
    if (cmu > 0 && (st = add_two(ckt, ks, out, TB_EL_C, "cmu", bi, c, cmu, K_CMU, "cmu")))
        return st;
    if (bi != b && (st = add_two(ckt, ks, out, TB_EL_R, "rbb", b, bi, ks->v[K_RBB], K_RBB, "rbb")))
        return st;
    if (substrate && ks->v[K_CCS] > 0 &&
        (st = add_two(ckt, ks, out, TB_EL_C, "ccs", c, card->node[3], ks->v[K_CCS], K_CCS, "ccs")))
        return st;
    return TB_OK;
}

/* ---- the MOSFET ------------------------------------------------------------ */

/* gm and gds of M: given, or from id and vov by the square law. */
static tb_status mos_gm(key_set *ks, double *gm, double *gds, key_id *gm_cause)
{
    tb_status st = TB_OK;
    if ((st = exclusive(ks, K_GM, K_ID, "gm")) || (st = exclusive(ks, K_GM, K_VOV, "gm")) ||
        (st = exclusive(ks, K_GDS, K_CLM, "gds")))
        return st;
    if (ks->has[K_ID] && !ks->has[K_VOV])
        return missing(ks, K_VOV, "the overdrive voltage vgs - vt, with id=");
    if (ks->has[K_VOV] && !ks->has[K_ID])
        return missing(ks, K_ID, "the drain current, with vov=");
    if (!ks->has[K_GM] && !ks->has[K_ID])
        return missing(ks, K_GM, "the transconductance; or give id= and vov=");
    if (ks->has[K_CLM] && !ks->has[K_ID])
        return refuse(ks->err, ks->at[K_CLM], "clm= of %s needs id= (gds = clm*id)", ks->card->label);
    *gm_cause = ks->has[K_GM] ? K_GM : K_ID;
    *gm = ks->has[K_GM] ? ks->v[K_GM] : 2 * ks->v[K_ID] / ks->v[K_VOV];
    *gds = ks->has[K_GDS] ? ks->v[K_GDS] : ks->has[K_CLM] ? ks->v[K_CLM] * ks->v[K_ID] : 0;
    return TB_OK;
}

/* The bulk keys of M d g s [b]: gmb (given or chi*gm), cdb, csb need the bulk node. */
static tb_status mos_bulk(key_set *ks, double gm, double *gmb)
{
    const tb_device_card *card = ks->card;
    tb_status st = exclusive(ks, K_GMB, K_CHI, "gmb");
    if (st)
        return st;
    if (card->node_count == 3) {
        static const key_id bulk_keys[] = {K_GMB, K_CHI, K_CDB, K_CSB};
        for (size_t i = 0; i < sizeof bulk_keys / sizeof bulk_keys[0]; i++)
            if (ks->has[bulk_keys[i]])
                return refuse(ks->err, ks->at[bulk_keys[i]], "%s= of %s needs a bulk node (M d g s b)",
                              KEYS[bulk_keys[i]].word, card->label);
        *gmb = 0;
        return TB_OK;
    }
    if (!ks->has[K_GMB] && !ks->has[K_CHI])
        return refuse(ks->err, &card->node_tok[3],
                      "%s has a bulk node '%.*s' but no gmb= or chi= (body transconductance; 0 when "
                      "the bulk is tied to the source); a model name is not read, see " SECTION,
                      card->label, quoted_len(&card->node_tok[3]), card->node_tok[3].ptr);
    *gmb = ks->has[K_GMB] ? ks->v[K_GMB] : ks->v[K_CHI] * gm;
    return TB_OK;
}

/* M d g s [b]: gm from d to s controlled by v(g, s); gmb from d to s controlled by v(b, s);
 * ro = 1/gds (d-s); Cgs (g-s, given or gm/(2 pi ft) - cgd), Cgd (g-d), Cdb (d-b), Csb (s-b). */
static tb_status mos(tb_circuit *ckt, key_set *ks, tb_device_parts *out)
{
    const tb_device_card *card = ks->card;
    double gm = 0;
    double gds = 0;
    double gmb = 0;
    key_id gm_cause = K_GM;
    tb_status st = TB_OK;
    if ((st = mos_gm(ks, &gm, &gds, &gm_cause)) || (st = mos_bulk(ks, gm, &gmb)) ||
        (st = exclusive(ks, K_FT, K_CGS, "Cgs")))
        return st;
    double cgd = ks->has[K_CGD] ? ks->v[K_CGD] : 0;
    double cgs = 0;
    if ((st = input_cap(ks, K_CGS, K_CGD, gm, &cgs)))
        return st;
    int d = card->node[0];
    int g = card->node[1];
    int s = card->node[2];
    int b = card->node_count == 4 ? card->node[3] : s;
    int gm_nodes[4] = {d, s, g, s};
    int gmb_nodes[4] = {d, s, b, s};
    if ((st = add_part(ckt, ks, out, TB_EL_G, NULL, gm_nodes, gm, gm_cause,
                       gm_cause == K_GM ? "gm" : "2*id/vov")))
        return st;
    if (gmb > 0 && (st = add_part(ckt, ks, out, TB_EL_G, "gmb", gmb_nodes, gmb,
                                  ks->has[K_GMB] ? K_GMB : K_CHI, ks->has[K_GMB] ? "gmb" : "chi*gm")))
        return st;
    if (gds > 0 && (st = add_two(ckt, ks, out, TB_EL_R, "ro", d, s, 1 / gds,
                                 ks->has[K_GDS] ? K_GDS : K_CLM, ks->has[K_GDS] ? "1/gds" : "1/(clm*id)")))
        return st;
    const struct {
        const char *suffix;
        int a;
        int b;
        double x;
        key_id key;
    } caps[] = {{"cgs", g, s, cgs, ks->has[K_FT] ? K_FT : K_CGS}, {"cgd", g, d, cgd, K_CGD},
                {"cdb", d, b, ks->has[K_CDB] ? ks->v[K_CDB] : 0, K_CDB},
                {"csb", s, b, ks->has[K_CSB] ? ks->v[K_CSB] : 0, K_CSB}};
    for (size_t i = 0; i < sizeof caps / sizeof caps[0]; i++)
        if (caps[i].x > 0 && (st = add_two(ckt, ks, out, TB_EL_C, caps[i].suffix, caps[i].a, caps[i].b,
                                           caps[i].x, caps[i].key, caps[i].suffix)))
            return st;
    return TB_OK;
}

tb_status tb_device_expand(tb_circuit *ckt, const tb_device_card *card, tb_device_parts *out,
                           tb_device_error *err)
{
    key_set ks = {.card = card, .err = err};
    dev_kind kind = kind_of(card->first.ptr[0]);
    out->count = 0;
    tb_status st = take_keys(&ks, kind);
    if (st)
        return st;
    return kind == DEV_BJT ? bjt(ckt, &ks, out) : mos(ckt, &ks, out);
}

/* ---- cards that are not small-signal -------------------------------------- */

bool tb_device_refusal(const char *label, char letter, char *buf, size_t size)
{
    const char *what = NULL;
    const char *instead = NULL;
    switch (tb_lex_lower(letter)) {
    case 'd':
        what = "a diode";
        instead = "a resistor for its incremental resistance n*VT/ID and a capacitor for its "
                  "junction and diffusion capacitance";
        break;
    case 's':
    case 'w':
        what = "a switch";
        instead = "a resistor for the switch in the state being analysed";
        break;
    case 'b':
        what = "a behavioural source";
        instead = "E, G, F or H cards whose gains are its partial derivatives at the operating point";
        break;
    case 'j':
        what = "a junction field-effect transistor";
        instead = "an M card with gm= gds= cgs= cgd= at its operating point";
        break;
    default:
        return false;
    }
    snprintf(buf, size,
             "%s is %s, which is not small-signal: tbeta needs its small-signal parameters at the "
             "operating point instead (%s), see " SECTION, label, what, instead);
    return true;
}
