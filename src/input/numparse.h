/* numparse.h - correctly rounded decimal number parsing for CSV fields.
 *
 * Registry extracts are mostly short decimals ("2017", "0.25", "-3.5e2").
 * strtod is correct but slow (about 24 ns a field) and locale dependent, so
 * this module parses the common case exactly in double arithmetic and falls
 * back to strtod_l (C locale) only for inputs the fast path cannot prove
 * exact.  Either way the result is the correctly rounded double, bit for bit
 * what glibc strtod gives in the C locale.
 */
#ifndef MR_NUMPARSE_H
#define MR_NUMPARSE_H

#include <stddef.h>

/* Per-thread parsing context (holds the C locale used by the fallback).
 * One context is used by one thread at a time. */
typedef struct mr__numparser mr__numparser;

/* Returns NULL when out of memory.  Free with mr__numparser_free (NULL ok). */
mr__numparser *mr__numparser_new(void);
void mr__numparser_free(mr__numparser *np);

/* Parses the field [s, s+len) (not NUL terminated; may contain NULs).
 * Accepted: optional leading and trailing ASCII blanks (space, tab), an
 * optional sign, digits with at most one '.', at least one digit, and an
 * optional exponent (e|E, optional sign, at least one digit).
 * Rejected: empty or blank fields, inf, nan, hex, thousands separators,
 * anything else.  Returns 1 and stores the value on success, 0 otherwise
 * (*out untouched).  Values that overflow give 0 as well (not a usable
 * number); underflow to subnormal/zero is accepted as strtod rounds it. */
int mr__parse_double(mr__numparser *np, const char *s, size_t len, double *out);

#endif
