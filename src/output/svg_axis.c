/* svg_axis.c - see svg_axis.h. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "output/html_text.h"
#include "output/svg_axis.h"

static double scaled(const mr__svg_axis *a, double v) { return a->log ? log10(v) : v; }

int mr__svg_drawable(const mr__svg_axis *a, double v) { return isfinite(v) && (!a->log || v > 0); }

double mr__svg_at(const mr__svg_axis *a, double v)
{
    double t;
    if (!mr__svg_drawable(a, v)) t = v > 0 ? a->hi : a->lo;
    else t = scaled(a, v);
    if (t < a->lo) t = a->lo;
    if (t > a->hi) t = a->hi;
    return a->x0 + (t - a->lo) / (a->hi - a->lo) * (a->x1 - a->x0);
}

void mr__svg_widen(const mr__svg_axis *a, double v, double *lo, double *hi)
{
    if (!mr__svg_drawable(a, v)) return;
    if (scaled(a, v) < *lo) *lo = scaled(a, v);
    if (scaled(a, v) > *hi) *hi = scaled(a, v);
}

void mr__svg_set_range(mr__svg_axis *a, double lo, double hi)
{
    double pad;
    if (!(lo <= hi)) lo = hi = 0;
    if (hi - lo < 1e-9 * (fabs(lo) + 1)) {
        double half = a->log ? 0.15 : fabs(lo) * 0.1 + 0.5;
        lo -= half;
        hi += half;
    }
    pad = (hi - lo) * 0.04;
    a->lo = lo - pad;
    a->hi = hi + pad;
}

/* 1, 2 or 5 times a power of ten, at least x. */
static double nice_step(double x)
{
    double p = pow(10, floor(log10(x))), m = x / p;
    return (m <= 1 ? 1 : m <= 2 ? 2 : m <= 5 ? 5 : 10) * p;
}

size_t mr__svg_ticks(const mr__svg_axis *a, double *t)
{
    size_t n = 0;
    double v, span = a->hi - a->lo;
    if (!a->log || span < 0.8) {
        double lo = a->log ? pow(10, a->lo) : a->lo, hi = a->log ? pow(10, a->hi) : a->hi;
        double step = nice_step((hi - lo) / 6);
        for (v = ceil(lo / step) * step; v <= hi && n < MR__SVG_MAX_TICKS; v += step)
            t[n++] = fabs(v) < step * 1e-9 ? 0 : v;
        return n;
    }
    if (span <= 3.2) {
        static const double fine[] = {1, 1.5, 2, 3, 5, 7}, coarse[] = {1, 2, 5};
        const double *m = span <= 1.7 ? fine : coarse;
        size_t nm = span <= 1.7 ? 6 : 3;
        double d;
        for (d = floor(a->lo); d <= a->hi && n < MR__SVG_MAX_TICKS; d++) {
            size_t k;
            for (k = 0; k < nm && n < MR__SVG_MAX_TICKS; k++)
                if ((v = log10(m[k]) + d) >= a->lo && v <= a->hi) t[n++] = pow(10, v);
        }
        return n;
    }
    for (v = ceil(a->lo / ceil(span / 8)) * ceil(span / 8); v <= a->hi && n < MR__SVG_MAX_TICKS; v += ceil(span / 8))
        t[n++] = pow(10, v);
    return n;
}

void mr__svg_figure_open(mr__strbuf *b, const char *id, double width, double height, const char *title,
                         const char *desc)
{
    mr__strbuf_printf(b, "<figure id=\"%s\">\n<svg viewBox=\"0 0 %.0f %.0f\" "
                         "width=\"%.0f\" height=\"%.0f\" role=\"img\" aria-label=\"",
                      id, width, height, width, height);
    mr__html_text(b, title);
    mr__strbuf_printf(b, "\" aria-describedby=\"%s-desc\">\n<title>", id);
    mr__html_text(b, title);
    mr__strbuf_printf(b, "</title>\n<desc id=\"%s-desc\">", id);
    mr__html_text(b, desc);
    mr__strbuf_printf(b, "</desc>\n");
}

void mr__svg_figure_caption(mr__strbuf *b, const char *title, const char *desc)
{
    mr__strbuf_printf(b, "</svg>\n<figcaption><strong>");
    mr__html_text(b, title);
    mr__strbuf_printf(b, ".</strong> ");
    mr__html_text(b, desc);
    mr__strbuf_printf(b, "</figcaption>\n");
}

/* A tick's value as read: 3 significant digits, but a whole number from
 * 1000 to below 10^9 in full (not 3e+03; a tick at 3 10^3 computed by
 * pow is rarely exactly whole, so 9 digits first), with thousands
 * separators from 10,000 on. */
void mr__svg_tick_label(mr__strbuf *b, double v)
{
    char buf[32], digits[32];
    double r;
    size_t i, n;
    snprintf(buf, sizeof buf, "%.9g", v);
    r = strtod(buf, NULL);
    if (!(fabs(r) >= 1e3 && fabs(r) < 1e9 && r == floor(r))) {
        mr__html_number(b, v, 3);
        return;
    }
    n = (size_t)snprintf(digits, sizeof digits, "%.0f", fabs(r));
    if (r < 0) mr__strbuf_printf(b, "&#8722;");
    for (i = 0; i < n; i++) /* 2020 stays a year: separators from 10,000 */
        mr__strbuf_printf(b, "%s%c", n > 4 && i && (n - i) % 3 == 0 ? "," : "", digits[i]);
}
