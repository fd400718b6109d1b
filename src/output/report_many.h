/* report_many.h - the report's summary of a factor declared `many`: its
 * levels are too many for the coefficient table, so the text gives their
 * count, the spread of their estimates and how many carry little
 * information; the levels themselves are in the JSON. */
#ifndef MR_REPORT_MANY_H
#define MR_REPORT_MANY_H

#include "common/strbuf.h"
#include "fit/fit.h"

/* Share of the median level's information below which a level counts as
 * having tiny information (its standard error about 10 times the typical
 * level's or more): common practice for flagging sparse small areas, not
 * a statistical rule. */
#define MR__MANY_TINY_SHARE 0.01

/* Nothing when the fit has no such factor. */
void mr__report_many(mr__strbuf *b, const mr_fit *f, int digits);

#endif
