/* json_upgrade.h - a fit's JSON of an older format version brought to the
 * current one in place, before the reader's tables (json_schema.c) see it,
 * so that the reader knows one layout only. */
#ifndef MR_JSON_UPGRADE_H
#define MR_JSON_UPGRADE_H

#include <jansson.h>

/* Version 2 to 3: coefficients' `std_error` becomes `standard_error`,
 * fit's `df_residual` and `df_null` become `residual_df` and `null_df`,
 * the coefficient name "(intercept)" becomes "intercept".
 * Keys that are missing or of the wrong type are left for the reader to
 * name.  0; 1 when the file also has a coefficient named "intercept" (a
 * column of that name, which version 3 refuses); -1 when out of memory. */
int mr__json_upgrade(json_t *root);

#endif
