#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "output/report_many.h"

static int by_value(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return (x > y) - (x < y);
}

/* Type-7 quantile of sorted v[0..n). */
static double quantile(const double *v, size_t n, double q)
{
    double h = (double)(n - 1) * q, f = floor(h);
    size_t i = (size_t)f;
    return i + 1 < n ? v[i] + (h - f) * (v[i + 1] - v[i]) : v[n - 1];
}

/* The finite values of x, sorted, into out; their count. */
static size_t sorted_finite(const double *x, size_t n, double *out)
{
    size_t i, k = 0;
    for (i = 0; i < n; i++)
        if (isfinite(x[i])) out[k++] = x[i];
    qsort(out, k, sizeof *out, by_value);
    return k;
}

static void spread_line(mr__strbuf *b, const char *what, const double *v, size_t n, int digits)
{
    static const double q[] = {0, 0.05, 0.25, 0.5, 0.75, 0.95, 1};
    static const char *label[] = {"min", "5%", "25%", "median", "75%", "95%", "max"};
    size_t k;
    mr__strbuf_printf(b, "  %-16s", what);
    if (n == 0) {
        mr__strbuf_printf(b, " none\n");
        return;
    }
    for (k = 0; k < sizeof q / sizeof q[0]; k++)
        mr__strbuf_printf(b, "%s %s %.*g", k ? "," : "", label[k], digits, quantile(v, n, q[k]));
    mr__strbuf_printf(b, "\n");
}

static void tiny_line(mr__strbuf *b, const mr_fit *f, double *scratch)
{
    size_t k, n = sorted_finite(f->many_info, f->nmany, scratch), tiny = 0, none = 0;
    double cut = n ? MR__MANY_TINY_SHARE * quantile(scratch, n, 0.5) : 0;
    for (k = 0; k < f->nmany; k++) {
        if (isnan(f->many_se[k])) none++;
        else if (!(f->many_info[k] >= cut)) tiny++;
    }
    mr__strbuf_printf(b, "  tiny information %zu level%s below %g of the median level's information", tiny,
                      tiny == 1 ? "" : "s", MR__MANY_TINY_SHARE);
    if (none) mr__strbuf_printf(b, "; %zu with none (no estimate)", none);
    mr__strbuf_printf(b, "\n");
}

void mr__report_many(mr__strbuf *b, const mr_fit *f, int digits)
{
    double *v;
    size_t n;
    if (!f->many_given) return;
    mr__strbuf_printf(b, "\nfactor %s (many): %zu levels besides the reference %s; each level's estimate (its "
                         "difference from the reference)\n  and standard error are in the JSON (many_factor), not "
                         "in the table or the covariance\n%s",
                      f->many_factor, f->nmany, f->many_reference,
                      f->robust ? "  their standard errors are model-based; the robust ones are the table's "
                                  "coefficients' alone\n"
                                : "");
    if ((v = mr__malloc_array(f->nmany + 1, sizeof *v)) == NULL) {
        mr__strbuf_printf(b, "  (no summary: out of memory)\n");
        return;
    }
    n = sorted_finite(f->many_beta, f->nmany, v);
    spread_line(b, "estimates", v, n, digits);
    n = sorted_finite(f->many_se, f->nmany, v);
    spread_line(b, "standard errors", v, n, digits);
    tiny_line(b, f, v);
    mr__free(v);
}
