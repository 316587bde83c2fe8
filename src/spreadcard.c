/* src/spreadcard.c: the .spread (tolerance) and .scan (parameter sweep) cards: reading, resolving */
#include "spreadcard.h"

#include <math.h>
#include <stdalign.h>
#include <stdarg.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include "alloc.h"
#include "diag.h"
#include "paramdep.h"
#include "suggest.h"

/* ---- the circuit's arena ----------------------------------------------------- */

/* A zeroed block of size bytes aligned for any record, in ckt's string arena (freed with the circuit). */
static void *arena_alloc(tb_circuit *ckt, size_t size)
{
    size_t pad = alignof(max_align_t) - 1;
    if (size > SIZE_MAX - pad)
        return NULL;
    char *zeros = tb_calloc(1, size + pad);
    if (!zeros)
        return NULL;
    const char *raw = tb_circuit_intern(ckt, zeros, size + pad);
    tb_free(zeros);
    if (!raw)
        return NULL;
    return (void *)(((uintptr_t)raw + pad) & ~(uintptr_t)pad);
}

static tb_spread_cards *cards_of(tb_circuit *ckt)
{
    if (!ckt->spread)
        ckt->spread = arena_alloc(ckt, sizeof(tb_spread_cards));
    return ckt->spread;
}

/* ---- reading ----------------------------------------------------------------- */

/* The tokens of one card and where the reader stands. */
typedef struct {
    tb_circuit *ckt;
    const char *file;
    const tb_token *keyword;
    const tb_token *tok;
    size_t count;
    size_t at;
    tb_card_error *err;
} reader;

static tb_status fail(reader *r, const tb_token *t, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static tb_status fail(reader *r, const tb_token *t, const char *fmt, ...)
{
    r->err->at = *t;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(r->err->message, sizeof r->err->message, fmt, ap);
    va_end(ap);
    return TB_ERR_INPUT;
}

/* The empty place after the last token read (or after the keyword). */
static tb_token end_place(const reader *r)
{
    tb_token t = r->at > 0 ? r->tok[r->at - 1] : *r->keyword;
    t.ptr += t.len;
    t.col += (int)(t.len < 1000 ? t.len : 1000);
    t.len = 0;
    t.kind = TB_TOK_EOC;
    return t;
}

static const tb_token *current(const reader *r)
{
    return r->at < r->count ? &r->tok[r->at] : NULL;
}

/* "expected WHAT after 'prev'" at the end, or "expected WHAT, got 'x'" at a token. */
static tb_status expected(reader *r, const char *what)
{
    char kw[24];
    snprintf(kw, sizeof kw, "%.*s", (int)(r->keyword->len < 20 ? r->keyword->len : 20), r->keyword->ptr);
    const tb_token *t = current(r);
    if (!t) {
        tb_token end = end_place(r);
        return fail(r, &end, "expected %s on %s", what, kw);
    }
    return fail(r, t, "expected %s on %s, got '%.*s'", what, kw, (int)(t->len < 40 ? t->len : 40), t->ptr);
}

static bool is_word(const tb_token *t, const char *keyword)
{
    return t && tb_lex_is(t, keyword);
}

/* A plain number (engineering suffixes allowed); with percent, a trailing % is required
 * (*relative true) or allowed. */
static tb_status number(reader *r, const char *what, bool allow_percent, double *x, bool *relative)
{
    const tb_token *t = current(r);
    if (!t || t->kind != TB_TOK_WORD)
        return t && t->kind == TB_TOK_EXPR
                   ? fail(r, t, "write %s as a plain number here, not an expression", what)
                   : expected(r, what);
    size_t len = t->len;
    bool pct = allow_percent && len > 1 && t->ptr[len - 1] == '%';
    if (pct)
        len--;
    double v = 0;
    if (tb_lex_value(t->ptr, len, &v) != TB_VALUE_OK || !isfinite(v))
        return fail(r, t, "malformed number '%.*s' for %s", (int)(t->len < 40 ? t->len : 40), t->ptr, what);
    *x = v;
    if (relative)
        *relative = pct;
    r->at++;
    return TB_OK;
}

/* The width of a flat or Gaussian spread: TOL% (relative) or TOL (absolute), positive;
 * a relative width whose corners would reach zero is refused. */
static tb_status width(reader *r, tb_spread_rule *rule)
{
    const tb_token *t = current(r);
    tb_status st = number(r, rule->dist == TB_SPREAD_FLAT ? "a tolerance (5% or an absolute value)"
                                                          : "a sigma (2% or an absolute value)",
                          true, &rule->width, &rule->relative);
    if (st)
        return st;
    if (!(rule->width > 0))
        return fail(r, t, "a spread must be greater than zero");
    double reach = rule->dist == TB_SPREAD_GAUSS ? TB_SPREAD_GAUSS_CORNER : 1.0;
    if (rule->relative) {
        rule->width /= 100.0;
        if (rule->width * reach >= 1.0)
            return fail(r, t, "%s", rule->dist == TB_SPREAD_GAUSS
                                        ? "a relative sigma must stay below 33.3% (the corners lie at 3 sigma, "
                                          "and a value may not reach zero)"
                                        : "a relative tolerance must stay below 100% (a value may not reach zero)");
    }
    return TB_OK;
}

/* Values up to the end of the card (or up to group=) into the arena. */
static tb_status value_list(reader *r, const char *what, const double **out, size_t *n)
{
    size_t first = r->at;
    while (r->at < r->count && !(r->at + 1 < r->count && r->tok[r->at + 1].kind == TB_TOK_EQUALS)) {
        double ignored = 0;
        tb_status st = number(r, what, false, &ignored, NULL);
        if (st)
            return st;
    }
    *n = r->at - first;
    if (*n == 0)
        return expected(r, what);
    double *v = arena_alloc(r->ckt, *n * sizeof(double));
    if (!v)
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < *n; i++)
        tb_lex_value(r->tok[first + i].ptr, r->tok[first + i].len, &v[i]);
    *out = v;
    return TB_OK;
}

static tb_loc loc_at(const reader *r, const tb_token *t)
{
    return (tb_loc){r->file, t->line, t->col};
}

static const char *intern_token(reader *r, const tb_token *t)
{
    return tb_circuit_intern(r->ckt, t->ptr, t->len);
}

/* A target of .spread or .scan: a WORD, or {NAME} for a parameter (blanks inside the braces
 * ignored). *braced tells which; the name is interned into *out. */
static tb_status target_name(reader *r, const tb_token *t, bool *braced, const char **out)
{
    *braced = t->kind == TB_TOK_EXPR;
    if (!*braced) {
        *out = intern_token(r, t);
        return *out ? TB_OK : TB_ERR_NOMEM;
    }
    const char *s = t->ptr + 1;
    size_t len = t->len >= 2 && t->ptr[t->len - 1] == '}' ? t->len - 2 : 0;
    while (len && (*s == ' ' || *s == '\t')) {
        s++;
        len--;
    }
    while (len && (s[len - 1] == ' ' || s[len - 1] == '\t'))
        len--;
    for (size_t i = 0; i < len; i++)
        if (!(tb_lex_lower(s[i]) >= 'a' && tb_lex_lower(s[i]) <= 'z') && !(s[i] >= '0' && s[i] <= '9') &&
            s[i] != '_' && s[i] != '.' && s[i] != '*' && s[i] != '?')
            len = 0;
    if (len == 0)
        return fail(r, t, "expected a parameter name or pattern in braces ({cl}, {X1.gbw}, {X*.gbw})");
    *out = tb_circuit_intern(r->ckt, s, len);
    return *out ? TB_OK : TB_ERR_NOMEM;
}

static bool is_target(const tb_token *t)
{
    return t->kind == TB_TOK_WORD || t->kind == TB_TOK_EXPR;
}

/* [group = NAME] then the end of the card. */
static tb_status group_tail(reader *r, const char **group)
{
    const tb_token *t = current(r);
    if (!t)
        return TB_OK;
    bool keyed = is_word(t, "group") && r->at + 1 < r->count && r->tok[r->at + 1].kind == TB_TOK_EQUALS;
    if (!keyed)
        return fail(r, t, "unexpected '%.*s' on .spread (only group=NAME may follow the spread)",
                    (int)(t->len < 40 ? t->len : 40), t->ptr);
    r->at += 2;
    const tb_token *name = current(r);
    if (!name || name->kind != TB_TOK_WORD)
        return expected(r, "a group name after 'group='");
    *group = intern_token(r, name);
    if (!*group)
        return TB_ERR_NOMEM;
    r->at++;
    const tb_token *extra = current(r);
    if (extra)
        return fail(r, extra, "unexpected '%.*s' after the group of .spread", (int)(extra->len < 40 ? extra->len : 40),
                    extra->ptr);
    return TB_OK;
}

static tb_status add_rule(reader *r, const tb_spread_rule *rule)
{
    tb_spread_cards *cards = cards_of(r->ckt);
    tb_spread_rule *copy = cards ? arena_alloc(r->ckt, sizeof *copy) : NULL;
    if (!copy)
        return TB_ERR_NOMEM;
    *copy = *rule;
    copy->next = NULL;
    if (cards->last)
        cards->last->next = copy;
    else
        cards->rules = copy;
    cards->last = copy;
    cards->rule_count++;
    return TB_OK;
}

/* spreadcard -> .SPREAD PATTERN {PATTERN} (FLAT TOL | GAUSS SIGMA | PICK VALUE {VALUE}) [GROUP = NAME]
 *   TOL, SIGMA -> value[%] (with %: relative to each element's value) */
static tb_status spread_card(reader *r)
{
    size_t first = r->at;
    while (r->at < r->count && is_target(&r->tok[r->at]) && !is_word(current(r), "flat") &&
           !is_word(current(r), "gauss") && !is_word(current(r), "pick"))
        r->at++;
    if (r->at == first)
        return expected(r, "an element name or pattern (R7, C*, X1.*) or a {parameter}");
    size_t patterns = r->at - first;
    tb_spread_rule rule = {.loc = loc_at(r, r->keyword)};
    const tb_token *kind = current(r);
    if (is_word(kind, "flat"))
        rule.dist = TB_SPREAD_FLAT;
    else if (is_word(kind, "gauss"))
        rule.dist = TB_SPREAD_GAUSS;
    else if (is_word(kind, "pick"))
        rule.dist = TB_SPREAD_PICK;
    else
        return expected(r, "'flat', 'gauss' or 'pick'");
    r->at++;
    tb_status st = rule.dist == TB_SPREAD_PICK ? value_list(r, "a value to pick", &rule.values, &rule.value_count)
                                               : width(r, &rule);
    if (!st)
        st = group_tail(r, &rule.group);
    for (size_t i = first; !st && i < first + patterns; i++) {
        st = target_name(r, &r->tok[i], &rule.param, &rule.pattern);
        rule.pattern_loc = loc_at(r, &r->tok[i]);
        if (!st)
            st = add_rule(r, &rule);
    }
    return st;
}

/* The values of a lin or log range: START STOP N. */
static tb_status range(reader *r, tb_scan_axis *axis)
{
    double lo = 0, hi = 0, n = 0;
    tb_status st = number(r, "a start value", false, &lo, NULL);
    if (!st)
        st = number(r, "a stop value", false, &hi, NULL);
    const tb_token *count = current(r);
    if (!st)
        st = number(r, "a number of values (2 to 1000)", false, &n, NULL);
    if (st)
        return st;
    if (!(n >= 2 && n <= TB_SCAN_MAX_POINTS && n == floor(n)))
        return fail(r, count, "a .scan range takes 2 to %d values", TB_SCAN_MAX_POINTS);
    if (axis->kind == TB_SCAN_LOG && !(lo > 0 && hi > 0))
        return fail(r, &r->tok[r->at - 3], "a log .scan needs start and stop above zero");
    if (lo == hi)
        return fail(r, &r->tok[r->at - 2], "a .scan range needs a stop value other than its start");
    axis->count = (size_t)n;
    double *v = arena_alloc(r->ckt, axis->count * sizeof(double));
    if (!v)
        return TB_ERR_NOMEM;
    for (size_t i = 0; i < axis->count; i++) {
        double t = (double)i / (double)(axis->count - 1);
        v[i] = axis->kind == TB_SCAN_LOG ? lo * pow(hi / lo, t) : lo + (hi - lo) * t;
    }
    v[0] = lo;
    v[axis->count - 1] = hi;
    axis->values = v;
    return TB_OK;
}

/* scancard -> .SCAN ELEMENT (LIST VALUE {VALUE} | LIN START STOP N | LOG START STOP N) */
static tb_status scan_card(reader *r)
{
    tb_spread_cards *cards = cards_of(r->ckt);
    if (!cards)
        return TB_ERR_NOMEM;
    if (cards->axis_count >= TB_SCAN_MAX_AXES)
        return fail(r, r->keyword, "a third .scan card: at most %d elements are scanned together (the first two are "
                    "on lines %d and %d)", TB_SCAN_MAX_AXES, cards->axes[0].loc.line, cards->axes[1].loc.line);
    const tb_token *target = current(r);
    if (!target || !is_target(target))
        return expected(r, "an element name or a {parameter}");
    tb_scan_axis axis = {.loc = loc_at(r, r->keyword), .target_loc = loc_at(r, target), .param = SIZE_MAX};
    tb_status named = target_name(r, target, &axis.braced, &axis.target);
    if (named)
        return named;
    for (size_t a = 0; a < cards->axis_count; a++)
        if (tb_name_eq(cards->axes[a].target, axis.target) && cards->axes[a].braced == axis.braced)
            return fail(r, target, "%s is scanned twice (first on line %d)", cards->axes[a].target,
                        cards->axes[a].loc.line);
    r->at++;
    const tb_token *kind = current(r);
    tb_status st;
    if (is_word(kind, "list")) {
        r->at++;
        axis.kind = TB_SCAN_LIST;
        st = value_list(r, "a value", &axis.values, &axis.count);
        if (!st && axis.count > TB_SCAN_MAX_POINTS)
            st = fail(r, kind, "a .scan list takes at most %d values", TB_SCAN_MAX_POINTS);
    } else if (is_word(kind, "lin") || is_word(kind, "log")) {
        r->at++;
        axis.kind = is_word(kind, "lin") ? TB_SCAN_LIN : TB_SCAN_LOG;
        st = range(r, &axis);
    } else {
        return expected(r, "'list', 'lin' or 'log'");
    }
    const tb_token *extra = current(r);
    if (!st && extra)
        st = fail(r, extra, "unexpected '%.*s' after the values of .scan", (int)(extra->len < 40 ? extra->len : 40),
                  extra->ptr);
    if (!st)
        cards->axes[cards->axis_count++] = axis;
    return st;
}

bool tb_spreadcard_is(const tb_token *keyword)
{
    return tb_lex_is(keyword, ".spread") || tb_lex_is(keyword, ".scan");
}

tb_status tb_spreadcard_read(tb_circuit *ckt, const char *file, const tb_token *keyword, const tb_token *tok,
                             size_t count, tb_card_error *err)
{
    if (!ckt || !keyword || !err || (count > 0 && !tok))
        return TB_ERR_USAGE;
    reader r = {ckt, file, keyword, tok, count, 0, err};
    if (tb_lex_is(keyword, ".spread"))
        return spread_card(&r);
    if (tb_lex_is(keyword, ".scan"))
        return scan_card(&r);
    return TB_ERR_USAGE;
}

/* ---- resolving ----------------------------------------------------------------- */

bool tb_spreadcard_match(const char *pattern, const char *name)
{
    const char *star = NULL;
    const char *resume = NULL;
    while (*name) {
        if (*pattern == '*') {
            star = pattern++;
            resume = name;
        } else if (*pattern == '?' || (*pattern && tb_lex_lower(*pattern) == tb_lex_lower(*name))) {
            pattern++;
            name++;
        } else if (star) {
            pattern = star + 1;
            name = ++resume;
        } else {
            return false;
        }
    }
    while (*pattern == '*')
        pattern++;
    return *pattern == '\0';
}

bool tb_spreadcard_valued(tb_elem_kind kind)
{
    return kind != TB_EL_V && kind != TB_EL_I;
}

static bool must_stay_positive(tb_elem_kind kind)
{
    return kind == TB_EL_R || kind == TB_EL_C || kind == TB_EL_L;
}

bool tb_spreadcard_value_ok(tb_elem_kind kind, double nominal, double v)
{
    if (!isfinite(v))
        return false;
    if (must_stay_positive(kind))
        return v * nominal > 0;
    return kind != TB_EL_K || (v > 0 && v <= 1);
}

const char *tb_spreadcard_param_name(tb_circuit *ckt, size_t q)
{
    tb_pquant *x = &ckt->params->q[q];
    if (x->full)
        return x->full;
    size_t plen = x->prefix ? strlen(x->prefix) + 1 : 0;
    size_t nlen = strlen(x->name);
    char *buf = tb_malloc(plen + nlen + 3, 1);
    if (!buf)
        return NULL;
    buf[0] = '{';
    if (plen) {
        memcpy(buf + 1, x->prefix, plen - 1);
        buf[plen] = '.';
    }
    memcpy(buf + 1 + plen, x->name, nlen);
    buf[1 + plen + nlen] = '}';
    x->label = tb_circuit_intern(ckt, buf, plen + nlen + 2);
    x->full = x->label ? tb_circuit_intern(ckt, buf + 1, plen + nlen) : NULL;
    tb_free(buf);
    return x->full;
}

bool tb_spreadcard_tunable(const tb_circuit *ckt, size_t q)
{
    const tb_params *P = ckt->params;
    return P && q < P->count && P->q[q].name && P->q[q].sets && !P->q[q].fixed;
}

static tb_status resolve_error(const tb_circuit *ckt, tb_diag *diag, const tb_loc *loc, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
static tb_status resolve_error(const tb_circuit *ckt, tb_diag *diag, const tb_loc *loc, const char *fmt, ...)
{
    char msg[300];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg, sizeof msg, fmt, ap);
    va_end(ap);
    size_t len = 0;
    const char *line = tb_circuit_source_line(ckt, loc->file, loc->line, &len);
    tb_status st = tb_diag_add(diag, TB_SEV_ERROR, loc->file, loc->line, loc->col, line, len, "%s", msg);
    return st ? TB_ERR_NOMEM : TB_ERR_INPUT;
}

static bool has_wildcard(const char *pattern)
{
    return strpbrk(pattern, "*?") != NULL;
}

/* Parameter q may be changed by runs; its names are interned for the reports. */
static tb_status check_tunable(tb_circuit *ckt, tb_diag *diag, const tb_loc *loc, const char *card, size_t q)
{
    const char *name = tb_spreadcard_param_name(ckt, q);
    if (!name)
        return TB_ERR_NOMEM;
    const tb_pquant *x = &ckt->params->q[q];
    if (x->fixed)
        return resolve_error(ckt, diag, loc,
                             "parameter '%s' in %s also sets a value that a run cannot change (%s:%d): only element "
                             "values (R, C, L, E, G, F, H, K) follow a parameter in runs, not a source's value, a "
                             "device's key or a directive's number", name, card, x->fixed_loc.file, x->fixed_loc.line);
    if (!x->sets)
        return resolve_error(ckt, diag, loc, "parameter '%s' in %s sets no element value: a run that changes it would "
                             "change nothing", name, card);
    return TB_OK;
}

/* "'C9' in .spread names no element with a value ... (did you mean 'C1'?)": the closest
 * element with a value or parameter (with elements, or params, or both). */
static tb_status no_such(tb_circuit *ckt, tb_diag *diag, const tb_loc *loc, const char *card, const char *name,
                         bool elements, bool params)
{
    tb_suggester sg;
    tb_suggest_init(&sg, name);
    for (size_t e = 0; elements && e < ckt->elem_count; e++)
        if (tb_spreadcard_valued(ckt->elems[e].kind))
            tb_suggest_offer(&sg, ckt->elems[e].name);
    const tb_params *P = ckt->params;
    for (size_t q = 0; params && P && q < P->count; q++) {
        if (!tb_spreadcard_tunable(ckt, q))
            continue;
        const char *full = tb_spreadcard_param_name(ckt, q);
        if (!full)
            return TB_ERR_NOMEM;
        tb_suggest_offer(&sg, full);
    }
    const char *best = has_wildcard(name) ? NULL : tb_suggest_best(&sg);
    bool best_param = best && (!elements || !tb_circuit_find_element(ckt, best, &(size_t){0}));
    char hint[120] = "";
    if (best)
        snprintf(hint, sizeof hint, " (did you mean '%s%s%s'?)", best_param ? "{" : "", best, best_param ? "}" : "");
    if (!elements)
        return resolve_error(ckt, diag, loc, "'{%s}' in %s names no parameter that sets an element value%s", name, card,
                             hint);
    return resolve_error(ckt, diag, loc, "'%s' in %s names no element with a value (R, C, L, E, G, F, H or K)%s%s",
                         name, card, params ? " or parameter" : "", hint);
}

/* A bare name that is a parameter and no element is the parameter; one that is both is an
 * error. *param: the name is a parameter (its quantity in *q). */
static tb_status bare_name(tb_circuit *ckt, tb_diag *diag, const tb_loc *loc, const char *card, const char *name,
                           bool *param, size_t *q)
{
    size_t e = 0;
    bool element = tb_circuit_find_element(ckt, name, &e) && tb_spreadcard_valued(ckt->elems[e].kind);
    *param = !has_wildcard(name) && tb_params_find(ckt, name, q);
    if (element && *param) {
        const char *full = tb_spreadcard_param_name(ckt, *q);
        if (!full)
            return TB_ERR_NOMEM;
        return resolve_error(ckt, diag, loc, "'%s' in %s names both the element %s and the parameter %s: write {%s} "
                             "for the parameter, or rename one of them", name, card, ckt->elems[e].name, full, full);
    }
    if (!element && !*param)
        return no_such(ckt, diag, loc, card, name, true, !has_wildcard(name));
    return TB_OK;
}

/* A rule on parameters: an exact name must be a parameter that runs may change; a pattern
 * must match at least one such parameter. */
static tb_status resolve_param_rule(tb_circuit *ckt, const tb_spread_rule *rule, tb_diag *diag)
{
    size_t q = 0;
    if (!has_wildcard(rule->pattern)) {
        if (!tb_params_find(ckt, rule->pattern, &q))
            return no_such(ckt, diag, &rule->pattern_loc, ".spread", rule->pattern, false, true);
        return check_tunable(ckt, diag, &rule->pattern_loc, ".spread", q);
    }
    size_t matched = 0;
    for (q = 0; q < ckt->params->count; q++) {
        if (!tb_spreadcard_tunable(ckt, q))
            continue;
        const char *full = tb_spreadcard_param_name(ckt, q);
        if (!full)
            return TB_ERR_NOMEM;
        matched += tb_spreadcard_match(rule->pattern, full);
    }
    return matched ? TB_OK : no_such(ckt, diag, &rule->pattern_loc, ".spread", rule->pattern, false, true);
}

/* The lowest value a rule can give element e (its corner below, or the least listed value). */
static double lowest(const tb_spread_rule *rule, double value)
{
    if (rule->dist == TB_SPREAD_PICK) {
        double lo = rule->values[0];
        for (size_t i = 1; i < rule->value_count; i++)
            lo = fmin(lo, rule->values[i]);
        return lo;
    }
    double reach = rule->width * (rule->dist == TB_SPREAD_GAUSS ? TB_SPREAD_GAUSS_CORNER : 1.0);
    return rule->relative ? fabs(value) * (1.0 - reach) : fabs(value) - reach;
}

static tb_status check_groups(const tb_circuit *ckt, const tb_spread_rule *rule, tb_diag *diag);

static tb_status resolve_rule(tb_circuit *ckt, tb_spread_rule *rule, tb_diag *diag)
{
    size_t matched = 0;
    size_t q = 0;
    bool param = false;
    tb_status st = rule->param ? TB_OK
                               : has_wildcard(rule->pattern) ? TB_OK
                               : bare_name(ckt, diag, &rule->pattern_loc, ".spread", rule->pattern, &param, &q);
    if (st)
        return st;
    rule->param = rule->param || param;
    st = rule->param ? resolve_param_rule(ckt, rule, diag) : TB_OK;
    if (st || rule->param)
        return st ? st : check_groups(ckt, rule, diag);
    for (size_t e = 0; e < ckt->elem_count; e++) {
        const tb_element *el = &ckt->elems[e];
        if (!tb_spreadcard_valued(el->kind) || !tb_spreadcard_match(rule->pattern, el->name))
            continue;
        matched++;
        if (must_stay_positive(el->kind) && !(lowest(rule, el->value) > 0))
            return resolve_error(ckt, diag, &rule->pattern_loc,
                                 "this .spread takes %s (%s) to zero or below: a %s must stay positive",
                                 el->name, tb_elem_kind_word(el->kind), tb_elem_kind_word(el->kind));
    }
    if (matched == 0)
        return resolve_error(ckt, diag, &rule->pattern_loc,
                             "'%s' in .spread names no element with a value (R, C, L, E, G, F, H or K)",
                             rule->pattern);
    return check_groups(ckt, rule, diag);
}

/* The cards of one group share one draw: one distribution, lists of one length. */
static tb_status check_groups(const tb_circuit *ckt, const tb_spread_rule *rule, tb_diag *diag)
{
    for (const tb_spread_rule *o = ckt->spread->rules; o != rule; o = o->next) {
        if (!rule->group || !o->group || !tb_name_eq(rule->group, o->group))
            continue;
        if (o->dist != rule->dist)
            return resolve_error(ckt, diag, &rule->loc,
                                 "group %s mixes distributions: one draw moves the whole group, so its cards "
                                 "must all be flat, all gauss or all pick (line %d differs)",
                                 rule->group, o->loc.line);
        if (o->dist == TB_SPREAD_PICK && o->value_count != rule->value_count)
            return resolve_error(ckt, diag, &rule->loc,
                                 "group %s picks from lists of %zu and %zu values: one draw picks the same place "
                                 "in every list of the group (line %d)",
                                 rule->group, rule->value_count, o->value_count, o->loc.line);
    }
    return TB_OK;
}

/* Every value of a parameter's .scan gives every element it sets a value a run can analyse. */
static tb_status check_scan_values(const tb_circuit *ckt, const tb_scan_axis *axis, size_t q, tb_diag *diag)
{
    tb_pplan *pl = NULL;
    tb_status st = tb_pplan_new(ckt->params, &q, 1, &pl);
    size_t n = ckt->elem_count ? ckt->elem_count : 1;
    double *values = st ? NULL : tb_malloc(n, sizeof(double));
    double *work = values ? tb_malloc(tb_pplan_work(pl) + 1, sizeof(double)) : NULL;
    st = st ? st : work ? TB_OK : TB_ERR_NOMEM;
    for (size_t i = 0; !st && i < axis->count; i++) {
        for (size_t e = 0; e < ckt->elem_count; e++)
            values[e] = ckt->elems[e].value;
        bool ok = tb_pplan_apply(pl, &axis->values[i], work, values);
        for (size_t e = 0; ok && e < ckt->elem_count; e++) {
            const tb_element *el = &ckt->elems[e];
            if (!tb_spreadcard_value_ok(el->kind, el->value, values[e]))
                st = resolve_error(ckt, diag, &axis->target_loc, "at %s = %g, %s (%s) would be %g: out of what a run "
                                   "can analyse", ckt->params->q[q].full, axis->values[i], el->name,
                                   tb_elem_kind_word(el->kind), values[e]);
        }
        if (!ok && !st)
            st = resolve_error(ckt, diag, &axis->target_loc, "at %s = %g, an element value that follows it cannot be "
                               "evaluated (a square root of a negative number, a division by zero)",
                               ckt->params->q[q].full, axis->values[i]);
    }
    tb_free(values);
    tb_free(work);
    tb_pplan_free(pl);
    return st;
}

static tb_status resolve_axis(tb_circuit *ckt, tb_scan_axis *axis, tb_diag *diag)
{
    size_t e = 0;
    size_t q = 0;
    bool param = axis->braced;
    if (param && has_wildcard(axis->target))
        return resolve_error(ckt, diag, &axis->target_loc, "a .scan changes one parameter: {%s} is a pattern",
                             axis->target);
    if (param && !tb_params_find(ckt, axis->target, &q))
        return no_such(ckt, diag, &axis->target_loc, ".scan", axis->target, false, true);
    tb_status st = param ? TB_OK : bare_name(ckt, diag, &axis->target_loc, ".scan", axis->target, &param, &q);
    if (!st && param)
        st = check_tunable(ckt, diag, &axis->target_loc, ".scan", q);
    if (!st && param)
        st = check_scan_values(ckt, axis, q, diag);
    if (st || param) {
        axis->param = q;
        return st;
    }
    tb_circuit_find_element(ckt, axis->target, &e);
    axis->elem = e;
    if (must_stay_positive(ckt->elems[e].kind))
        for (size_t i = 0; i < axis->count; i++)
            if (!(axis->values[i] > 0))
                return resolve_error(ckt, diag, &axis->target_loc, "%s is a %s: every value of its .scan must be "
                                     "above zero", ckt->elems[e].name, tb_elem_kind_word(ckt->elems[e].kind));
    return TB_OK;
}

tb_status tb_spreadcard_resolve(tb_circuit *ckt, tb_diag *diag)
{
    if (!ckt)
        return TB_ERR_USAGE;
    tb_params_settle(ckt->params);
    for (size_t q = 0; ckt->params && q < ckt->params->count; q++) /* names for the reports */
        if (tb_spreadcard_tunable(ckt, q) && !tb_spreadcard_param_name(ckt, q))
            return TB_ERR_NOMEM;
    if (!ckt->spread)
        return TB_OK;
    tb_status result = TB_OK;
    for (tb_spread_rule *rule = ckt->spread->rules; rule; rule = rule->next) {
        tb_status st = resolve_rule(ckt, rule, diag);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st)
            result = st;
    }
    for (size_t a = 0; a < ckt->spread->axis_count; a++) {
        tb_status st = resolve_axis(ckt, &ckt->spread->axes[a], diag);
        if (st == TB_ERR_NOMEM)
            return st;
        if (st)
            result = st;
    }
    return result;
}
