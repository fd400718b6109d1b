/* survey.h - a file's columns described in one pass, before any model
 * (job_survey.c adds them up; fit/surveyor.c runs the pass; output/
 * survey_report.c writes them).
 *
 * Per column: missing cells (the missing tokens), cells that read as
 * numbers (numparse.h's grammar) and of those the integers (digits with
 * an optional sign), their least, greatest and sum; and the distinct
 * cells with their counts, exactly, while there are at most `cap` of them
 * in the file: past that the column's table is dropped (the count says
 * "more than cap", and no frequent values are given), which bounds memory
 * by columns x cap.  A row with another number of fields than the header
 * is malformed: counted (the first's line kept) and left out of the
 * columns.  Blocks are added in block order (sums in groups of
 * MR__GROUP_BLOCKS, accum/partial.h), so the same bits for any thread
 * count. */
#ifndef MR_SURVEY_H
#define MR_SURVEY_H

#include <stdatomic.h>
#include <stddef.h>
#include <stdint.h>
#include "common/levels.h"

typedef struct mr__survey_col {
    uint64_t missing, numbers, integers;
    double sum, min, max;
    mr__levelset values; /* limit: the cap */
    uint64_t *count;     /* per value id */
    size_t count_cap;
    int over;            /* more than the cap distinct values */
} mr__survey_col;

typedef struct mr__survey_cfg {
    /* given */
    const char *display;
    char delim;
    size_t nfields;
    char *const *missing;
    size_t nmissing;
    size_t cap;
    /* the totals */
    mr__survey_col *col; /* nfields */
    double *group_sum;   /* nfields: the open group's sums */
    int group_open;
    atomic_int *over;    /* nfields: a column's table was dropped (workers skip it) */
    uint64_t rows, malformed, first_malformed_line;
    size_t first_malformed_fields;
} mr__survey_cfg;

void mr__survey_col_init(mr__survey_col *c, size_t cap);
void mr__survey_col_release(mr__survey_col *c);
/* The count of a value, added to the column's table: MR_OK, MR_ERR_DOMAIN
 * past the cap (the table is then dropped, over set), MR_ERR_NO_MEMORY. */
mr_status mr__survey_col_count(mr__survey_col *c, const char *p, size_t len, uint64_t n);

#endif
