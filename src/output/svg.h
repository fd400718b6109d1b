/* svg.h - the page's plots, drawn as inline SVG by the library itself: no
 * plotting dependency, and the same fits give the same bytes (coordinates
 * are printed with a fixed number of decimals).
 *
 * One kind of chart serves every plot of the page (forest plot, effect
 * plots, changes between fits): a dot chart with intervals, one row per
 * estimate, the value on a horizontal axis (log or linear), rows grouped
 * under headings.  Marks differ by shape and line style as well as colour
 * (Okabe-Ito palette), so the chart reads in grey print and for readers
 * with a colour-vision deficiency.  Each chart comes with its text
 * alternatives: <title> and <desc>, an aria-label, and the numbers as a
 * table in a <details> element. */
#ifndef MR_SVG_H
#define MR_SVG_H

#include <stddef.h>

#include "common/strbuf.h"

typedef enum mr__svg_mark {
    MR__MARK_ESTIMATE,  /* filled circle, solid interval */
    MR__MARK_FLAGGED,   /* filled square, solid interval (e.g. a change whose interval excludes the reference) */
    MR__MARK_PLAIN,     /* open circle, dashed interval (e.g. a change whose interval includes it) */
    MR__MARK_REFERENCE, /* open diamond at the reference value, the word "reference" */
    MR__MARK_NONE,      /* no estimate (aliased, not estimable): the row says so */
    MR__MARK_HEADING    /* a group's heading: bold label, no mark */
} mr__svg_mark;

typedef struct mr__svg_row {
    const char *label; /* the library's text (escaped when written) */
    double est, lo, hi;
    mr__svg_mark mark;
} mr__svg_row;

typedef struct mr__svg_chart {
    const char *id;      /* unique in the page: [a-z0-9-] */
    const char *title;   /* plain text, escaped when written */
    const char *desc;    /* what is drawn, for the <desc> and the caption */
    const char *axis;    /* the value axis' label, with its unit */
    int log_axis;        /* 1: log scale (ratios, rates) */
    double reference;    /* a dashed line at this value; NaN for none */
    int digits;          /* of the numbers in the table and beside the rows */
    const mr__svg_row *row;
    size_t nrows;
    const char *legend[MR__MARK_HEADING]; /* what each mark means here; NULL: not in the legend */
} mr__svg_chart;

/* Appends <figure> with the SVG, a caption, a legend of the marks used
 * and the data table. */
void mr__svg_dot_chart(mr__strbuf *b, const mr__svg_chart *c);

#endif
