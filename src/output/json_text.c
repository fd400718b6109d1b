#include <string.h>

#include "common/alloc.h"
#include "common/utf8.h"
#include "output/json_text.h"

static const char hex_digits[] = "0123456789ABCDEF";

char *mr__json_escape(const char *s)
{
    size_t n = strlen(s), i = 0, o = 0;
    char *out = mr__malloc_array(n + 1, 4); /* every byte may take four */
    if (out == NULL) return NULL;
    while (i < n) {
        size_t k = mr__utf8_char_len(s + i, n - i);
        unsigned char c = (unsigned char)s[i];
        if (c == '\\') {
            out[o++] = '\\';
            out[o++] = '\\';
            i++;
        } else if (k == 0) {
            out[o++] = '\\';
            out[o++] = 'x';
            out[o++] = hex_digits[c >> 4];
            out[o++] = hex_digits[c & 15];
            i++;
        } else {
            memcpy(out + o, s + i, k);
            o += k;
            i += k;
        }
    }
    out[o] = '\0';
    return out;
}

json_t *mr__json_text(const char *s)
{
    char *e;
    json_t *v;
    if (s == NULL) return json_null();
    if ((e = mr__json_escape(s)) == NULL) return NULL;
    /* well-formed UTF-8 by construction: jansson fails only for memory */
    v = json_string(e);
    mr__free(e);
    return v;
}

static int hex_value(char c)
{
    const char *p = c ? strchr(hex_digits, c >= 'a' && c <= 'f' ? c - 'a' + 'A' : c) : NULL;
    return p ? (int)(p - hex_digits) : -1;
}

mr_status mr__json_unescape(const char *s, size_t n, char **out)
{
    char *t = mr__malloc(n + 1);
    size_t i, o = 0;
    *out = NULL;
    if (t == NULL) return MR_ERR_NO_MEMORY;
    for (i = 0; i < n; i++) {
        int hi, lo;
        if (s[i] == '\0') break;
        if (s[i] != '\\') {
            t[o++] = s[i];
            continue;
        }
        if (i + 1 < n && s[i + 1] == '\\') {
            t[o++] = '\\';
            i++;
            continue;
        }
        if (i + 3 >= n || s[i + 1] != 'x' || (hi = hex_value(s[i + 2])) < 0 || (lo = hex_value(s[i + 3])) < 0 ||
            hi + lo == 0)
            break;
        t[o++] = (char)(hi << 4 | lo);
        i += 3;
    }
    if (i < n) {
        mr__free(t);
        return MR_ERR_FORMAT;
    }
    t[o] = '\0';
    *out = t;
    return MR_OK;
}
