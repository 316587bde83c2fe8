/* tests/test_pictures.c: the SVG pictures and the HTML page: complete documents, every value finite */
#include "testutil.h"

#include <stdlib.h>

static tb_result *analyse_file(const char *path, tb_circuit **ckt)
{
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_circuit_read(path, diag, ckt), TB_OK);
    assert_int_equal(tb_analyse(*ckt, NULL, diag, &res), TB_OK);
    tb_diag_free(diag);
    return res;
}

/* The document a writer produced, NUL-terminated (free it). */
typedef struct {
    char *text;
    size_t len;
} doc;

static tb_status picture(const tb_circuit *ckt, const tb_result *res, tb_picture_kind kind, size_t l, size_t port,
                         doc *d)
{
    FILE *out = open_memstream(&d->text, &d->len);
    assert_non_null(out);
    tb_status st = tb_report_svg(ckt, res, kind, l, port, out);
    fclose(out);
    return st;
}

static bool is_word_char(char c)
{
    return (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '_';
}

/* No number in the document is NaN or infinite (printf writes one as "nan" or "inf", a
 * word of its own: "A_inf" and "infinite" are not). */
static void assert_finite(const char *text)
{
    for (const char *p = text; *p; p++) {
        bool word_start = p == text || !is_word_char(p[-1]);
        bool bad = (strncmp(p, "nan", 3) == 0 || strncmp(p, "inf", 3) == 0) && !is_word_char(p[3]);
        if (word_start && bad)
            fail_msg("a non-finite number in the output near: %.40s", p > text + 10 ? p - 10 : text);
    }
}

static void assert_svg(const char *text)
{
    assert_non_null(strstr(text, "<svg xmlns=\"http://www.w3.org/2000/svg\""));
    assert_non_null(strstr(text, "</svg>\n"));
    assert_non_null(strstr(text, "<polyline"));
    assert_finite(text);
}

/* Every picture of a netlist with .ideal, two .zport and a .break. */
static void test_pictures_all_kinds(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("tests/fb/noninverting_x20.net", &ckt);
    for (int k = 0; k < TB_PIC_COUNT; k++) {
        for (size_t port = 0; port < (k == TB_PIC_IMPEDANCE ? tb_zport_count(res) : 1); port++) {
            doc d = {0};
            assert_int_equal(picture(ckt, res, (tb_picture_kind)k, 0, port, &d), TB_OK);
            assert_svg(d.text);
            free(d.text);
        }
    }
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* What a netlist does not have is TB_ERR_NOT_FOUND; misuse is TB_ERR_USAGE. */
static void test_pictures_absent(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("netlists/loop_only_integrating_buffer.net", &ckt);
    doc d = {0};
    assert_int_equal(picture(ckt, res, TB_PIC_BREAKDOWN, 0, 0, &d), TB_ERR_NOT_FOUND);
    free(d.text);
    d = (doc){0};
    assert_int_equal(picture(ckt, res, TB_PIC_IMPEDANCE, 0, 0, &d), TB_ERR_NOT_FOUND);
    free(d.text);
    d = (doc){0};
    assert_int_equal(picture(ckt, res, TB_PIC_BODE, 7, 0, &d), TB_ERR_USAGE);
    free(d.text);
    d = (doc){0};
    assert_int_equal(picture(ckt, res, TB_PIC_BODE, 0, 0, &d), TB_OK);
    assert_svg(d.text);
    free(d.text);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

/* A name with markup characters and a broken byte stays inside its text element. */
static void test_pictures_escape(void **state)
{
    (void)state;
    char *text = NULL;
    size_t len = 0;
    tb_circuit *ckt = tu_parse("a <b> & \"c\" \x01\xff title\nV1 in 0 AC 1\nR1 in x 1k\nE1 y 0 0 x 1000\n"
                               "R2 y x 10k\n.loop E1\n.io V1 v(y)\n.ac dec 10 1 1meg\n.end\n");
    tb_diag *diag = tb_diag_new();
    tb_result *res = NULL;
    assert_int_equal(tb_analyse(ckt, NULL, diag, &res), TB_OK);
    FILE *out = open_memstream(&text, &len);
    assert_int_equal(tb_report_html(ckt, res, out), TB_OK);
    fclose(out);
    /* the control character as U+FFFD, the stray byte 0xff as its Latin-1 character U+00FF */
    assert_non_null(strstr(text, "a &lt;b&gt; &amp; &quot;c&quot; \xef\xbf\xbd\xc3\xbf title"));
    assert_null(strstr(text, "<b>"));
    assert_finite(text);
    free(text);
    tb_result_free(res);
    tb_diag_free(diag);
    tb_circuit_free(ckt);
}

/* The HTML page: the verdict before the tables, every picture inline, the caution last. */
static void test_pictures_html_page(void **state)
{
    (void)state;
    tb_circuit *ckt = NULL;
    tb_result *res = analyse_file("tests/fb/noninverting_x20.net", &ckt);
    char *text = NULL;
    size_t len = 0;
    FILE *out = open_memstream(&text, &len);
    assert_int_equal(tb_report_html(ckt, res, out), TB_OK);
    fclose(out);
    const char *verdict = strstr(text, "Verdict: stable");
    const char *table = strstr(text, "<table>");
    const char *caution = strstr(text, "small-signal, linear analysis");
    assert_non_null(verdict);
    assert_non_null(table);
    assert_non_null(caution);
    assert_true(verdict < table && table < caution);
    size_t pictures = 0;
    for (const char *p = text; (p = strstr(p, "<svg xmlns")) != NULL; p++)
        pictures++;
    assert_int_equal(pictures, 6); /* Bode, Nyquist, breakdown, two ports, step */
    assert_null(strstr(text, "<script"));
    assert_null(strstr(text, "http://www.w3.org/2000/svg\" href"));
    assert_finite(text);
    free(text);
    tb_result_free(res);
    tb_circuit_free(ckt);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pictures_all_kinds),
        cmocka_unit_test(test_pictures_absent),
        cmocka_unit_test(test_pictures_escape),
        cmocka_unit_test(test_pictures_html_page),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
