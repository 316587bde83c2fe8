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
    while (r->at < r->count && r->tok[r->at].kind == TB_TOK_WORD && !is_word(current(r), "flat") &&
           !is_word(current(r), "gauss") && !is_word(current(r), "pick"))
        r->at++;
    if (r->at == first)
        return expected(r, "an element name or pattern (R7, C*, X1.*)");
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
        rule.pattern = intern_token(r, &r->tok[i]);
        rule.pattern_loc = loc_at(r, &r->tok[i]);
        st = rule.pattern ? add_rule(r, &rule) : TB_ERR_NOMEM;
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
    if (!target || target->kind != TB_TOK_WORD)
        return expected(r, "an element name");
    tb_scan_axis axis = {.loc = loc_at(r, r->keyword), .target_loc = loc_at(r, target)};
    for (size_t a = 0; a < cards->axis_count; a++)
        if (tb_name_eq_n(cards->axes[a].target, target->ptr, target->len) &&
            strlen(cards->axes[a].target) == target->len)
            return fail(r, target, "%s is scanned twice (first on line %d)", cards->axes[a].target,
                        cards->axes[a].loc.line);
    axis.target = intern_token(r, target);
    if (!axis.target)
        return TB_ERR_NOMEM;
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

static tb_status resolve_rule(const tb_circuit *ckt, const tb_spread_rule *rule, tb_diag *diag)
{
    size_t matched = 0;
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

static tb_status resolve_axis(const tb_circuit *ckt, tb_scan_axis *axis, tb_diag *diag)
{
    size_t e = 0;
    if (!tb_circuit_find_element(ckt, axis->target, &e) || !tb_spreadcard_valued(ckt->elems[e].kind))
        return resolve_error(ckt, diag, &axis->target_loc,
                             "'%s' in .scan names no element with a value (R, C, L, E, G, F, H or K)", axis->target);
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
    if (!ckt->spread)
        return TB_OK;
    tb_status result = TB_OK;
    for (const tb_spread_rule *rule = ckt->spread->rules; rule; rule = rule->next) {
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
