/* drift_report.c - a comparison of two fits as text for people: what the
 * inputs were, how the rows moved, how each coefficient moved, and at the
 * end what was flagged.  The layout is millrace's own. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/strbuf.h"
#include "output/drift.h"

#define DEFAULT_DIGITS 6

static void put_number(mr__strbuf *b, double x, int digits, int width)
{
    if (isnan(x)) mr__strbuf_printf(b, " %*s", width, "-");
    else mr__strbuf_printf(b, " %*.*g", width, digits, x);
}

static void put_input(mr__strbuf *b, const char *which, const mr_fit *f)
{
    mr__strbuf_printf(b, "%-10s %s, %llu bytes, checksum fnv1a64w:%016llx", which, f->path, (unsigned long long)f->bytes,
                      (unsigned long long)f->checksum);
    if (f->run_known) mr__strbuf_printf(b, ", fitted %s", f->started);
    mr__strbuf_printf(b, "\n");
}

static void section_inputs(mr__strbuf *b, const mr_drift *d)
{
    const mr_fit *o = d->old_fit, *n = d->new_fit;
    put_input(b, "old", o);
    put_input(b, "new", n);
    if (!mr__drift_input_changed(d)) mr__strbuf_printf(b, "input      unchanged (same checksum and size)");
    else mr__strbuf_printf(b, "input      changed (%s)", o->checksum != n->checksum ? "checksum differs" : "size differs");
    if (o->file_known && n->file_known && (o->file_size != n->file_size || o->file_mtime_ns != n->file_mtime_ns))
        mr__strbuf_printf(b, "; file size or modification time differ");
    mr__strbuf_printf(b, "\n");
}

static void put_count(mr__strbuf *b, const char *label, const mr__drift_count *c)
{
    mr__strbuf_printf(b, "  %-26s %14llu %14llu %+14lld\n", label, (unsigned long long)c->old_n,
                      (unsigned long long)c->new_n, (long long)(c->new_n - c->old_n));
}

static void put_real(mr__strbuf *b, const char *label, double old_x, double new_x, int digits)
{
    mr__strbuf_printf(b, "  %-26s", label);
    put_number(b, old_x, digits, 14);
    put_number(b, new_x, digits, 14);
    put_number(b, new_x - old_x, digits, 14);
    mr__strbuf_printf(b, "\n");
}

static void section_rows(mr__strbuf *b, const mr_drift *d, int digits)
{
    size_t i;
    char label[64];
    mr__strbuf_printf(b, "\n  %-26s %14s %14s %14s\n", "rows", "old", "new", "change");
    for (i = 0; i < d->nrows; i++) {
        snprintf(label, sizeof label, "%s", d->rows[i].name);
        if (strcmp(label, "left_out") == 0 || strcmp(label, "zero_weight") == 0) label[strcspn(label, "_")] = ' ';
        put_count(b, label, &d->rows[i]);
    }
    for (i = 0; i < d->nmissing; i++) {
        snprintf(label, sizeof label, "missing %s", d->missing[i].name);
        put_count(b, label, &d->missing[i]);
    }
    put_real(b, "deviance per row", mr__drift_deviance_per_row(d->old_fit), mr__drift_deviance_per_row(d->new_fit),
             digits);
    put_real(b, "dispersion", d->old_fit->dispersion, d->new_fit->dispersion, digits);
}

static const char *coef_note(const mr__drift_coef *c)
{
    switch (c->kind) {
    case MR__DRIFT_NEW: return "new";
    case MR__DRIFT_VANISHED: return "vanished";
    case MR__DRIFT_ALIASED: return c->flagged ? "aliased in one fit" : "aliased";
    default: return c->flagged ? "FLAGGED" : "";
    }
}

static void section_coefficients(mr__strbuf *b, const mr_drift *d, int digits)
{
    size_t i, width = 12;
    for (i = 0; i < d->ncoef; i++)
        if (strlen(d->coef[i].name) > width) width = strlen(d->coef[i].name);
    mr__strbuf_printf(b, "\ncoefficients: change in SEs (the %s); flagged at %g or more\n", MR__DRIFT_SE_RULE,
                      d->threshold);
    mr__strbuf_printf(b, "  %-*s %12s %12s %12s %10s %8s %8s\n", (int)width, "", "old", "new", "change", "SE used",
                      "SEs", "indep.");
    for (i = 0; i < d->ncoef; i++) {
        const mr__drift_coef *c = &d->coef[i];
        mr__strbuf_printf(b, "  %-*s", (int)width, c->name);
        put_number(b, c->old_est, digits, 12);
        put_number(b, c->new_est, digits, 12);
        put_number(b, c->change, digits, 12);
        put_number(b, c->se, 3, 10);
        put_number(b, c->z, 3, 8);
        put_number(b, c->z_indep, 3, 8);
        mr__strbuf_printf(b, "%s%s\n", *coef_note(c) ? "  " : "", coef_note(c));
    }
}

static void section_flagged(mr__strbuf *b, const mr_drift *d)
{
    size_t i;
    if (d->nlevels > 0) mr__strbuf_printf(b, "\nlevels\n");
    for (i = 0; i < d->nlevels; i++)
        mr__strbuf_printf(b, "  %s: '%s' %s\n", d->level[i].factor, d->level[i].level,
                          d->level[i].added ? "new (only in the new fit)" : "vanished (only in the old fit)");
    if (mr_drift_nflagged(d) == 0) mr__strbuf_printf(b, "\nnothing flagged\n");
    else
        mr__strbuf_printf(b, "\nflagged    %zu coefficient%s, %zu level%s\n", d->nflagged_coef,
                          d->nflagged_coef == 1 ? "" : "s", d->nlevels, d->nlevels == 1 ? "" : "s");
}

char *mr_drift_report(const mr_drift *d, int digits)
{
    mr__strbuf b;
    if (digits <= 0) digits = DEFAULT_DIGITS;
    mr__strbuf_init(&b);
    section_inputs(&b, d);
    section_rows(&b, d, digits);
    section_coefficients(&b, d, digits);
    section_flagged(&b, d);
    return mr__strbuf_take(&b);
}
