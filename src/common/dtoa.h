/* dtoa.h - a double as the shortest decimal text that reads back to it.
 *
 * The digits: the fewest significant digits of any decimal that strtod (or
 * any correctly rounding reader) turns back into the same double, bit for
 * bit; among decimals of that length, the one closest to the double's exact
 * value (a tie: the even last digit).  These are the digits Python's repr
 * gives.
 *
 * The layout, close to printf's %.17g: with X the decimal exponent of the
 * first digit (1234.5 has X = 3), plain decimal when -5 < X < 17 ("1234.5",
 * "0.00012", "10000000000000000"), otherwise one digit, the rest after a
 * point, and an exponent of at least two digits ("1e+17", "1.25e-05",
 * "5e-324").  No trailing zeros, no point without digits after it.  Zero is
 * "0", negative zero "-0"; infinities "inf" and "-inf", any NaN "nan".
 * Never locale-dependent ('.' always); thread-safe; allocates nothing. */
#ifndef MR_DTOA_H
#define MR_DTOA_H

#include <stddef.h>

/* Room for any result and its terminating NUL (the longest is 24 bytes,
 * "-1.2345678901234567e-308"). */
#define MR__DTOA_SIZE 32

/* Writes v's text and a NUL to out (MR__DTOA_SIZE bytes); returns the
 * text's length. */
size_t mr__dtoa(double v, char *out);

#endif
