/* svg_axis.h - what the page's charts (svg.c's dot chart, svg_xy.c's x-y
 * chart) share: an axis, a value range mapped onto a run of pixels,
 * linear or log, with its tick values (1, 2 or 5 times a power of ten);
 * the figure's opening (<svg> with its title, desc and aria-label) and
 * its caption. */
#ifndef MR_SVG_AXIS_H
#define MR_SVG_AXIS_H

#include <stddef.h>

#include "common/strbuf.h"

typedef struct mr__svg_axis {
    int log;
    double lo, hi; /* on the drawing scale (log10 for a log axis) */
    double x0, x1; /* the pixels of lo and hi (x1 < x0 for a vertical axis) */
} mr__svg_axis;

#define MR__SVG_MAX_TICKS 16

/* Whether v can be drawn on the axis (finite; positive on a log axis). */
int mr__svg_drawable(const mr__svg_axis *a, double v);
/* The pixel of v, clamped to the axis (off the scale: at its edge). */
double mr__svg_at(const mr__svg_axis *a, double v);
/* Widens [*lo, *hi] (drawing scale; start at +inf, -inf) to take v. */
void mr__svg_widen(const mr__svg_axis *a, double v, double *lo, double *hi);
/* Sets the axis range from [lo, hi] (drawing scale), padded by 4 %; an
 * empty or one-point range is opened around its value. */
void mr__svg_set_range(mr__svg_axis *a, double lo, double hi);
/* The tick values (at most MR__SVG_MAX_TICKS), on the value scale. */
size_t mr__svg_ticks(const mr__svg_axis *a, double *t);

/* A tick's value: 3 significant digits, whole numbers up to 1e9 in full. */
void mr__svg_tick_label(mr__strbuf *b, double v);
/* <figure id> and <svg> with its text alternatives (title, desc: plain
 * text, escaped here). */
void mr__svg_figure_open(mr__strbuf *b, const char *id, double width, double height, const char *title,
                         const char *desc);
/* </svg> and the <figcaption>: the title in bold, then desc. */
void mr__svg_figure_caption(mr__strbuf *b, const char *title, const char *desc);

#endif
