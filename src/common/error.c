#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "error.h"
#include "utf8.h"

size_t mr__escape_text(char *out, size_t cap, const char *s, size_t len)
{
    static const char hex[] = "0123456789abcdef";
    size_t i, o = 0;
    if (cap == 0) return 0;
    for (i = 0; i < len; i++) {
        unsigned char c = (unsigned char)s[i];
        int control = c < 0x20 || c == 0x7f;
        if (o + (control ? 4 : 1) >= cap) break;
        if (!control) {
            out[o++] = (char)c;
            continue;
        }
        out[o++] = '\\';
        out[o++] = 'x';
        out[o++] = hex[c >> 4];
        out[o++] = hex[c & 15];
    }
    if (i < len) {
        /* cut between characters: the bytes of a character begun are
         * never control bytes, one byte out for each */
        size_t whole = mr__utf8_cut(s, i);
        o -= i - whole;
        i = whole;
    }
    out[o] = '\0';
    return i;
}

/* Messages quote header names, cells, model words: any control byte in
 * them is escaped here, once for all, so none reaches a terminal raw. */
mr_status mr__fail(mr__error *err, mr_status status, const char *fmt, ...)
{
    if (err != NULL) {
        char raw[MR__MSG_CAP];
        va_list ap;
        va_start(ap, fmt);
        mr__utf8_mend_cut(raw, sizeof raw, vsnprintf(raw, sizeof raw, fmt, ap));
        va_end(ap);
        mr__escape_text(err->msg, sizeof err->msg, raw, strlen(raw));
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
    size_t o;
    if (cap < 4) {
        mr__escape_text(out, cap, s, len);
        return;
    }
    /* room kept for "..." */
    if (mr__escape_text(out, cap - 3, s, len) == len) return;
    o = strlen(out);
    memcpy(out + o, "...", 4);
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
    case MR_ERR_CLUSTERS: return "clusters need more memory than allowed";
    }
    return "unknown status";
}
