#include <math.h>
#include <string.h>

#include "common/alloc.h"
#include "common/dtoa.h"
#include "common/outfile.h"
#include "output/csv_cells.h"

void mr__csv_number(mr__strbuf *b, double x)
{
    char t[MR__DTOA_SIZE + 1] = ",";
    mr__strbuf_append(b, t, isnan(x) ? 1 : 1 + mr__dtoa(x, t + 1));
}

mr_status mr__csv_write(char *text, const char *path, const char *const *inputs, size_t ninputs, char *msg,
                        size_t msgcap)
{
    mr__outfile *out = NULL;
    mr__error err;
    mr__error_clear(&err);
    if (text == NULL) mr__fail(&err, MR_ERR_NO_MEMORY, "%s: out of memory building the CSV", path);
    else if (mr__outfile_open(&out, path, inputs, ninputs, &err) == MR_OK) {
        if (mr__outfile_write(out, text, strlen(text), &err) == MR_OK) mr__outfile_commit(out, &err);
        else mr__outfile_abort(out);
    }
    mr__free(text);
    mr__error_export(&err, msg, msgcap);
    return err.status;
}
