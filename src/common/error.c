#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "error.h"
#include "utf8.h"

mr_status mr__fail(mr__error *err, mr_status status, const char *fmt, ...)
{
    if (err != NULL) {
        va_list ap;
        int written;
        va_start(ap, fmt);
        written = vsnprintf(err->msg, sizeof err->msg, fmt, ap);
        va_end(ap);
        mr__utf8_mend_cut(err->msg, sizeof err->msg, written);
        err->status = status;
    }
    return status;
}

void mr__error_clear(mr__error *err)
{
    err->status = MR_OK;
    err->msg[0] = '\0';
}

void mr__error_export(const mr__error *err, char *msg, size_t cap)
{
    if (cap > 0) mr__utf8_mend_cut(msg, cap, snprintf(msg, cap, "%s", err->msg));
}

void mr__quote_value(char *out, size_t cap, const char *s, size_t len)
{
    size_t i, o = 0, keep = len;
    if (cap == 0) return;
    /* a cell cut short is cut between characters, never inside one */
    if (cap < 5) keep = 0;
    else if (len > cap - 4) keep = mr__utf8_cut(s, cap - 4);
    for (i = 0; i < keep; i++) {
        unsigned char c = (unsigned char)s[i];
        out[o++] = (c < 0x20 || c == 0x7f) ? '?' : (char)c;
    }
    if (keep < len && o + 4 <= cap) {
        memcpy(out + o, "...", 3);
        o += 3;
    }
    out[o] = '\0';
}

const char *mr_strerror(mr_status status)
{
    switch (status) {
    case MR_OK: return "success";
    case MR_ERR_USAGE: return "bad option or model description";
    case MR_ERR_IO: return "input/output error";
    case MR_ERR_FORMAT: return "malformed input";
    case MR_ERR_DOMAIN: return "value outside the model's domain";
    case MR_ERR_NO_DATA: return "no usable data";
    case MR_ERR_NOT_CONVERGED: return "fit did not converge";
    case MR_ERR_NO_MEMORY: return "out of memory";
    case MR_ERR_INTERNAL: return "internal error";
    case MR_ERR_NUMERIC: return "numerical breakdown";
    case MR_ERR_STOPPED: return "stopped by the progress callback";
    case MR_DRIFT_FLAGGED: return "a comparison of two fits flagged a change";
    }
    return "unknown status";
}
