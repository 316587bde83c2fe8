/* src/plot.h: a small SVG plotting core: axes, grid, engineering ticks, series, markers, legend */
#ifndef TB_PLOT_H
#define TB_PLOT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

/* Series styles: each differs from the others in colour and in dash pattern, so the
 * curves stay apart in greyscale print and for colour-blind readers. */
typedef enum {
    TB_STYLE_MAIN = 0, /* dark blue, solid */
    TB_STYLE_SECOND,   /* orange, long dashes */
    TB_STYLE_THIRD,    /* grey, dots */
    TB_STYLE_FOURTH,   /* purple, dash-dot */
    TB_STYLE_GUIDE,    /* thin grey, short dashes: reference lines (0 dB, -180 deg, unit circle) */
    TB_STYLE_MARGIN,   /* thick dark red, solid: a margin drawn as the distance to its limit */
    TB_STYLE_COUNT
} tb_style;

/* One plot panel: a data window mapped onto a rectangle of the picture. */
typedef struct {
    double x0, x1;   /* data window (x0 < x1; positive when log_x) */
    double y0, y1;   /* y0 < y1 (positive when log_y) */
    bool log_x;
    bool log_y;
    double left, top, width, height; /* the panel's plotting rectangle, in picture units */
} tb_panel;

/* A picture being written: the SVG document and its legend entries. */
typedef struct {
    FILE *out;
    double width, height;
    int legend_count;
    double legend_x, legend_y; /* where the next legend entry goes (outside every panel) */
} tb_picture;

/* Starts an SVG document of width x height with a title line at the top (escaped). */
void tb_plot_begin(tb_picture *pic, FILE *out, double width, double height, const char *title);
/* Ends the document. true when every write succeeded. */
bool tb_plot_end(tb_picture *pic);

/* Frame, grid lines (every decade on a log axis, nice steps on a linear one), tick labels
 * in engineering notation with the unit on the axis labels. */
void tb_plot_axes(tb_picture *pic, const tb_panel *p, const char *xlabel, const char *ylabel);

/* A polyline through the points whose present[i] is true (present NULL: all), broken
 * where a point is absent or outside a log axis' range; clipped to the panel. */
void tb_plot_series(tb_picture *pic, const tb_panel *p, const double *x, const double *y, const bool *present,
                    size_t n, tb_style style);
/* A straight line between two data points (a guide), clipped to the panel. */
void tb_plot_line(tb_picture *pic, const tb_panel *p, double xa, double ya, double xb, double yb, tb_style style);
/* A marked point with a short label beside it (escaped). */
void tb_plot_marker(tb_picture *pic, const tb_panel *p, double x, double y, const char *label);
/* A short label at a data point, without a marker, centred on it (escaped). */
void tb_plot_label(tb_picture *pic, const tb_panel *p, double x, double y, const char *text);
/* A circle of radius r (data units) around (x, y), for a linear panel. */
void tb_plot_circle(tb_picture *pic, const tb_panel *p, double x, double y, double r, tb_style style);
/* A legend entry, placed in the legend column to the right of the panels. */
void tb_plot_legend(tb_picture *pic, tb_style style, const char *text);
/* Free text at picture coordinates (escaped). */
void tb_plot_text(tb_picture *pic, double x, double y, const char *text);

/* A value with an SI prefix and unit for tick labels: "100k", "1.5M" ("" unit for none). */
const char *tb_plot_eng(double v, const char *unit, char *buf, size_t size);

/* Writes s with XML's special characters escaped, control characters replaced by U+FFFD
 * and each byte that is not UTF-8 read as its Latin-1 character (as every writer reads it,
 * tb_report_char), so any name from a netlist is safe inside SVG or HTML. */
void tb_plot_escape(FILE *out, const char *s);

#endif
