/* compare.h - the struct behind mr_comparison (compare.c): k models
 * fitted to one file, drop-one refits, and the tests between them
 * (compare_tests.c); output/compare_report.c writes them. */
#ifndef MR_COMPARE_H
#define MR_COMPARE_H

#include "common/error.h"
#include "fit/fit.h"
#include "millrace.h"

typedef struct mr__cmp_model {
    mr_fitter *fitter; /* borrowed */
    char *label;
    mr_fit *fit;       /* after a run */
    int drop_one;      /* its drop-one tests were asked for */
} mr__cmp_model;

/* A test as published, with the strings it points to. */
typedef struct mr__cmp_test {
    mr_model_test pub;
    char *term;
    char note[256];
} mr__cmp_test;

struct mr_comparison {
    mr__error err;
    mr__cmp_model *model;
    size_t nmodels, capmodels;
    mr__cmp_test *test;
    size_t ntests, captests;
    char *path; /* of the last successful run */
    int ran;
};

/* compare_tests.c */
/* 1 when a is nested in b (millrace.h, "Several models compared"). */
int mr__cmp_nested(const mr_fit *a, const mr_fit *b);
/* The statistics of smaller against larger into t (kind and indices are
 * the caller's). */
void mr__cmp_pair_test(const mr_fit *smaller, const mr_fit *larger, mr__cmp_test *t);
/* A test with every statistic NaN and `note`. */
void mr__cmp_test_blank(mr__cmp_test *t, const char *note);

#endif
