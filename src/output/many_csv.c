/* many_csv.c - a `many` factor's levels as CSV (mr_fit_write_many_csv),
 * written atomically through common/outfile.c. */
#include <string.h>

#include "common/strbuf.h"
#include "output/csv_cells.h"
#include "output/report_many.h"

static char *many_csv(const mr_fit *fit)
{
    mr__strbuf b;
    size_t k, n = mr_fit_many_nlevels(fit);
    mr__strbuf_init(&b);
    mr__strbuf_printf(&b, "level,estimate,standard_error,information\r\n");
    for (k = 0; k < n; k++) {
        double est, se, info;
        const char *level = mr_fit_many_level(fit, k, &est, &se, &info);
        mr__strbuf_append_csv(&b, level, strlen(level));
        mr__csv_number(&b, est);
        mr__csv_number(&b, se);
        mr__csv_number(&b, info);
        mr__strbuf_append(&b, "\r\n", 2);
    }
    return mr__strbuf_take(&b);
}

mr_status mr_fit_write_many_csv(const mr_fit *fit, const char *path, const char *const *inputs, size_t ninputs,
                                char *msg, size_t msgcap)
{
    mr__error err;
    if (mr_fit_many_factor(fit) != NULL) return mr__csv_write(many_csv(fit), path, inputs, ninputs, msg, msgcap);
    mr__error_clear(&err);
    mr__fail(&err, MR_ERR_USAGE, "%s: the fit has no factor declared 'many'", path);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
