/* fuzz_fitjson.c - libFuzzer target: mr_fit_read_json (public API) on
 * arbitrary bytes as the saved fit.
 *
 * Input: the whole of it is the file read (no control bytes).  The reader
 * takes only a path, so the bytes go to a file in a private directory
 * (in /dev/shm where there is one: the writer syncs what it writes),
 * removed when the process ends.
 *
 * Oracles (millrace.h, mr_fit_read_json):
 *   - the read ends with MR_OK, or MR_ERR_FORMAT with a message naming the
 *     file; on failure *out is NULL; nothing leaks (ASan's leak check);
 *   - a fit read is written back with mr_fit_write_json, and that file is
 *     read again: it must read, and writing that fit must give the same
 *     bytes as the file it was read from (the header's promise that
 *     writing a fit read gives the bytes of the file read).  The fuzzer's
 *     own bytes are not compared with the first write: the reader accepts
 *     any JSON spacing and key order the writer does not produce.
 */
#define _POSIX_C_SOURCE 200809L /* mkdtemp */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "millrace.h"

enum { MSG_CAP = 512 };

static char dir[64], in_path[96], out1_path[96], out2_path[96];

static void fail(const char *what, const char *msg)
{
    fprintf(stderr, "fuzz_fitjson: %s (message: \"%.300s\")\n", what, msg);
    abort();
}

static void remove_files(void)
{
    unlink(in_path);
    unlink(out1_path);
    unlink(out2_path);
    rmdir(dir);
}

static void make_dir(void)
{
    snprintf(dir, sizeof dir, "%s/millrace-fuzz-fitjson.XXXXXX", access("/dev/shm", W_OK) == 0 ? "/dev/shm" : "/tmp");
    if (mkdtemp(dir) == NULL) abort();
    snprintf(in_path, sizeof in_path, "%s/in.json", dir);
    snprintf(out1_path, sizeof out1_path, "%s/out1.json", dir);
    snprintf(out2_path, sizeof out2_path, "%s/out2.json", dir);
    atexit(remove_files);
}

static void put_file(const char *path, const uint8_t *p, size_t n)
{
    FILE *f = fopen(path, "wb");
    if (f == NULL || (n > 0 && fwrite(p, 1, n, f) != n) || fclose(f) != 0) abort();
}

/* The whole file; *n its length. */
static char *get_file(const char *path, size_t *n)
{
    FILE *f = fopen(path, "rb");
    char *p;
    long len;
    if (f == NULL || fseek(f, 0, SEEK_END) != 0 || (len = ftell(f)) < 0 || fseek(f, 0, SEEK_SET) != 0) abort();
    if ((p = malloc((size_t)len + 1)) == NULL || fread(p, 1, (size_t)len, f) != (size_t)len) abort();
    fclose(f);
    *n = (size_t)len;
    return p;
}

static void write_fit(const mr_fit *fit, const char *path)
{
    char msg[MSG_CAP];
    if (mr_fit_write_json(fit, path, msg, sizeof msg) != MR_OK) fail("a fit read could not be written", msg);
}

/* Written, read back, written again: the two writes are the same bytes. */
static void round_trip(const mr_fit *fit)
{
    char msg[MSG_CAP], *a, *b;
    size_t na, nb;
    mr_fit *again;
    write_fit(fit, out1_path);
    if (mr_fit_read_json(out1_path, &again, msg, sizeof msg) != MR_OK) fail("a fit written does not read back", msg);
    write_fit(again, out2_path);
    mr_fit_free(again);
    a = get_file(out1_path, &na);
    b = get_file(out2_path, &nb);
    if (na != nb || memcmp(a, b, na) != 0) fail("writing the fit read gives other bytes than the file read", "");
    free(a);
    free(b);
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    char msg[MSG_CAP];
    mr_fit *fit = (mr_fit *)&fit; /* not NULL: the reader must set it */
    mr_status st;
    if (dir[0] == '\0') make_dir();
    put_file(in_path, data, size);
    st = mr_fit_read_json(in_path, &fit, msg, sizeof msg);
    if (st != MR_OK) {
        if (st != MR_ERR_FORMAT) fail("a read gave a status other than OK or malformed input", msg);
        if (fit != NULL) fail("a failed read left *out set", msg);
        if (strstr(msg, "in.json") == NULL) fail("the message does not name the file", msg);
        return 0;
    }
    if (fit == NULL) fail("a read gave MR_OK and no fit", "");
    round_trip(fit);
    mr_fit_free(fit);
    return 0;
}
