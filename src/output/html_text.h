/* html_text.h - text and numbers as they go into the HTML page and its
 * SVG plots (html.c, svg.c, html_plots.c share them).
 *
 * The library's text is bytes as they came (column names and levels of
 * any encoding).  It goes into the page through one escape: the JSON's
 * (json_text.h: a byte that is not part of well-formed UTF-8 becomes the
 * visible characters \xHH, a backslash two backslashes), then control
 * characters (C0, DEL, C1), which HTML and XML do not allow as text, as
 * \xHH of their bytes too, and & < > " ' as character references.  So a
 * level shows as the same characters in the page as in the JSON. */
#ifndef MR_HTML_TEXT_H
#define MR_HTML_TEXT_H

#include "common/strbuf.h"

/* Appends s (NULL: nothing) escaped as above. */
void mr__html_text(mr__strbuf *b, const char *s);

/* Appends x with `digits` significant digits, "-" for NaN and
 * infinities written as words, a minus sign as U+2212. */
void mr__html_number(mr__strbuf *b, double x, int digits);

/* Appends a p-value: "< 1e-16" below that, else 3 significant digits. */
void mr__html_p_value(mr__strbuf *b, double p);

#endif
