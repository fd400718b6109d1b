/* clock.h - the one clock of the library: progress reports, pass times and
 * a fit's seconds.  Never part of a result's numbers. */
#ifndef MR_CLOCK_H
#define MR_CLOCK_H

#include <stddef.h>
#include <stdint.h>

/* Seconds on the monotonic clock, from an unspecified start: only
 * differences mean anything. */
double mr__seconds_now(void);

/* Wall-clock time, ns since 1970 UTC: for the audit trail (when a run
 * started and ended), never for durations. */
int64_t mr__wall_ns_now(void);

/* `ns` since 1970 as ISO 8601 UTC, "2026-12-04T21:46:04.000000000Z", in
 * buf (at least MR__UTC_TEXT_CAP bytes).  0, or -1 (buf "") when the time
 * cannot be broken down. */
#define MR__UTC_TEXT_CAP 64
int mr__utc_text(int64_t ns, char *buf, size_t cap);

/* The machine's name (gethostname), "" when unknown, always terminated:
 * with the times above, the audit trail's where and when. */
void mr__host_name(char *buf, size_t cap);

#endif
