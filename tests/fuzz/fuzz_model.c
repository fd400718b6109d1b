/* fuzz_model.c - libFuzzer target: the model language, through the public
 * API only (include/millrace.h).
 *
 * Input: one byte of choices, then lines separated by '\n'; each line goes
 * to mr_fitter_model_line as a C string (so a NUL in it ends it early).
 *   bit 0: lines are named "fuzz.model:N" in messages, or origin NULL;
 *   bit 1: the model is then checked by a fit of a file that does not exist,
 *          which must fail on the model (MR_ERR_USAGE) or on the file
 *          (MR_ERR_IO) and nothing else.
 *
 * Checks (millrace.h): a line gives MR_OK or MR_ERR_USAGE, nothing else; a
 * failure leaves one line of message, not empty, and a success none.
 */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "millrace.h"

static void fail(const char *what, const char *line, const char *msg)
{
    fprintf(stderr, "fuzz_model: %s\n  line: \"%.200s\"\n  message: \"%.300s\"\n", what, line, msg);
    abort();
}

static void check_message(const mr_fitter *f, mr_status st, const char *line)
{
    const char *msg = mr_fitter_errmsg(f);
    if (st == MR_OK) {
        if (msg[0] != '\0') fail("a line was taken but left a message", line, msg);
        return;
    }
    if (msg[0] == '\0') fail("a line was refused without a message", line, msg);
    if (strchr(msg, '\n') != NULL) fail("the message is more than one line", line, msg);
}

/* A fit of a missing file: the model is validated first. */
static void check_validation(mr_fitter *f)
{
    mr_fit *fit = (mr_fit *)&fit;
    mr_status st;
    if (mr_fitter_set_int(f, MR_OPT_THREADS, 1) != MR_OK || mr_fitter_set_int(f, MR_OPT_NO_CACHE, 1) != MR_OK) abort();
    st = mr_fitter_run(f, "/nonexistent/millrace-fuzz/input.csv", &fit);
    if (st != MR_ERR_USAGE && st != MR_ERR_IO) fail("a fit of a missing file gave another status", "", mr_fitter_errmsg(f));
    if (fit != NULL) fail("a failed fit handed out a fit", "", mr_fitter_errmsg(f));
    check_message(f, st, "(validation)");
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    mr_fitter *f;
    size_t pos = 1, lineno = 0;
    char *line;
    if (size == 0) return 0;
    f = mr_fitter_new();
    line = malloc(size);
    if (f == NULL || line == NULL) abort();
    while (pos <= size) {
        const uint8_t *nl = pos < size ? memchr(data + pos, '\n', size - pos) : NULL;
        size_t len = nl ? (size_t)(nl - (data + pos)) : size - pos;
        char origin[32];
        mr_status st;
        memcpy(line, data + pos, len);
        line[len] = '\0';
        snprintf(origin, sizeof origin, "fuzz.model:%zu", ++lineno);
        st = mr_fitter_model_line(f, line, data[0] & 1 ? origin : NULL);
        if (st != MR_OK && st != MR_ERR_USAGE) fail("a model line gave a status other than OK or usage", line, mr_fitter_errmsg(f));
        check_message(f, st, line);
        pos += len + 1;
    }
    if (data[0] & 2) check_validation(f);
    free(line);
    mr_fitter_free(f);
    return 0;
}
