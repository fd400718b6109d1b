/* check_json.c - the fit's JSON: text that is not UTF-8, text cut to a
 * length, and (below) reading a fit back.
 *
 * Sources of truth, named beside each check:
 *   - RFC 3629 (UTF-8): well-formed sequences, overlong forms, surrogates
 *     and the U+10FFFF limit, with byte sequences typed in from its table;
 *   - the escape README ("JSON output") and src/output/json_text.h
 *     document: a stray byte is \xHH, a backslash is doubled.
 */
#include <check.h>
#include <stdlib.h>
#include <string.h>

#include "common/alloc.h"
#include "common/error.h"
#include "common/utf8.h"
#include "output/json_text.h"
#include "check_common.h"

/* RFC 3629, section 4: lengths of well-formed characters and of bytes that
 * begin none. */
START_TEST(char_lengths)
{
    ck_assert_uint_eq(mr__utf8_char_len("a", 1), 1);
    ck_assert_uint_eq(mr__utf8_char_len("\xc3\xa9", 2), 2);         /* U+00E9 */
    ck_assert_uint_eq(mr__utf8_char_len("\xe2\x82\xac", 3), 3);     /* U+20AC */
    ck_assert_uint_eq(mr__utf8_char_len("\xf0\x9f\x98\x80", 4), 4); /* U+1F600 */
    ck_assert_uint_eq(mr__utf8_char_len("\xe9", 1), 0);             /* Latin-1 e-acute */
    ck_assert_uint_eq(mr__utf8_char_len("\xe9t\xe9", 3), 0);
    ck_assert_uint_eq(mr__utf8_char_len("\xc0\xaf", 2), 0);         /* overlong '/' */
    ck_assert_uint_eq(mr__utf8_char_len("\xe0\x80\xaf", 3), 0);     /* overlong '/' */
    ck_assert_uint_eq(mr__utf8_char_len("\xed\xa0\x80", 3), 0);     /* surrogate D800 */
    ck_assert_uint_eq(mr__utf8_char_len("\xf4\x90\x80\x80", 4), 0); /* above U+10FFFF */
    ck_assert_uint_eq(mr__utf8_char_len("\xe2\x82", 2), 0);         /* cut short */
    ck_assert_uint_eq(mr__utf8_char_len("\x80", 1), 0);             /* lone continuation */
}
END_TEST

/* A cut never ends inside a well-formed character; stray bytes are kept. */
START_TEST(cuts)
{
    const char *euros = "a\xe2\x82\xac\xe2\x82\xac"; /* a + two U+20AC */
    ck_assert_uint_eq(mr__utf8_cut(euros, 7), 7);
    ck_assert_uint_eq(mr__utf8_cut(euros, 6), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 5), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 4), 4);
    ck_assert_uint_eq(mr__utf8_cut(euros, 3), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 2), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 1), 1);
    ck_assert_uint_eq(mr__utf8_cut(euros, 0), 0);
    ck_assert_uint_eq(mr__utf8_cut("\xf0\x9f\x98\x80", 3), 0);
    ck_assert_uint_eq(mr__utf8_cut("\xf0\x9f\x98\x80", 4), 4);
    ck_assert_uint_eq(mr__utf8_cut("x\xe0\x80", 3), 3); /* no character begins at E0 80 */
    ck_assert_uint_eq(mr__utf8_cut("ab\x80\x80\x80", 5), 5);
}
END_TEST

/* snprintf then the mend, out of the compiler's sight (it warns of a cut
 * it can foresee, and a cut is the point here). */
static __attribute__((noinline)) void print_cut(char *buf, size_t cap, const char *text)
{
    mr__utf8_mend_cut(buf, cap, snprintf(buf, cap, "%s", text));
}

START_TEST(mended_messages)
{
    char buf[8];
    mr__error err;
    char big[3000];
    size_t i;
    /* "ab" + U+20AC U+20AC: 8 bytes into 8 leaves "ab" + one euro */
    print_cut(buf, sizeof buf, "ab\xe2\x82\xac\xe2\x82\xac");
    ck_assert_str_eq(buf, "ab\xe2\x82\xac");
    /* not cut: a trailing stray byte stays */
    print_cut(buf, sizeof buf, "ab\xe2");
    ck_assert_str_eq(buf, "ab\xe2");
    for (i = 0; i + 2 < sizeof big; i += 2) memcpy(big + i, "\xc3\xa9", 2);
    big[i] = '\0';
    mr__fail(&err, MR_ERR_FORMAT, "%s", big); /* 1023 bytes would end inside a character */
    ck_assert_uint_eq(strlen(err.msg), MR__MSG_CAP - 2);
    ck_assert_uint_eq(mr__utf8_cut(err.msg, strlen(err.msg)), strlen(err.msg));
}
END_TEST

START_TEST(quoted_cells)
{
    char out[16], cell[40];
    size_t i;
    cell[0] = 'a';
    for (i = 1; i + 3 <= sizeof cell - 1; i += 3) memcpy(cell + i, "\xe2\x82\xac", 3);
    /* 12 bytes fit: 'a' + three euros is 10, the fourth would split */
    mr__quote_value(out, sizeof out, cell, i);
    ck_assert_str_eq(out, "a\xe2\x82\xac\xe2\x82\xac\xe2\x82\xac...");
    mr__quote_value(out, sizeof out, "short\x01", 6);
    ck_assert_str_eq(out, "short?");
}
END_TEST

static char *unescaped(const char *s, mr_status want)
{
    char *out = NULL;
    ck_assert_int_eq(mr__json_unescape(s, strlen(s), &out), want);
    return out;
}

/* The escape of json_text.h: stray bytes as \xHH, backslashes doubled,
 * well-formed text as it is; and back. */
START_TEST(escape_round_trip)
{
    char all[256], *e, *back;
    int c;
    e = mr__json_escape("r\xe9gion \\ \xc3\xa9t\xc3\xa9 \xe2\x82");
    ck_assert_str_eq(e, "r\\xE9gion \\\\ \xc3\xa9t\xc3\xa9 \\xE2\\x82");
    back = unescaped(e, MR_OK);
    ck_assert_str_eq(back, "r\xe9gion \\ \xc3\xa9t\xc3\xa9 \xe2\x82");
    mr__free(e);
    mr__free(back);
    /* every byte value, in one string */
    for (c = 1; c < 256; c++) all[c - 1] = (char)c;
    all[255] = '\0';
    e = mr__json_escape(all);
    back = unescaped(e, MR_OK);
    ck_assert_str_eq(back, all);
    mr__free(e);
    mr__free(back);
    ck_assert_ptr_null(unescaped("a\\n", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\x4", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\xZZ", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\x00", MR_ERR_FORMAT));
    ck_assert_ptr_null(unescaped("a\\", MR_ERR_FORMAT));
}
END_TEST

static Suite *json_suite(void)
{
    Suite *s = suite_create("json");
    TCase *t = tcase_create("text");
    tcase_add_test(t, char_lengths);
    tcase_add_test(t, cuts);
    tcase_add_test(t, mended_messages);
    tcase_add_test(t, quoted_cells);
    tcase_add_test(t, escape_round_trip);
    suite_add_tcase(s, t);
    return s;
}

int main(void) { return mr_check_run(json_suite(), 1); }
