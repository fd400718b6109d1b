/* clock.h - the one clock of the library: progress reports, pass times and
 * a fit's seconds.  Never part of a result's numbers. */
#ifndef MR_CLOCK_H
#define MR_CLOCK_H

/* Seconds on the monotonic clock, from an unspecified start: only
 * differences mean anything. */
double mr__seconds_now(void);

#endif
