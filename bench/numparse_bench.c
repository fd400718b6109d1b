/* numparse_bench.c - mr__parse_double against strtod on CSV-like fields.
 *
 * Build and run from the repository root:
 *   gcc -std=c11 -O2 -Iinclude -Isrc bench/numparse_bench.c \
 *       src/input/numparse.c -lm -o /tmp/numparse_bench && /tmp/numparse_bench
 *
 * Fields are cycled from a small set so both parsers see identical input;
 * the sums are printed so neither loop can be optimised away.  Each figure
 * is the best of REPEATS runs of FIELDS_PER_RUN fields.
 */
#define _POSIX_C_SOURCE 200809L /* clock_gettime */

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "input/numparse.h"

#define FIELDS_PER_RUN 10000000L
#define REPEATS 5 /* the minimum of several runs filters out other load */

typedef struct {
    const char *text;
    size_t len;
} field;

static double now_seconds(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static void measure_lengths(field *fields, size_t n)
{
    for (size_t i = 0; i < n; i++)
        fields[i].len = strlen(fields[i].text);
}

/* Returns ns per field; *sum keeps the results observable. */
static double time_numparse(mr__numparser *np, const field *fields, size_t n, double *sum)
{
    double acc = 0.0, v = 0.0;
    size_t j = 0;
    double t0 = now_seconds();
    for (long i = 0; i < FIELDS_PER_RUN; i++) {
        if (mr__parse_double(np, fields[j].text, fields[j].len, &v))
            acc += v;
        if (++j == n) /* cheaper than i % n, which would dominate */
            j = 0;
    }
    double t1 = now_seconds();
    *sum = acc;
    return (t1 - t0) * 1e9 / (double)FIELDS_PER_RUN;
}

static double time_strtod(const field *fields, size_t n, double *sum)
{
    double acc = 0.0;
    size_t j = 0;
    double t0 = now_seconds();
    for (long i = 0; i < FIELDS_PER_RUN; i++) {
        acc += strtod(fields[j].text, NULL);
        if (++j == n)
            j = 0;
    }
    double t1 = now_seconds();
    *sum = acc;
    return (t1 - t0) * 1e9 / (double)FIELDS_PER_RUN;
}

static int run_set(mr__numparser *np, const char *name, field *fields, size_t n)
{
    measure_lengths(fields, n);
    double sum_np = 0.0, sum_strtod = 0.0, ns_np = 1e30, ns_strtod = 1e30;
    for (int r = 0; r < REPEATS; r++) {
        double t = time_numparse(np, fields, n, &sum_np);
        ns_np = t < ns_np ? t : ns_np;
        t = time_strtod(fields, n, &sum_strtod);
        ns_strtod = t < ns_strtod ? t : ns_strtod;
    }
    printf("%-22s mr__parse_double %6.2f ns/field   strtod %6.2f ns/field   "
           "ratio %5.2fx   (sums %.6g %.6g)\n",
           name, ns_np, ns_strtod, ns_strtod / ns_np, sum_np, sum_strtod);
    return sum_np == sum_strtod ? 0 : 1;
}

int main(void)
{
    field typical[] = {
        {"2017", 0},   {"0.25", 0},     {"12.5", 0},   {"-3.125e2", 0},
        {"1", 0},      {"0", 0},        {"42", 0},     {"3.75", 0},
        {"1999", 0},   {"-0.5", 0},     {"100", 0},    {"7.125", 0},
        {"65", 0},     {"0.001", 0},    {"2.5e-3", 0}, {"123.456", 0},
    };
    field full_precision[] = {
        {"0.1000000000000000055511151231257827", 0},
        {"3.1415926535897931", 0},
        {"2.7182818284590451", 0},
        {"-1.4142135623730951", 0},
        {"6.0221407599999999e+23", 0},
        {"1.6021766339999999e-19", 0},
        {"0.33333333333333331", 0},
        {"123456.78901234567", 0},
    };

    mr__numparser *np = mr__numparser_new();
    if (!np) {
        fprintf(stderr, "out of memory\n");
        return 1;
    }
    int bad = run_set(np, "typical fields", typical, sizeof typical / sizeof *typical);
    bad |= run_set(np, "17-digit fields", full_precision,
                   sizeof full_precision / sizeof *full_precision);
    mr__numparser_free(np);
    if (bad)
        fprintf(stderr, "warning: sums differ between the parsers\n");
    return bad;
}
