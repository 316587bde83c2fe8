/* src/expr.h: arithmetic expressions of netlist values ({...} and .param), evaluated to a double */
#ifndef TB_EXPR_H
#define TB_EXPR_H

#include <stdbool.h>
#include <stddef.h>

#include "tbeta.h"

/* Deepest nesting of parentheses, unary signs and powers an expression may have. */
#define TB_EXPR_MAX_DEPTH 100

/* Resolves the parameter name[0..len), which starts at byte `offset` of the
 * expression text: TB_OK with *value, or an error the callback has reported
 * itself (TB_ERR_INPUT, TB_ERR_NOMEM). */
typedef tb_status (*tb_expr_lookup)(void *ctx, const char *name, size_t len, size_t offset,
                                    double *value);

/* Why an evaluation failed: message is empty when the lookup callback has
 * reported the error already. offset is the byte of the text it concerns. */
typedef struct {
    char message[160];
    size_t offset;
} tb_expr_error;

/* Evaluates text[0..len):
 *   expr    -> term {(+|-) term}
 *   term    -> unary {(*|/) unary}
 *   unary   -> (+|-) unary | power
 *   power   -> primary [^ unary]             (right-associative: 2^3^2 = 2^9; -2^2 = -4)
 *   primary -> number | PI | NAME | FUNC ( expr {, expr} ) | ( expr )
 *   number  -> an engineering value as tb_lex_value reads it (1k, 2.2u, 1e-3, 10kOhm)
 *   FUNC    -> sqrt exp log log10 abs (one argument) | min max (two or more)
 * Names and functions ignore case; log is the natural logarithm. On success
 * *out is finite. Errors: TB_ERR_INPUT (err filled), or what lookup returned. */
tb_status tb_expr_eval(const char *text, size_t len, tb_expr_lookup lookup, void *ctx,
                       double *out, tb_expr_error *err);

/* true when name[0..len) is a function or constant of the expression
 * language (it cannot be a parameter name). */
bool tb_expr_is_builtin(const char *name, size_t len);

#endif
