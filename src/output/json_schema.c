#include <stddef.h>
#include <stdint.h>

#include "fit/fit.h"
#include "output/json_schema.h"

#define AT(m) offsetof(mr_fit, m)
#define F(key, kind, m) {key, kind, AT(m), 0, 0, 0, 0, 0, NULL, NULL, NULL}
#define CHOICE(key, m, yes, no) {key, MR__J_CHOICE, AT(m), 0, 0, 0, 0, 0, yes, no, NULL}
#define LIST(key, kind, m, n) {key, kind, AT(m), AT(n), 0, 0, 0, 0, NULL, NULL, NULL}
#define OBJECT(key, sub) {key, MR__J_OBJECT, 0, 0, 0, 0, 0, 0, NULL, NULL, sub}
#define DERIVED(key, which) {key, MR__J_DERIVED, 0, 0, 0, 0, 0, which, NULL, NULL, NULL}
#define SPECIAL(key, which) {key, MR__J_SPECIAL, 0, 0, 0, 0, 0, which, NULL, NULL, NULL}
#define EACH(key, kind, m) {key, kind, AT(m), 0, 0, 0, 1, 0, NULL, NULL, NULL}
#define END {NULL, MR__J_INT, 0, 0, 0, 0, 0, 0, NULL, NULL, NULL}

static const mr__jfield file_fields[] = {
    F("size", MR__J_U64, file_size),
    F("mtime_ns", MR__J_I64, file_mtime_ns),
    DERIVED("modified", MR__JD_MODIFIED),
    END,
};

#define FILE_AT(m) offsetof(mr__fit_input_file, m)
#define FILE_F(key, kind, m) {key, kind, FILE_AT(m), 0, 0, 0, 0, 0, NULL, NULL, NULL}

static const mr__jfield set_file_fields[] = {
    FILE_F("path", MR__J_TEXT, path),
    FILE_F("size", MR__J_U64, size),
    FILE_F("mtime_ns", MR__J_I64, mtime_ns),
    FILE_F("bytes", MR__J_U64, bytes),
    FILE_F("decompressed_bytes", MR__J_U64, decompressed_bytes),
    FILE_F("compression", MR__J_COMPRESSION, compression),
    FILE_F("checksum", MR__J_CHECKSUM, checksum),
    END,
};

/* Several files read as one (input/inputset.h): left out for a single
 * input, so its JSON is what it was. */
static const mr__jfield set_fields[] = {
    {"files", MR__J_STRUCTS, AT(set_file), AT(nset_files), sizeof(mr__fit_input_file), 0, 0, 0, NULL, NULL, set_file_fields},
    END,
};

static const mr__jfield input_fields[] = {
    F("path", MR__J_TEXT, path),
    F("bytes", MR__J_U64, bytes),
    F("decompressed_bytes", MR__J_U64, decompressed_bytes),
    F("compression", MR__J_COMPRESSION, compression),
    F("checksum", MR__J_CHECKSUM, checksum),
    F("delimiter", MR__J_CHAR, delimiter),
    CHOICE("delimiter_source", delimiter_detected, "detected", "option"),
    {"file", MR__J_OBJECT_OR_NULL, 0, AT(file_known), 0, 0, 0, 0, NULL, NULL, file_fields},
    {"set", MR__J_OBJECT_OPTIONAL, 0, AT(set_known), 0, 0, 0, 0, NULL, NULL, set_fields},
    END,
};

static const mr__jfield rows_fields[] = {
    F("read", MR__J_U64, rows_read),
    F("used", MR__J_U64, rows_used),
    DERIVED("left_out", MR__JD_LEFT_OUT),
    F("bad", MR__J_U64, rows_bad),
    F("incomplete", MR__J_U64, rows_incomplete),
    F("zero_weight", MR__J_U64, zero_weight),
    SPECIAL("missing_by_column", MR__JS_MISSING),
    LIST("bad_examples", MR__J_TEXTS, bad_example, nbad_examples),
    END,
};

static const mr__jfield factor_fields[] = {
    {"reference", MR__J_TEXT, offsetof(mr__fit_factor, reference), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"levels", MR__J_TEXTS, offsetof(mr__fit_factor, level), offsetof(mr__fit_factor, nlevels), 0, 0, 0, 0, NULL,
     NULL, NULL},
    END,
};

static const mr__jfield spline_fields[] = {
    {"column", MR__J_TEXT, offsetof(mr__fit_term, spline_column), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"knots", MR__J_REALS, offsetof(mr__fit_term, knots), offsetof(mr__fit_term, nknots), 0, 0, 0, 0, NULL, NULL,
     NULL},
    {"boundary_knots", MR__J_REALS, offsetof(mr__fit_term, boundary), offsetof(mr__fit_term, nboundary), 0, 0, 0, 0,
     NULL, NULL, NULL},
    END,
};

static const mr__jfield term_fields[] = {
    {"label", MR__J_TEXT, offsetof(mr__fit_term, label), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    DERIVED("kind", MR__JD_TERM_KIND),
    {"coding", MR__J_CHOICE, offsetof(mr__fit_term, full), 0, 0, 0, 0, 0, "full", "treatment", NULL},
    {"first_coefficient", MR__J_SIZE, offsetof(mr__fit_term, first), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"coefficients", MR__J_SIZE, offsetof(mr__fit_term, ncoef), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    /* before the columns, whose types the reader checks against it */
    {"spline", MR__J_OBJECT_OPTIONAL, 0, offsetof(mr__fit_term, spline), 0, 0, 0, 0, NULL, NULL, spline_fields},
    SPECIAL("columns", MR__JS_TERM_COLUMNS),
    DERIVED("test", MR__JD_TERM_TEST),
    END,
};

static const mr__jfield line_fields[] = {
    EACH("origin", MR__J_TEXT_OR_NULL, model_origin),
    EACH("text", MR__J_TEXT, model_line),
    END,
};

/* Written for a parameter estimated by maximum likelihood and only then,
 * so that a fit with the parameter given keeps its bytes. */
static const mr__jfield family_param_estimate_fields[] = {
    F("standard_error", MR__J_REAL, family_param_se),
    END,
};

/* Written for a parameter chosen by profile likelihood and only then. */
static const mr__jfield profile_point_fields[] = {
    {"value", MR__J_REAL, offsetof(mr__fit_profile_point, value), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"log_likelihood", MR__J_REAL, offsetof(mr__fit_profile_point, loglik), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    END,
};

static const mr__jfield profile_fields[] = {
    {"points", MR__J_STRUCTS, AT(profile), AT(nprofile), sizeof(mr__fit_profile_point), 0, 0, 0, NULL, NULL,
     profile_point_fields},
    END,
};

/* Written for a family with a parameter of its own (a negative binomial's
 * theta) and only then, so that a fit of another family keeps its bytes. */
static const mr__jfield family_param_fields[] = {
    DERIVED("name", MR__JD_FAMILY_PARAM_NAME),
    F("value", MR__J_REAL, family_param),
    {"estimated", MR__J_OBJECT_OPTIONAL, 0, AT(family_param_estimated), 0, 0, 0, 0, NULL, NULL,
     family_param_estimate_fields},
    {"profile", MR__J_OBJECT_OPTIONAL, 0, AT(family_param_profiled), 0, 0, 0, 0, NULL, NULL, profile_fields},
    END,
};

static const mr__jfield numeric_fields[] = {
    {"mean", MR__J_REAL, offsetof(mr__fit_numeric, mean), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"sd", MR__J_REAL, offsetof(mr__fit_numeric, sd), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"min", MR__J_REAL, offsetof(mr__fit_numeric, min), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    {"max", MR__J_REAL, offsetof(mr__fit_numeric, max), 0, 0, 0, 0, 0, NULL, NULL, NULL},
    END,
};

/* The numeric columns over the rows used, by name.  Added within
 * format_version 3, so optional: a fit written before reads back without
 * it and writes the same bytes again. */
static const mr__jfield numeric_summary_fields[] = {
    {"columns", MR__J_KEYED, AT(numeric), AT(nnumerics), sizeof(mr__fit_numeric), offsetof(mr__fit_numeric, name), 0,
     0, NULL, NULL, numeric_fields},
    END,
};

static const mr__jfield model_fields[] = {
    F("outcome", MR__J_TEXT, outcome),
    F("trials", MR__J_TEXT_OR_NULL, trials),
    F("family", MR__J_FAMILY, family),
    {"family_parameter", MR__J_OBJECT_OPTIONAL, 0, AT(family_param_given), 0, 0, 0, 0, NULL, NULL,
     family_param_fields},
    F("link", MR__J_LINK, link),
    F("offset", MR__J_TEXT_OR_NULL, offset),
    F("exposure", MR__J_TEXT_OR_NULL, exposure),
    F("weight", MR__J_TEXT_OR_NULL, weight),
    F("intercept", MR__J_BOOL, intercept),
    CHOICE("dispersion", dispersion_estimated, "estimate", "fixed"),
    {"factors", MR__J_KEYED, AT(factor), AT(nfactors), sizeof(mr__fit_factor), offsetof(mr__fit_factor, name), 0, 0,
     NULL, NULL, factor_fields},
    {"terms", MR__J_STRUCTS, AT(term), AT(nterms), sizeof(mr__fit_term), 0, 0, 0, NULL, NULL, term_fields},
    {"lines", MR__J_RECORDS, 0, AT(nmodel_lines), 0, 0, 0, 0, NULL, NULL, line_fields},
    {"numeric_summary", MR__J_OBJECT_OPTIONAL, 0, AT(numerics_known), 0, 0, 0, 0, NULL, NULL,
     numeric_summary_fields},
    END,
};

static const mr__jfield missing_value_fields[] = {
    LIST("tokens", MR__J_TEXTS, missing_token, nmissing_tokens),
    END,
};

static const mr__jfield options_fields[] = {
    F("threads", MR__J_INT, threads),
    F("buffer_size", MR__J_SIZE, buffer_size),
    F("tolerance", MR__J_REAL, tolerance),
    F("max_passes", MR__J_INT, max_passes),
    F("level", MR__J_REAL, level),
    F("in_memory", MR__J_BOOL, in_memory),
    F("cache", MR__J_BOOL, cached),
    CHOICE("on_bad_row", skip_bad, "skip", "fail"),
    {"missing_values", MR__J_OBJECT_ADDED, 0, AT(missing_known), 0, 0, 0, 0, NULL, NULL, missing_value_fields},
    END,
};

static const mr__jfield start_fields[] = {
    F("from", MR__J_TEXT, start_from),
    F("coefficients_carried", MR__J_SIZE, start_carried),
    F("previous_coefficients", MR__J_SIZE, start_previous),
    END,
};

static const mr__jfield convergence_fields[] = {
    F("converged", MR__J_BOOL, converged),
    CHOICE("criterion", by_step, "step in standard errors", "deviance change at the boundary"),
    F("iterations", MR__J_INT, iterations),
    F("passes", MR__J_INT, passes),
    F("relative_change", MR__J_REAL, rel_change),
    F("step_halvings", MR__J_INT, halvings),
    F("warm_start", MR__J_BOOL, warm_start),
    F("warm_start_iterations", MR__J_INT, warm_iterations),
    F("warm_start_blocks", MR__J_INT, warm_blocks),
    F("warm_start_polish_blocks", MR__J_INT, warm_polish_blocks),
    F("collapsed_patterns", MR__J_COUNT_OR_NULL, patterns),
    {"start", MR__J_OBJECT_ADDED, 0, AT(start_given), 0, 0, 0, 0, NULL, NULL, start_fields},
    F("seconds", MR__J_REAL, seconds),
    LIST("pass_seconds", MR__J_REALS, pass_seconds, npass_seconds),
    F("rows_per_second", MR__J_REAL, rows_per_second),
    END,
};

static const mr__jfield coefficient_fields[] = {
    EACH("name", MR__J_TEXT, name),
    EACH("aliased", MR__J_BOOL, aliased),
    /* a zero cell or a growing standard error: at infinity in practice */
    EACH("not_estimable", MR__J_BOOL_ADDED, inestimable),
    EACH("estimate", MR__J_REAL, beta),
    EACH("standard_error", MR__J_REAL, se),
    EACH("statistic", MR__J_REAL, stat),
    EACH("p_value", MR__J_REAL, pval),
    EACH("ci_low", MR__J_REAL, lo),
    EACH("ci_high", MR__J_REAL, hi),
    DERIVED("ratio", MR__JD_RATIO),
    DERIVED("ratio_ci_low", MR__JD_RATIO_LOW),
    DERIVED("ratio_ci_high", MR__JD_RATIO_HIGH),
    END,
};

static const mr__jfield statistics_fields[] = {
    F("deviance", MR__J_REAL, deviance),
    F("residual_df", MR__J_REAL, df_residual),
    F("null_deviance", MR__J_REAL, null_deviance),
    F("null_df", MR__J_REAL, df_null),
    F("pearson_chi2", MR__J_REAL, pearson),
    F("dispersion", MR__J_REAL, dispersion),
    F("log_likelihood", MR__J_REAL, loglik),
    F("aic", MR__J_REAL, aic),
    F("bic", MR__J_REAL, bic),
    F("rank", MR__J_SIZE, rank),
    F("n", MR__J_U64, n),
    END,
};

/* The run's audit trail.  Added within format_version 2, so optional:
 * a fit written before it reads back without it and writes the same
 * bytes again. */
/* A run taken up from a checkpoint: the pass it went on after (left out
 * of a run that was not). */
static const mr__jfield resume_fields[] = {
    F("after_pass", MR__J_INT, resumed_from_pass),
    END,
};

static const mr__jfield run_fields[] = {
    LIST("command_line", MR__J_TEXTS, command_line, ncommand_line),
    F("started", MR__J_TEXT, started),
    F("ended", MR__J_TEXT, ended),
    F("host", MR__J_TEXT, host),
    {"resumed", MR__J_OBJECT_OPTIONAL, 0, AT(resumed), 0, 0, 0, 0, NULL, NULL, resume_fields},
    END,
};

/* The factor declared `many`: its levels other than the reference, which
 * are not among the coefficients and not in the covariance.  Written only
 * for such a fit, so that others keep their bytes. */
const mr__jfield mr__json_many_level_fields[] = {
    EACH("level", MR__J_TEXT, many_level),
    EACH("estimate", MR__J_REAL, many_beta),
    EACH("standard_error", MR__J_REAL, many_se),
    EACH("information", MR__J_REAL, many_info),
    SPECIAL("weighted_means", MR__JS_LEVEL_MEANS),
    END,
};

static const mr__jfield many_fields[] = {
    F("factor", MR__J_TEXT, many_factor),
    F("reference", MR__J_TEXT, many_reference),
    {"levels", MR__J_RECORDS_APART, 0, AT(nmany), 0, 0, 0, 0, NULL, NULL, mr__json_many_level_fields},
    END,
};

#define GROUP(key, kind, m) {key, kind, offsetof(mr__calib_group, m), 0, 0, 0, 0, 0, NULL, NULL, NULL}
static const mr__jfield calibration_group_fields[] = {
    GROUP("rows", MR__J_U64, rows),
    GROUP("weight", MR__J_REAL, weight),
    GROUP("mean_low", MR__J_REAL, mean_low),
    GROUP("mean_high", MR__J_REAL, mean_high),
    GROUP("observed", MR__J_REAL, observed),
    GROUP("expected", MR__J_REAL, expected),
    END,
};

/* Observed and expected by tenths of the fitted mean.  Added within
 * format_version 3, so optional: a fit written without it (version 2 or
 * an earlier 3) reads back without it. */
static const mr__jfield calibration_fields[] = {
    F("basis", MR__J_TEXT, calib_basis),
    {"groups", MR__J_STRUCTS, AT(calib), AT(ncalib), sizeof(mr__calib_group), 0, 0, 0, NULL, NULL,
     calibration_group_fields},
    END,
};

/* Robust standard errors, written only when the fit made them (so a fit
 * without them keeps its bytes): the coefficients' statistics, p-values
 * and intervals are then theirs. */
static const mr__jfield robust_fields[] = {
    F("type", MR__J_TEXT, robust_type),
    F("cluster", MR__J_TEXT_OR_NULL, cluster),
    F("clusters", MR__J_U64, nclusters),
    F("adjustment", MR__J_REAL, robust_adjustment),
    LIST("standard_errors", MR__J_REALS, robust_se, nrobust_se),
    SPECIAL("covariance", MR__JS_ROBUST_COVARIANCE),
    END,
};

const mr__jfield mr__json_fit_fields[] = {
    DERIVED("format", MR__JD_FORMAT),
    DERIVED("format_version", MR__JD_FORMAT_VERSION),
    F("millrace_version", MR__J_TEXT, version),
    {"run", MR__J_OBJECT_OPTIONAL, 0, AT(run_known), 0, 0, 0, 0, NULL, NULL, run_fields},
    OBJECT("input", input_fields),
    OBJECT("rows", rows_fields),
    OBJECT("model", model_fields),
    OBJECT("options", options_fields),
    OBJECT("convergence", convergence_fields),
    DERIVED("statistic", MR__JD_STATISTIC),
    DERIVED("ratio_label", MR__JD_RATIO_LABEL),
    {"coefficients", MR__J_RECORDS, 0, AT(p), 0, 0, 0, 0, NULL, NULL, coefficient_fields},
    OBJECT("fit", statistics_fields),
    {"calibration", MR__J_OBJECT_OPTIONAL, 0, AT(calib_known), 0, 0, 0, 0, NULL, NULL, calibration_fields},
    SPECIAL("covariance", MR__JS_COVARIANCE),
    {"many_factor", MR__J_OBJECT_OPTIONAL, 0, AT(many_given), 0, 0, 0, 0, NULL, NULL, many_fields},
    {"robust", MR__J_OBJECT_OPTIONAL, 0, AT(robust), 0, 0, 0, 0, NULL, NULL, robust_fields},
    LIST("warnings", MR__J_TEXTS, warning, nwarnings),
    END,
};

size_t mr__jfield_unit(mr__jkind kind)
{
    switch (kind) {
    case MR__J_TEXT:
    case MR__J_TEXT_OR_NULL: return sizeof(char *);
    case MR__J_REAL: return sizeof(double);
    default: return sizeof(int); /* BOOL, INT: the only other indexed kinds */
    }
}

void *mr__jfield_slot(const mr__jfield *fl, const void *base, size_t index)
{
    char *p = (char *)base + fl->at;
    if (!fl->indexed) return p;
    return *(char **)p + index * mr__jfield_unit(fl->kind);
}
