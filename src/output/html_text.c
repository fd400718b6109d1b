#include <math.h>
#include <stdio.h>
#include <string.h>

#include "common/alloc.h"
#include "common/utf8.h"
#include "output/html_text.h"
#include "output/json_text.h"

static const char hex_digits[] = "0123456789ABCDEF";

static void put_bytes_visibly(mr__strbuf *b, const char *s, size_t n)
{
    size_t i;
    for (i = 0; i < n; i++) {
        unsigned char c = (unsigned char)s[i];
        char e[4] = {'\\', 'x', hex_digits[c >> 4], hex_digits[c & 15]};
        mr__strbuf_append(b, e, 4);
    }
}

static int is_control(const unsigned char *s, size_t k)
{
    if (k == 1) return s[0] < 0x20 || s[0] == 0x7F;
    return k == 2 && s[0] == 0xC2 && s[1] < 0xA0; /* U+0080..U+009F */
}

static void put_escaped(mr__strbuf *b, const char *e)
{
    size_t n = strlen(e), i = 0;
    while (i < n) {
        size_t k = mr__utf8_char_len(e + i, n - i);
        const char *ref = NULL;
        switch (e[i]) {
        case '&': ref = "&amp;"; break;
        case '<': ref = "&lt;"; break;
        case '>': ref = "&gt;"; break;
        case '"': ref = "&quot;"; break;
        case '\'': ref = "&#39;"; break;
        }
        if (k == 0) k = 1; /* not after the JSON escape; kept safe anyway */
        if (ref) mr__strbuf_append(b, ref, strlen(ref));
        else if (is_control((const unsigned char *)e + i, k) || mr__utf8_char_len(e + i, n - i) == 0)
            put_bytes_visibly(b, e + i, k);
        else mr__strbuf_append(b, e + i, k);
        i += k;
    }
}

void mr__html_text(mr__strbuf *b, const char *s)
{
    char *e;
    if (s == NULL) return;
    if ((e = mr__json_escape(s)) == NULL) {
        b->failed = 1;
        return;
    }
    put_escaped(b, e);
    mr__free(e);
}

void mr__html_number(mr__strbuf *b, double x, int digits)
{
    char buf[64];
    if (isnan(x)) {
        mr__strbuf_printf(b, "-");
        return;
    }
    if (isinf(x)) {
        mr__strbuf_printf(b, "%sinfinity", x < 0 ? "&#8722;" : "");
        return;
    }
    snprintf(buf, sizeof buf, "%.*g", digits, x);
    if (buf[0] == '-') mr__strbuf_printf(b, "&#8722;%s", buf + 1);
    else mr__strbuf_printf(b, "%s", buf);
}

void mr__html_p_value(mr__strbuf *b, double p)
{
    if (isnan(p)) mr__strbuf_printf(b, "-");
    else if (p < 1e-16) mr__strbuf_printf(b, "&lt; 1e-16");
    else mr__html_number(b, p, 3);
}
