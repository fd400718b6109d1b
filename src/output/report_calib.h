/* report_calib.h - the fit report's calibration table. */
#ifndef MR_REPORT_CALIB_H
#define MR_REPORT_CALIB_H

#include "common/strbuf.h"
#include "fit/fit.h"

/* Observed and expected by tenths of the fitted mean, `digits`
 * significant digits; nothing for a fit read without them. */
void mr__report_calibration(mr__strbuf *b, const mr_fit *f, int digits);

#endif
