/* survey.h - the struct behind mr_survey, for output/survey_report.c. */
#ifndef MR_FIT_SURVEY_H
#define MR_FIT_SURVEY_H

#include "accum/survey.h"
#include "common/error.h"
#include "millrace.h"

struct mr_survey {
    mr__error err;
    int threads;
    size_t buffer_size, cap;
    char **missing;
    size_t nmissing;
    /* the last successful run */
    int done;
    char *path;     /* as given ("-": standard input) */
    char **name;    /* the header's names */
    mr__survey_cfg c;
};

#endif
