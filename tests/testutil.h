/* tests/testutil.h: shared helpers of the cmocka test programs */
#ifndef TB_TESTUTIL_H
#define TB_TESTUTIL_H

#include <complex.h>
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "tbeta.h"

#define TU_PI 3.14159265358979323846264338327950288

/* Two resistances in parallel. */
static inline double tu_par(double a, double b)
{
    return a * b / (a + b);
}

/* Prints every diagnostic of diag as a test error message. */
static inline void tu_print_diags(const tb_diag *diag)
{
    char buf[1024];
    for (size_t i = 0; i < tb_diag_count(diag); i++) {
        tb_diag_format(diag, i, buf, sizeof buf);
        print_error("%s", buf);
    }
}

/* Parses text as a netlist called "t.net"; fails the test (printing the
 * diagnostics) unless it parses. */
static inline tb_circuit *tu_parse(const char *text)
{
    tb_diag *diag = tb_diag_new();
    tb_circuit *ckt = NULL;
    tb_status st = tb_circuit_parse(text, strlen(text), "t.net", diag, &ckt);
    if (st != TB_OK)
        tu_print_diags(diag);
    tb_diag_free(diag);
    assert_int_equal(st, TB_OK);
    return ckt;
}

/* Parses and analyses text; fails the test unless both succeed. */
/* tu_parse of a base netlist followed by extra cards (both text; 8 KiB in all at most). */
static inline tb_circuit *tu_parse_cards(const char *base, const char *cards)
{
    char text[8192];
    snprintf(text, sizeof text, "%s%s", base, cards);
    return tu_parse(text);
}

static inline tb_result *tu_analyse(const char *text, tb_circuit **ckt_out)
{
    tb_circuit *ckt = tu_parse(text);
    tb_options opt;
    tb_options_init(&opt);
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    tb_status st = tb_analyse(ckt, &opt, diag, &res);
    if (st != TB_OK)
        tu_print_diags(diag);
    tb_diag_free(diag);
    assert_int_equal(st, TB_OK);
    *ckt_out = ckt;
    return res;
}

/* |got - want| <= rel * |want| (or <= rel when want is 0). */
#define tu_close(got, want, rel) tu_close_at((got), (want), (rel), __FILE__, __LINE__)
static inline void tu_close_at(double complex got, double complex want, double rel,
                               const char *file, int line)
{
    double scale = cabs(want) > 0 ? cabs(want) : 1.0;
    double err = cabs(got - want) / scale;
    if (!(err <= rel)) {
        print_error("%s:%d: got %.15g%+.15gi, want %.15g%+.15gi (rel err %.3g > %.3g)\n", file,
                    line, creal(got), cimag(got), creal(want), cimag(want), err, rel);
        fail();
    }
}

#endif
