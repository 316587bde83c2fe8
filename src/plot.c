/* src/plot.c: a small SVG plotting core: axes, grid, engineering ticks, series, markers, legend */
#include "plot.h"

#include <math.h>
#include <stdint.h>
#include <string.h>

#include "report.h"

static const struct {
    const char *color;
    const char *dash; /* stroke-dasharray, or NULL for solid */
    double width;
} styles[TB_STYLE_COUNT] = {
    [TB_STYLE_MAIN] = {"#1f3b73", NULL, 2.0},
    [TB_STYLE_SECOND] = {"#d0661b", "9 4", 2.0},
    [TB_STYLE_THIRD] = {"#555555", "2 3", 2.2},
    [TB_STYLE_FOURTH] = {"#7a3d9a", "8 3 2 3", 2.0},
    [TB_STYLE_GUIDE] = {"#8c8c8c", "4 3", 1.0},
    [TB_STYLE_MARGIN] = {"#b3001b", NULL, 3.0},
};

#define FONT "font-family=\"sans-serif\" font-size=\"12\""
#define LEGEND_WIDTH 210.0

static void stroke(FILE *out, tb_style s)
{
    fprintf(out, " fill=\"none\" stroke=\"%s\" stroke-width=\"%.1f\"", styles[s].color, styles[s].width);
    if (styles[s].dash)
        fprintf(out, " stroke-dasharray=\"%s\"", styles[s].dash);
}

void tb_plot_escape(FILE *out, const char *s)
{
    uint32_t cp = 0;
    for (size_t n; (n = tb_report_char(s, &cp)) != 0; s += n) {
        char utf8[4];
        if (cp < 0x20 || cp == 0x7f)
            fputs("\xef\xbf\xbd", out); /* U+FFFD for a control character */
        else if (cp == '<')
            fputs("&lt;", out);
        else if (cp == '>')
            fputs("&gt;", out);
        else if (cp == '&')
            fputs("&amp;", out);
        else if (cp == '"')
            fputs("&quot;", out);
        else
            fwrite(utf8, 1, tb_report_utf8(cp, utf8), out); /* a stray byte: its Latin-1 character */
    }
}

const char *tb_plot_eng(double v, const char *unit, char *buf, size_t size)
{
    static const char *const up[] = {"", "k", "M", "G", "T", "P"};
    static const char *const down[] = {"", "m", "u", "n", "p", "f"};
    double a = fabs(v);
    int e = 0;
    if (a >= 1000.0)
        while (a >= 1000.0 && e < 5) {
            a /= 1000.0;
            e++;
        }
    else if (a > 0 && a < 1.0)
        while (a < 1.0 && e > -5) {
            a *= 1000.0;
            e--;
        }
    snprintf(buf, size, "%s%.3g%s%s", v < 0 ? "-" : "", a, e >= 0 ? up[e] : down[-e], unit);
    return buf;
}

void tb_plot_begin(tb_picture *pic, FILE *out, double width, double height, const char *title)
{
    *pic = (tb_picture){.out = out, .width = width, .height = height, .legend_x = width - LEGEND_WIDTH + 10,
                        .legend_y = 60};
    fprintf(out, "<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"%.0f\" height=\"%.0f\" viewBox=\"0 0 %.0f %.0f\">\n",
            width, height, width, height);
    fprintf(out, "<rect x=\"0\" y=\"0\" width=\"%.0f\" height=\"%.0f\" fill=\"#ffffff\"/>\n", width, height);
    fputs("<text x=\"12\" y=\"22\" " FONT " font-weight=\"bold\">", out);
    tb_plot_escape(out, title ? title : "");
    fputs("</text>\n", out);
}

bool tb_plot_end(tb_picture *pic)
{
    fputs("</svg>\n", pic->out);
    return !ferror(pic->out);
}

/* Picture coordinates of a data point; false when it cannot be placed (log of <= 0, not finite). */
static bool place(const tb_panel *p, double x, double y, double *px, double *py)
{
    if (!isfinite(x) || !isfinite(y) || (p->log_x && !(x > 0)) || (p->log_y && !(y > 0)))
        return false;
    double fx = p->log_x ? (log10(x) - log10(p->x0)) / (log10(p->x1) - log10(p->x0)) : (x - p->x0) / (p->x1 - p->x0);
    double fy = p->log_y ? (log10(y) - log10(p->y0)) / (log10(p->y1) - log10(p->y0)) : (y - p->y0) / (p->y1 - p->y0);
    *px = p->left + fx * p->width;
    *py = p->top + (1.0 - fy) * p->height;
    return true;
}

/* A step for about `want` linear ticks over span: 1, 2 or 5 times a power of ten. */
static double nice_step(double span, int want)
{
    double raw = span / want;
    double mag = pow(10.0, floor(log10(raw)));
    double f = raw / mag;
    return (f < 1.5 ? 1 : f < 3.5 ? 2 : f < 7.5 ? 5 : 10) * mag;
}

static void grid_line(FILE *out, double xa, double ya, double xb, double yb)
{
    fprintf(out, "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\" stroke=\"#e3e3e3\" stroke-width=\"1\"/>\n", xa,
            ya, xb, yb);
}

static void label(FILE *out, double x, double y, const char *anchor, const char *text)
{
    fprintf(out, "<text x=\"%.2f\" y=\"%.2f\" " FONT " text-anchor=\"%s\">", x, y, anchor);
    tb_plot_escape(out, text);
    fputs("</text>\n", out);
}

/* Tick values along one axis: decades on a log axis, nice steps on a linear one. */
static void ticks(FILE *out, const tb_panel *p, bool x_axis, const char *unit)
{
    double lo = x_axis ? p->x0 : p->y0, hi = x_axis ? p->x1 : p->y1;
    bool log_axis = x_axis ? p->log_x : p->log_y;
    double step = log_axis ? 1.0 : nice_step(hi - lo, x_axis ? 8 : 6);
    double a = log_axis ? ceil(log10(lo) - 1e-9) : ceil(lo / step - 1e-9) * step;
    double b = log_axis ? log10(hi) + 1e-9 : hi + 1e-9 * step;
    int count = 0;
    for (double t = a; t <= b && count < 40; t += step, count++) {
        double v = log_axis ? pow(10.0, t) : (fabs(t) < 1e-9 * step ? 0.0 : t);
        double px = 0, py = 0;
        if (!place(p, x_axis ? v : (p->log_x ? p->x0 : p->x0), x_axis ? (p->log_y ? p->y0 : p->y0) : v, &px, &py))
            continue;
        char buf[48];
        tb_plot_eng(v, unit, buf, sizeof buf);
        if (x_axis) {
            grid_line(out, px, p->top, px, p->top + p->height);
            label(out, px, p->top + p->height + 16, "middle", buf);
        } else {
            grid_line(out, p->left, py, p->left + p->width, py);
            label(out, p->left - 6, py + 4, "end", buf);
        }
    }
}

void tb_plot_axes(tb_picture *pic, const tb_panel *p, const char *xlabel, const char *ylabel)
{
    FILE *out = pic->out;
    ticks(out, p, true, "");
    ticks(out, p, false, "");
    fprintf(out, "<rect x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\" fill=\"none\" stroke=\"#333333\"/>\n",
            p->left, p->top, p->width, p->height);
    if (xlabel)
        label(out, p->left + p->width / 2, p->top + p->height + 34, "middle", xlabel);
    if (ylabel) {
        fprintf(out, "<text transform=\"translate(%.2f %.2f) rotate(-90)\" " FONT " text-anchor=\"middle\">",
                p->left - 52, p->top + p->height / 2);
        tb_plot_escape(out, ylabel);
        fputs("</text>\n", out);
    }
}

static void clip_open(FILE *out, const tb_panel *p)
{
    fprintf(out, "<svg x=\"%.2f\" y=\"%.2f\" width=\"%.2f\" height=\"%.2f\" viewBox=\"%.2f %.2f %.2f %.2f\" overflow=\"hidden\">\n",
            p->left, p->top, p->width, p->height, p->left, p->top, p->width, p->height);
}

void tb_plot_series(tb_picture *pic, const tb_panel *p, const double *x, const double *y, const bool *present,
                    size_t n, tb_style style)
{
    FILE *out = pic->out;
    clip_open(out, p);
    bool open = false;
    for (size_t i = 0; i < n; i++) {
        double px = 0, py = 0;
        bool ok = (!present || present[i]) && place(p, x[i], y[i], &px, &py);
        /* keep far-away points finite and near the panel: the clip hides them */
        if (ok) {
            px = fmin(fmax(px, p->left - p->width), p->left + 2 * p->width);
            py = fmin(fmax(py, p->top - p->height), p->top + 2 * p->height);
        }
        if (ok && !open) {
            fputs("<polyline points=\"", out);
            open = true;
        }
        if (ok)
            fprintf(out, "%.2f,%.2f ", px, py);
        if (!ok && open) {
            fputs("\"", out);
            stroke(out, style);
            fputs("/>\n", out);
            open = false;
        }
    }
    if (open) {
        fputs("\"", out);
        stroke(out, style);
        fputs("/>\n", out);
    }
    fputs("</svg>\n", out);
}

void tb_plot_line(tb_picture *pic, const tb_panel *p, double xa, double ya, double xb, double yb, tb_style style)
{
    double x[2] = {xa, xb}, y[2] = {ya, yb};
    tb_plot_series(pic, p, x, y, NULL, 2, style);
}

void tb_plot_marker(tb_picture *pic, const tb_panel *p, double x, double y, const char *text)
{
    double px = 0, py = 0;
    if (!place(p, x, y, &px, &py) || px < p->left - 1 || px > p->left + p->width + 1 || py < p->top - 1 ||
        py > p->top + p->height + 1)
        return;
    fprintf(pic->out, "<circle cx=\"%.2f\" cy=\"%.2f\" r=\"4\" fill=\"#ffffff\" stroke=\"#b3001b\" stroke-width=\"2\"/>\n",
            px, py);
    if (text) {
        bool right = px < p->left + p->width * 0.7;
        fprintf(pic->out, "<text x=\"%.2f\" y=\"%.2f\" " FONT " fill=\"#b3001b\" text-anchor=\"%s\">", right ? px + 7 : px - 7,
                py - 7, right ? "start" : "end");
        tb_plot_escape(pic->out, text);
        fputs("</text>\n", pic->out);
    }
}

void tb_plot_label(tb_picture *pic, const tb_panel *p, double x, double y, const char *text)
{
    double px = 0, py = 0;
    if (!place(p, x, y, &px, &py) || px < p->left || px > p->left + p->width || py < p->top ||
        py > p->top + p->height)
        return;
    fprintf(pic->out, "<text x=\"%.2f\" y=\"%.2f\" " FONT " fill=\"#666666\" text-anchor=\"middle\">", px, py);
    tb_plot_escape(pic->out, text);
    fputs("</text>\n", pic->out);
}

void tb_plot_circle(tb_picture *pic, const tb_panel *p, double x, double y, double r, tb_style style)
{
    double cx = 0, cy = 0;
    if (!place(p, x, y, &cx, &cy) || !(r > 0) || !isfinite(r))
        return;
    clip_open(pic->out, p);
    fprintf(pic->out, "<ellipse cx=\"%.2f\" cy=\"%.2f\" rx=\"%.2f\" ry=\"%.2f\"", cx, cy, r / (p->x1 - p->x0) * p->width,
            r / (p->y1 - p->y0) * p->height);
    stroke(pic->out, style);
    fputs("/>\n</svg>\n", pic->out);
}

void tb_plot_legend(tb_picture *pic, tb_style style, const char *text)
{
    FILE *out = pic->out;
    double x = pic->legend_x, y = pic->legend_y;
    fprintf(out, "<line x1=\"%.2f\" y1=\"%.2f\" x2=\"%.2f\" y2=\"%.2f\"", x, y - 4, x + 34, y - 4);
    stroke(out, style);
    fputs("/>\n", out);
    label(out, x + 42, y, "start", text);
    pic->legend_y += 20;
    pic->legend_count++;
}

void tb_plot_text(tb_picture *pic, double x, double y, const char *text)
{
    label(pic->out, x, y, "start", text);
}
