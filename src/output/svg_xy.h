/* svg_xy.h - the page's x-y chart (calibration, funnel and effect curves):
 * points with optional vertical intervals, lines, a shaded band, a
 * reference line; both axes labelled, linear or log.  As the dot chart
 * (svg.h): marks differ by shape and line style as well as colour
 * (Okabe-Ito), and each chart has its text alternatives: <title>, <desc>,
 * an aria-label and the numbers as a table the caller builds. */
#ifndef MR_SVG_XY_H
#define MR_SVG_XY_H

#include <stddef.h>

#include "common/strbuf.h"

typedef struct mr__svg_point {
    double x, y, lo, hi; /* lo, hi: a vertical interval, NaN for none */
    int flagged;         /* a filled square in vermillion, not a blue circle */
} mr__svg_point;

typedef enum mr__svg_line_style {
    MR__LINE_CURVE,  /* solid blue, thick: an estimate */
    MR__LINE_DASHED, /* dashed black: e.g. inner control limits */
    MR__LINE_DOTTED, /* dotted black, thicker: e.g. outer control limits */
    MR__LINE_THIN    /* thin solid grey: e.g. the line y = x */
} mr__svg_line_style;

typedef struct mr__svg_line {
    const double *x, *y; /* n points; a NaN breaks the line */
    size_t n;
    mr__svg_line_style style;
} mr__svg_line;

typedef struct mr__svg_xy {
    const char *id;             /* unique in the page: [a-z0-9-] */
    const char *title, *desc;   /* plain text, escaped when written */
    const char *xaxis, *yaxis;  /* the axes' labels with their units */
    int xlog, ylog;
    const mr__svg_point *point;
    size_t npoints;
    const mr__svg_line *line;
    size_t nlines;
    const double *band_x, *band_lo, *band_hi; /* a shaded interval along x (nband points) */
    size_t nband;
    double yref;                /* a dashed horizontal line at this y; NaN for none */
    const char *legend;         /* plain text after the keys, or NULL */
    const char *table;          /* the numbers: HTML (a <table>), already escaped */
} mr__svg_xy;

/* Appends <figure> with the SVG, a caption, the legend and the table. */
void mr__svg_xy_chart(mr__strbuf *b, const mr__svg_xy *c);

#endif
