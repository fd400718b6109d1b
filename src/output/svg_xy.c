/* svg_xy.c - the x-y chart (svg_xy.h).  Colours from the Okabe-Ito
 * palette as in svg.c; every distinction also by shape or dash. */
#include <math.h>
#include <string.h>

#include "output/html_text.h"
#include "output/svg_axis.h"
#include "output/svg_xy.h"

#define WIDTH 760.0
#define HEIGHT 440.0
#define LEFT 78.0
#define RIGHT 20.0
#define TOP 12.0
#define BOTTOM 58.0
#define BLUE "#0072B2"
#define VERMILLION "#D55E00"

static void widen_all(const mr__svg_axis *a, const double *v, size_t n, double *lo, double *hi)
{
    size_t i;
    for (i = 0; v && i < n; i++) mr__svg_widen(a, v[i], lo, hi);
}

/* Both axes' ranges from everything drawn. */
static void set_ranges(const mr__svg_xy *c, mr__svg_axis *ax, mr__svg_axis *ay)
{
    double xlo = INFINITY, xhi = -INFINITY, ylo = INFINITY, yhi = -INFINITY;
    size_t i;
    mr__svg_widen(ay, c->yref, &ylo, &yhi);
    for (i = 0; i < c->npoints; i++) {
        const mr__svg_point *p = &c->point[i];
        if (!mr__svg_drawable(ax, p->x) || !mr__svg_drawable(ay, p->y)) continue;
        mr__svg_widen(ax, p->x, &xlo, &xhi);
        mr__svg_widen(ay, p->y, &ylo, &yhi);
        mr__svg_widen(ay, p->lo, &ylo, &yhi);
        mr__svg_widen(ay, p->hi, &ylo, &yhi);
    }
    for (i = 0; i < c->nlines; i++) {
        widen_all(ax, c->line[i].x, c->line[i].n, &xlo, &xhi);
        widen_all(ay, c->line[i].y, c->line[i].n, &ylo, &yhi);
    }
    widen_all(ax, c->band_x, c->nband, &xlo, &xhi);
    widen_all(ay, c->band_lo, c->nband, &ylo, &yhi);
    widen_all(ay, c->band_hi, c->nband, &ylo, &yhi);
    mr__svg_set_range(ax, xlo, xhi);
    mr__svg_set_range(ay, ylo, yhi);
}

static void put_axes(mr__strbuf *b, const mr__svg_xy *c, const mr__svg_axis *ax, const mr__svg_axis *ay)
{
    double t[MR__SVG_MAX_TICKS];
    size_t i, n = mr__svg_ticks(ax, t);
    for (i = 0; i < n; i++) {
        double x = mr__svg_at(ax, t[i]);
        mr__strbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#ddd\"/>\n", x, ay->x1, x,
                          ay->x0 + 4);
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\">", x, ay->x0 + 18);
        mr__svg_tick_label(b, t[i]);
        mr__strbuf_printf(b, "</text>\n");
    }
    n = mr__svg_ticks(ay, t);
    for (i = 0; i < n; i++) {
        double y = mr__svg_at(ay, t[i]);
        mr__strbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#ddd\"/>\n", ax->x0 - 4, y,
                          ax->x1, y);
        mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"end\">", ax->x0 - 7, y + 4);
        mr__svg_tick_label(b, t[i]);
        mr__strbuf_printf(b, "</text>\n");
    }
    mr__strbuf_printf(b, "<path d=\"M%.1f %.1fV%.1fH%.1f\" fill=\"none\" stroke=\"#000\"/>\n", ax->x0, ay->x1, ay->x0,
                      ax->x1);
    mr__strbuf_printf(b, "<text x=\"%.1f\" y=\"%.1f\" text-anchor=\"middle\" class=\"axis\">", (ax->x0 + ax->x1) / 2,
                      ay->x0 + 40);
    mr__html_text(b, c->xaxis);
    mr__strbuf_printf(b, "%s</text>\n<text transform=\"translate(16 %.1f) rotate(-90)\" text-anchor=\"middle\" "
                         "class=\"axis\">", ax->log ? " (log scale)" : "", (ay->x0 + ay->x1) / 2);
    mr__html_text(b, c->yaxis);
    mr__strbuf_printf(b, "%s</text>\n", ay->log ? " (log scale)" : "");
}

static void put_band(mr__strbuf *b, const mr__svg_xy *c, const mr__svg_axis *ax, const mr__svg_axis *ay)
{
    size_t i;
    if (c->nband < 2) return;
    mr__strbuf_printf(b, "<path class=\"mark band\" fill=\"#cfe3f1\" stroke=\"none\" d=\"");
    for (i = 0; i < c->nband; i++)
        mr__strbuf_printf(b, "%s%.1f %.1f", i ? "L" : "M", mr__svg_at(ax, c->band_x[i]), mr__svg_at(ay, c->band_hi[i]));
    for (i = c->nband; i-- > 0;)
        mr__strbuf_printf(b, "L%.1f %.1f", mr__svg_at(ax, c->band_x[i]), mr__svg_at(ay, c->band_lo[i]));
    mr__strbuf_printf(b, "Z\"/>\n");
}

static void put_line(mr__strbuf *b, const mr__svg_line *l, const mr__svg_axis *ax, const mr__svg_axis *ay)
{
    static const char *const look[] = {
        "class=\"mark curve\" stroke=\"" BLUE "\" stroke-width=\"2.5\"",
        "class=\"limit\" stroke=\"#000\" stroke-width=\"1.2\" stroke-dasharray=\"7 4\"",
        "class=\"limit\" stroke=\"#000\" stroke-width=\"1.8\" stroke-dasharray=\"1.5 3\"",
        "class=\"guide\" stroke=\"#777\" stroke-width=\"1\"",
    };
    size_t i;
    int open = 0;
    mr__strbuf_printf(b, "<path %s fill=\"none\" d=\"", look[l->style]);
    for (i = 0; i < l->n; i++) {
        if (!mr__svg_drawable(ax, l->x[i]) || !mr__svg_drawable(ay, l->y[i])) {
            open = 0;
            continue;
        }
        mr__strbuf_printf(b, "%s%.1f %.1f", open ? "L" : "M", mr__svg_at(ax, l->x[i]), mr__svg_at(ay, l->y[i]));
        open = 1;
    }
    mr__strbuf_printf(b, "\"/>\n");
}

static void put_points(mr__strbuf *b, const mr__svg_xy *c, const mr__svg_axis *ax, const mr__svg_axis *ay)
{
    size_t i;
    for (i = 0; i < c->npoints; i++) {
        const mr__svg_point *p = &c->point[i];
        double x, y;
        if (!mr__svg_drawable(ax, p->x) || !mr__svg_drawable(ay, p->y)) continue;
        x = mr__svg_at(ax, p->x);
        y = mr__svg_at(ay, p->y);
        if (isfinite(p->lo) && isfinite(p->hi))
            mr__strbuf_printf(b, "<line class=\"mark ci\" x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" "
                                 "stroke=\"%s\" stroke-width=\"1.5\"/>\n",
                              x, mr__svg_at(ay, p->lo), x, mr__svg_at(ay, p->hi), p->flagged ? VERMILLION : BLUE);
        if (p->flagged)
            mr__strbuf_printf(b, "<rect class=\"mark est\" x=\"%.1f\" y=\"%.1f\" width=\"9\" height=\"9\" fill=\"%s\" "
                                 "stroke=\"#000\" stroke-width=\"0.8\"/>\n", x - 4.5, y - 4.5, VERMILLION);
        else
            mr__strbuf_printf(b, "<circle class=\"mark est\" cx=\"%.1f\" cy=\"%.1f\" r=\"4\" fill=\"%s\" "
                                 "stroke=\"#fff\" stroke-width=\"0.8\"/>\n", x, y, BLUE);
    }
}

void mr__svg_xy_chart(mr__strbuf *b, const mr__svg_xy *c)
{
    mr__svg_axis ax, ay;
    size_t i;
    memset(&ax, 0, sizeof ax);
    memset(&ay, 0, sizeof ay);
    ax.log = c->xlog;
    ay.log = c->ylog;
    ax.x0 = LEFT;
    ax.x1 = WIDTH - RIGHT;
    ay.x0 = HEIGHT - BOTTOM; /* the bottom pixel is the low end */
    ay.x1 = TOP;
    set_ranges(c, &ax, &ay);
    mr__svg_figure_open(b, c->id, WIDTH, HEIGHT, c->title, c->desc);
    put_axes(b, c, &ax, &ay);
    put_band(b, c, &ax, &ay);
    if (mr__svg_drawable(&ay, c->yref))
        mr__strbuf_printf(b, "<line x1=\"%.1f\" y1=\"%.1f\" x2=\"%.1f\" y2=\"%.1f\" stroke=\"#000\" "
                             "stroke-dasharray=\"6 4\"/>\n", ax.x0, mr__svg_at(&ay, c->yref), ax.x1,
                          mr__svg_at(&ay, c->yref));
    for (i = 0; i < c->nlines; i++) put_line(b, &c->line[i], &ax, &ay);
    put_points(b, c, &ax, &ay);
    mr__svg_figure_caption(b, c->title, c->desc);
    if (c->legend) {
        mr__strbuf_printf(b, "<p class=\"legend\">");
        mr__html_text(b, c->legend);
        mr__strbuf_printf(b, "</p>\n");
    }
    mr__strbuf_printf(b, "<details><summary>The numbers of this plot</summary>\n%s</details>\n</figure>\n",
                      c->table ? c->table : "");
}
