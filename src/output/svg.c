/* svg.c - the dot chart with intervals (see svg.h).  Colours are from the
 * Okabe-Ito palette (Okabe and Ito, "Color Universal Design", 2008),
 * chosen to stay distinct for the common colour-vision deficiencies; every
 * distinction is also made by shape or line style. */
#include <math.h>
#include <string.h>

#include "common/utf8.h"
#include "output/html_text.h"
#include "output/svg.h"
#include "output/svg_axis.h"

#define WIDTH 760.0
#define ROW_H 20.0
#define TOP 10.0
#define VALUE_W 170.0
#define LABEL_CHARS 44
#define BLUE "#0072B2"
#define VERMILLION "#D55E00"

typedef mr__svg_axis axis;

static void set_range(axis *a, const mr__svg_chart *c)
{
    double lo = INFINITY, hi = -INFINITY;
    size_t i;
    mr__svg_widen(a, c->reference, &lo, &hi);
    for (i = 0; i < c->nrows; i++) {
        if (c->row[i].mark == MR__MARK_HEADING || c->row[i].mark == MR__MARK_NONE) continue;
        mr__svg_widen(a, c->row[i].est, &lo, &hi);
        mr__svg_widen(a, c->row[i].lo, &lo, &hi);
        mr__svg_widen(a, c->row[i].hi, &lo, &hi);
    }
    mr__svg_set_range(a, lo, hi);
}

static void put_label(mr__strbuf *b, const char *s)
{
    size_t n = strlen(s), cut = n > LABEL_CHARS ? mr__utf8_cut(s, LABEL_CHARS) : n;
    char part[LABEL_CHARS + 1];
    if (cut == n) {
        mr__html_text(b, s);
        return;
    }
    memcpy(part, s, cut);
    part[cut] = '\0';
    mr__html_text(b, part);
    mr__strbuf_printf(b, "&#8230;");
}

static void put_value_text(mr__strbuf *b, const mr__svg_row *r, int digits)
{
    if (r->mark == MR__MARK_REFERENCE) {
        mr__strbuf_printf(b, "reference");
        return;
    }
    if (r->mark == MR__MARK_NONE || isnan(r->est)) {
        mr__strbuf_printf(b, "not estimable");
        return;
    }
    mr__html_number(b, r->est, digits);
    mr__strbuf_printf(b, " (");
    mr__html_number(b, r->lo, digits);
    mr__strbuf_printf(b, ", ");
    mr__html_number(b, r->hi, digits);
    mr__strbuf_printf(b, ")");
}

/* The mark of one row at height y (its middle). */
static void put_mark(mr__strbuf *b, const axis *a, const mr__svg_row *r, double y)
{
    double x = mr__svg_at(a, r->est), xl = mr__svg_at(a, r->lo), xh = mr__svg_at(a, r->hi);
    const char *colour = r->mark == MR__MARK_FLAGGED ? VERMILLION : BLUE;
    if (r->mark == MR__MARK_REFERENCE) {
        mr__strbuf_printf(b, "<path class=\"mark ref\" d=\"M%.1f %.1fl5 5l-5 5l-5 -5z\" fill=\"#fff\" stroke=\"#000\" "
                             "stroke-width=\"1.5\"/>\n", x, y - 5);
        return;
    }
    if (r->mark == MR__MARK_NONE || !isfinite(r->est)) {
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" class=\"note\">not estimable</text>\n", a->x0 + 4, y + 4);
        return;
    }
    if (isfinite(r->lo) || isfinite(r->hi))
        mr__strbuf_printf(b, "<line class=\"mark ci\" x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\" "
                             "stroke-width=\"2\"%s/>\n",
                          xl, y, xh, y, colour, r->mark == MR__MARK_PLAIN ? " stroke-dasharray=\"4 3\"" : "");
    if (r->mark == MR__MARK_FLAGGED)
        mr__strbuf_printf(b, "<rect class=\"mark est\" x=\"%.1f\" y=\"%.1f\" width=\"9\" height=\"9\" fill=\"%s\"/>\n",
                          x - 4.5, y - 4.5, colour);
    else
        mr__strbuf_printf(b, "<circle class=\"mark est\" cx=\"%.1f\" cy=\"%.1f\" r=\"4.5\" fill=\"%s\" stroke=\"%s\" "
                             "stroke-width=\"1.5\"/>\n",
                          x, y, r->mark == MR__MARK_PLAIN ? "#fff" : colour, colour);
}

/* Every other row shaded, under the grid and the marks. */
static void put_bands(mr__strbuf *b, const mr__svg_chart *c)
{
    size_t i;
    for (i = 0; i < c->nrows; i += 2)
        mr__strbuf_printf(b, "<rect x=\"0\" y=\"%.1f\" width=\"%.0f\" height=\"%.0f\" fill=\"#f2f2f2\"/>\n",
                          TOP + ROW_H * (double)i, WIDTH, ROW_H);
}

static void put_rows(mr__strbuf *b, const mr__svg_chart *c, const axis *a)
{
    size_t i;
    for (i = 0; i < c->nrows; i++) {
        const mr__svg_row *r = &c->row[i];
        double y = TOP + ROW_H * (double)i + ROW_H / 2;
        if (r->mark == MR__MARK_HEADING) {
            mr__strbuf_printf(b, "<text x=\"4\" y=\"%.1f\" class=\"heading\">", y + 4);
            put_label(b, r->label);
            mr__strbuf_printf(b, "</text>\n");
            continue;
        }
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">", a->x0 - 10, y + 4);
        put_label(b, r->label);
        mr__strbuf_printf(b, "</text>\n");
        put_mark(b, a, r, y);
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" class=\"value\">", WIDTH - VALUE_W + 12, y + 4);
        put_value_text(b, r, c->digits);
        mr__strbuf_printf(b, "</text>\n");
    }
}

static void put_line(mr__strbuf *b, double x1, double y1, double x2, double y2, const char *colour)
{
    mr__strbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"%s\"/>\n", x1, y1, x2, y2,
                      colour);
}

static void put_axis(mr__strbuf *b, const mr__svg_chart *c, const axis *a, double y)
{
    double t[MR__SVG_MAX_TICKS];
    size_t i, n = mr__svg_ticks(a, t);
    put_line(b, a->x0, y, a->x1, y, "#000");
    for (i = 0; i < n; i++) {
        double x = mr__svg_at(a, t[i]);
        put_line(b, x, TOP, x, y, "#ccc");
        put_line(b, x, y, x, y + 4, "#000");
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">", x, y + 16);
        mr__svg_tick_label(b, t[i]);
        mr__strbuf_printf(b, "</text>\n");
    }
    if (mr__svg_drawable(a, c->reference)) {
        double x = mr__svg_at(a, c->reference);
        mr__strbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000\" "
                             "stroke-dasharray=\"6 4\"/>\n", x, TOP, x, y);
    }
    mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\" class=\"axis\">", (a->x0 + a->x1) / 2,
                      y + 34);
    mr__html_text(b, c->axis);
    mr__strbuf_printf(b, "%s</text>\n", a->log ? " (log scale)" : "");
}

/* The label column's width from the longest label (about 7 px a character). */
static double label_width(const mr__svg_chart *c)
{
    size_t i, longest = 8;
    double w;
    for (i = 0; i < c->nrows; i++) {
        size_t n = strlen(c->row[i].label);
        if (c->row[i].mark != MR__MARK_HEADING && n > longest) longest = n;
    }
    w = 7.0 * (double)(longest > LABEL_CHARS ? LABEL_CHARS : longest) + 20;
    return w > 280 ? 280 : w;
}

static void put_legend(mr__strbuf *b, const mr__svg_chart *c)
{
    static const char *const symbol[] = {"&#9679;", "&#9632;", "&#9675;", "&#9671;", "", ""};
    int k, any = 0;
    for (k = 0; k < MR__MARK_HEADING; k++) {
        size_t i;
        for (i = 0; i < c->nrows && (int)c->row[i].mark != k; i++) continue;
        if (c->legend[k] == NULL || i == c->nrows) continue; /* only the marks drawn */
        mr__strbuf_printf(b, "%s<span class=\"key k%d\">%s</span> ", any ? "; " : "<p class=\"legend\">", k, symbol[k]);
        mr__html_text(b, c->legend[k]);
        any = 1;
    }
    if (any) mr__strbuf_printf(b, "</p>\n");
}

static void put_table(mr__strbuf *b, const mr__svg_chart *c)
{
    size_t i;
    mr__strbuf_printf(b, "<details><summary>The numbers of this plot</summary>\n<table class=\"num\"><thead><tr>"
                         "<th>row</th><th>estimate</th><th>low</th><th>high</th></tr></thead><tbody>\n");
    for (i = 0; i < c->nrows; i++) {
        const mr__svg_row *r = &c->row[i];
        mr__strbuf_printf(b, r->mark == MR__MARK_HEADING ? "<tr><th colspan=\"4\" class=\"group\">" : "<tr><td>");
        mr__html_text(b, r->label);
        if (r->mark == MR__MARK_HEADING) {
            mr__strbuf_printf(b, "</th></tr>\n");
            continue;
        }
        if (r->mark == MR__MARK_REFERENCE || r->mark == MR__MARK_NONE || isnan(r->est)) {
            mr__strbuf_printf(b, "</td><td colspan=\"3\">%s</td></tr>\n",
                              r->mark == MR__MARK_REFERENCE ? "reference" : "not estimable");
            continue;
        }
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, r->est, c->digits);
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, r->lo, c->digits);
        mr__strbuf_printf(b, "</td><td>");
        mr__html_number(b, r->hi, c->digits);
        mr__strbuf_printf(b, "</td></tr>\n");
    }
    mr__strbuf_printf(b, "</tbody></table></details>\n");
}

void mr__svg_dot_chart(mr__strbuf *b, const mr__svg_chart *c)
{
    axis a;
    double bottom = TOP + ROW_H * (double)c->nrows + 4, height = bottom + 44;
    a.log = c->log_axis;
    a.x0 = label_width(c);
    a.x1 = WIDTH - VALUE_W;
    set_range(&a, c);
    mr__svg_figure_open(b, c->id, WIDTH, height, c->title, c->desc);
    put_bands(b, c);
    put_axis(b, c, &a, bottom);
    put_rows(b, c, &a);
    mr__svg_figure_caption(b, c->title, c->desc);
    put_legend(b, c);
    put_table(b, c);
    mr__strbuf_printf(b, "</figure>\n");
}
