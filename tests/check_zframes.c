/* check_zframes.c - a zstd file of many frames read by several threads
 * (src/input/zstd_frames.c) gives exactly the text written, for any
 * thread count and read size; its failures name the file and the frame;
 * a set of files (src/input/inputset.c) lists a directory's files in byte
 * order and holds each header to the first file's.
 *
 * Source of truth: the text this test writes, compressed by libzstd's
 * one-shot and streaming compressors frame by frame (RFC 8878: frames are
 * independent and concatenate; a skippable frame is magic 0x184D2A5?, a
 * 4-byte little-endian size and that many bytes, and carries no text). */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <zstd.h>

#include "input/inputset.h"
#include "input/source.h"
#include "check_common.h"

typedef struct {
    unsigned char *p;
    size_t n, cap;
} buf;

static void put(buf *b, const void *p, size_t n)
{
    if (b->n + n > b->cap) {
        b->cap = (b->n + n) * 2 + 64;
        b->p = realloc(b->p, b->cap);
        ck_assert_ptr_nonnull(b->p);
    }
    memcpy(b->p + b->n, p, n);
    b->n += n;
}

/* CSV text of `rows` rows: a header, then "y,x,g" rows. */
static void make_text(buf *t, size_t rows, uint64_t seed)
{
    size_t i;
    put(t, "y,x,g\n", 6);
    for (i = 0; i < rows; i++) {
        char line[64];
        int n = snprintf(line, sizeof line, "%u,%.4f,L%u\n", (unsigned)(next_random(&seed) % 7),
                         (double)(next_random(&seed) % 100000) / 1000.0, (unsigned)(next_random(&seed) % 5));
        put(t, line, (size_t)n);
    }
}

/* One frame of text[0, n): with its size in the header (one-shot) or
 * without (streamed, as a pipe into zstd gives). */
static void put_frame(buf *z, const unsigned char *text, size_t n, int with_size)
{
    size_t cap = ZSTD_compressBound(n), r;
    unsigned char *out = malloc(cap);
    ck_assert_ptr_nonnull(out);
    if (with_size) {
        r = ZSTD_compress(out, cap, text, n, 1);
    } else {
        ZSTD_CCtx *c = ZSTD_createCCtx();
        ZSTD_outBuffer ob = {out, cap, 0};
        ZSTD_inBuffer ib = {text, n, 0};
        ck_assert(!ZSTD_isError(ZSTD_CCtx_setParameter(c, ZSTD_c_contentSizeFlag, 0)));
        ck_assert(!ZSTD_isError(ZSTD_CCtx_setParameter(c, ZSTD_c_checksumFlag, 1)));
        r = ZSTD_compressStream2(c, &ob, &ib, ZSTD_e_end);
        ck_assert_uint_eq(r, 0);
        r = ob.pos;
        ZSTD_freeCCtx(c);
    }
    ck_assert(!ZSTD_isError(r));
    put(z, out, r);
    free(out);
}

static void put_skippable(buf *z, uint32_t size)
{
    unsigned char h[8] = {0x50, 0x2A, 0x4D, 0x18, (unsigned char)size, (unsigned char)(size >> 8), 0, 0};
    unsigned char zero[64] = {0};
    put(z, h, 8);
    put(z, zero, size);
}

/* The text as frames of random sizes cut anywhere (never at row ends on
 * purpose), every third without its size, a skippable frame now and then;
 * offsets[k] is where frame k starts. */
static void many_frames(buf *z, const buf *t, uint64_t seed, size_t max_piece, size_t *offsets, size_t *nframes)
{
    size_t at = 0, k = 0;
    while (at < t->n) {
        size_t n = 1 + next_random(&seed) % max_piece;
        if (n > t->n - at) n = t->n - at;
        if (k % 4 == 1) put_skippable(z, (uint32_t)(next_random(&seed) % 40));
        if (offsets) offsets[k] = z->n;
        put_frame(z, t->p + at, n, k % 3 != 2);
        at += n;
        k++;
    }
    *nframes = k;
}

static void write_file(const char *path, const buf *b)
{
    FILE *f = fopen(path, "wb");
    ck_assert_ptr_nonnull(f);
    ck_assert_uint_eq(fwrite(b->p, 1, b->n, f), b->n);
    ck_assert_int_eq(fclose(f), 0);
}

/* The whole input through a source of `threads` threads. */
static mr_status read_all(const char *path, int threads, size_t cap, buf *out, uint64_t *parallel, mr__error *err)
{
    mr__source *s;
    char *b = malloc(cap);
    mr_status st;
    ck_assert_ptr_nonnull(b);
    memset(out, 0, sizeof *out);
    mr__error_clear(err);
    ck_assert_int_eq(mr__source_open(&s, path, path, 1u << 16, -1, err), MR_OK);
    mr__source_set_threads(s, threads);
    for (;;) {
        size_t got;
        st = mr__source_read(s, b, cap, &got, err);
        if (st != MR_OK || got == 0) break;
        put(out, b, got);
    }
    *parallel = mr__source_parallel_frames(s);
    mr__source_close(s);
    free(b);
    return st;
}

static const size_t CAPS[] = {1000, 65536, 3u << 20};

START_TEST(test_many_frames_same_text)
{
    char path[] = "/tmp/mr-zframes-XXXXXX";
    buf t = {0}, z = {0};
    size_t nframes, i;
    int fd = mkstemp(path), threads;
    ck_assert_int_ge(fd, 0);
    close(fd);
    make_text(&t, 60000, 11);
    many_frames(&z, &t, 5, 40000, NULL, &nframes);
    ck_assert_uint_gt(nframes, 20);
    write_file(path, &z);
    for (threads = 1; threads <= 3; threads++)
        for (i = 0; i < sizeof CAPS / sizeof CAPS[0]; i++) {
            buf got;
            uint64_t parallel;
            mr__error err;
            ck_assert_int_eq(read_all(path, threads, CAPS[i], &got, &parallel, &err), MR_OK);
            ck_assert_uint_eq(got.n, t.n);
            ck_assert(memcmp(got.p, t.p, t.n) == 0);
            /* every frame went through the threads when there are some */
            ck_assert_uint_eq(parallel, threads > 1 ? nframes : 0);
            free(got.p);
        }
    unlink(path);
    free(t.p);
    free(z.p);
}
END_TEST

/* A frame whose text passes the most a slot holds is streamed by the
 * reading thread: 66 MiB of blank lines in one frame, rows on each side. */
START_TEST(test_oversize_frame_streamed)
{
    char path[] = "/tmp/mr-zframes-XXXXXX";
    buf t = {0}, z = {0}, blank = {0};
    size_t nframes;
    int fd = mkstemp(path);
    buf got;
    uint64_t parallel;
    mr__error err;
    ck_assert_int_ge(fd, 0);
    close(fd);
    make_text(&t, 3000, 3);
    many_frames(&z, &t, 9, 5000, NULL, &nframes);
    blank.cap = blank.n = 66u << 20;
    blank.p = malloc(blank.n);
    ck_assert_ptr_nonnull(blank.p);
    memset(blank.p, '\n', blank.n);
    put_frame(&z, blank.p, blank.n, 0);
    put(&t, blank.p, blank.n);
    put_frame(&z, (const unsigned char *)"1,2.5,L1\n", 9, 1);
    put(&t, "1,2.5,L1\n", 9);
    write_file(path, &z);
    ck_assert_int_eq(read_all(path, 2, 1u << 20, &got, &parallel, &err), MR_OK);
    ck_assert_uint_eq(got.n, t.n);
    ck_assert(memcmp(got.p, t.p, t.n) == 0);
    unlink(path);
    free(got.p);
    free(blank.p);
    free(t.p);
    free(z.p);
}
END_TEST

/* A damaged frame in the middle: MR_ERR_FORMAT naming the file and the
 * frame's offset; a file cut inside its last frame: "truncated". */
START_TEST(test_damaged_frames)
{
    char path[] = "/tmp/mr-zframes-XXXXXX", want[128];
    buf t = {0}, z = {0}, got;
    size_t offsets[4096], nframes, k;
    int fd = mkstemp(path);
    uint64_t parallel;
    mr__error err;
    ck_assert_int_ge(fd, 0);
    close(fd);
    make_text(&t, 20000, 21);
    many_frames(&z, &t, 7, 20000, offsets, &nframes);
    k = nframes / 2;
    z.p[offsets[k] + (offsets[k + 1] - offsets[k]) / 2] ^= 0x5a; /* inside frame k */
    write_file(path, &z);
    ck_assert_int_eq(read_all(path, 3, 65536, &got, &parallel, &err), MR_ERR_FORMAT);
    snprintf(want, sizeof want, "%s: corrupt zstd stream (the frame at byte %zu)", path, offsets[k]);
    ck_assert_msg(strstr(err.msg, want) != NULL, "message: %s (want %s)", err.msg, want);
    free(got.p);
    z.p[offsets[k] + (offsets[k + 1] - offsets[k]) / 2] ^= 0x5a;
    z.n -= 5;
    write_file(path, &z);
    ck_assert_int_eq(read_all(path, 2, 65536, &got, &parallel, &err), MR_ERR_FORMAT);
    ck_assert_msg(strstr(err.msg, "truncated zstd stream") != NULL && strstr(err.msg, path) != NULL, "%s", err.msg);
    free(got.p);
    z.n += 5;
    put(&z, "trailing", 8);
    write_file(path, &z);
    ck_assert_int_eq(read_all(path, 2, 65536, &got, &parallel, &err), MR_ERR_FORMAT);
    free(got.p);
    unlink(path);
    free(t.p);
    free(z.p);
}
END_TEST

/* A frame whose header gives more content than its blocks make (RFC 8878
 * 3.1.1.1.4: Frame_Content_Size is the size of the content), more than
 * any room a reader offers, after a good frame: refused by one thread and
 * by several, naming the sizes.  The frame is 28 b5 2f fd, descriptor 80
 * (a 4-byte size, no single segment), window 1c, size 0x3cb8b80f, an RLE
 * block of 1024 zero bytes (02 20 00, 00) and an empty last raw block
 * (01 00 00): found by the zframes fuzz target, whose oracle, zstd's
 * stream decoder, checks that size only with room for the whole frame. */
START_TEST(test_frame_short_of_its_header)
{
    static const unsigned char bad[] = {0x28, 0xb5, 0x2f, 0xfd, 0x80, 0x1c, 0x0f, 0xb8, 0xb8, 0x3c,
                                        0x02, 0x20, 0x00, 0x00, 0x01, 0x00, 0x00};
    static const int threads[] = {1, 3};
    char path[] = "/tmp/mr-zframes-XXXXXX";
    buf z = {0}, got;
    size_t k;
    int fd = mkstemp(path);
    uint64_t parallel;
    mr__error err;
    ck_assert_int_ge(fd, 0);
    close(fd);
    put_frame(&z, (const unsigned char *)"y,x\n1,2\n", 8, 1);
    put(&z, bad, sizeof bad);
    write_file(path, &z);
    for (k = 0; k < 2; k++) {
        ck_assert_int_eq(read_all(path, threads[k], 65536, &got, &parallel, &err), MR_ERR_FORMAT);
        ck_assert_msg(strstr(err.msg, path) != NULL && strstr(err.msg, "gives 1018738703 bytes of content") != NULL,
                      "%d threads: %s", threads[k], err.msg);
        free(got.p);
    }
    unlink(path);
    free(z.p);
}
END_TEST

/* ---- sets -------------------------------------------------------------- */

static void touch(const char *dir, const char *name, const char *text)
{
    char p[512];
    FILE *f;
    snprintf(p, sizeof p, "%s/%s", dir, name);
    f = fopen(p, "w");
    ck_assert_ptr_nonnull(f);
    fputs(text, f);
    fclose(f);
}

START_TEST(test_directory_in_byte_order)
{
    char dir[] = "/tmp/mr-set-XXXXXX", sub[600], p[600];
    const char *paths[1];
    mr__inputset set;
    mr__error err;
    ck_assert_ptr_nonnull(mkdtemp(dir));
    touch(dir, "b.csv", "y\n1\n");
    touch(dir, "B.csv", "y\n2\n"); /* 'B' (0x42) before 'a' (0x61) */
    touch(dir, "a10.csv", "y\n3\n");
    touch(dir, "a2.csv", "y\n4\n");
    touch(dir, ".hidden.csv", "z\n");
    snprintf(sub, sizeof sub, "%s/sub", dir);
    ck_assert_int_eq(mkdir(sub, 0700), 0);
    paths[0] = dir;
    ck_assert_int_eq(mr__inputset_build(&set, paths, 1, &err), MR_OK);
    ck_assert_uint_eq(set.n, 4);
    snprintf(p, sizeof p, "%s/B.csv", dir);
    ck_assert_str_eq(set.path[0], p);
    snprintf(p, sizeof p, "%s/a10.csv", dir);
    ck_assert_str_eq(set.path[1], p);
    snprintf(p, sizeof p, "%s/a2.csv", dir);
    ck_assert_str_eq(set.path[2], p);
    snprintf(p, sizeof p, "%s/b.csv", dir);
    ck_assert_str_eq(set.path[3], p);
    ck_assert_uint_eq(set.total_size, 16);
    mr__inputset_release(&set);
    paths[0] = sub;
    ck_assert_int_eq(mr__inputset_build(&set, paths, 1, &err), MR_ERR_NO_DATA);
    paths[0] = "-";
    ck_assert_int_eq(mr__inputset_build(&set, paths, 1, &err), MR_ERR_USAGE);
    snprintf(p, sizeof p, "rm -rf '%s'", dir);
    ck_assert_int_eq(system(p), 0);
}
END_TEST

START_TEST(test_headers_held_to_the_first)
{
    mr__error err;
    /* the same names, another line end or quoting: the same header */
    ck_assert_int_eq(mr__inputset_check_header("y,x,g", 5, "a", "y,x,g\r", 6, "b", ',', &err), MR_OK);
    ck_assert_int_eq(mr__inputset_check_header("y,x,g", 5, "a", "\"y\",x,g", 7, "b", 0, &err), MR_OK);
    ck_assert_int_eq(mr__inputset_check_header("y,x,g", 5, "a", "y,z,g", 5, "b", ',', &err), MR_ERR_FORMAT);
    ck_assert_str_eq(err.msg, "b:1:2: the header differs from a's: 'z' where it has 'x'");
    ck_assert_int_eq(mr__inputset_check_header("y,x", 3, "a", "y,x,g", 5, "b", ',', &err), MR_ERR_FORMAT);
    ck_assert_str_eq(err.msg, "b:1: the header has more columns than a's (column 3, 'g', is extra)");
    ck_assert_int_eq(mr__inputset_check_header("y,x,g", 5, "a", "y,x", 3, "b", ',', &err), MR_ERR_FORMAT);
    ck_assert_str_eq(err.msg, "b:1: the header has fewer columns than a's (column 3, 'g', is missing)");
}
END_TEST

/* The set's checksum: FNV-1a 64 over the files' checksums as 8 bytes
 * each, little-endian (millrace.h, mr_fitter_run_set), worked here by
 * hand with the FNV-1a 64 prime 0x100000001b3 and offset basis. */
START_TEST(test_set_checksum)
{
    mr__file_identity f[2];
    uint64_t h = 0xcbf29ce484222325ULL;
    memset(f, 0, sizeof f);
    f[0].checksum = 0x0123456789abcdefULL;
    f[1].checksum = 42;
    h = (h ^ f[0].checksum) * 0x100000001b3ULL; /* one word: the 8 bytes read little-endian */
    h = (h ^ f[1].checksum) * 0x100000001b3ULL;
    ck_assert_uint_eq(mr__inputset_checksum(f, 2), h);
}
END_TEST

static Suite *zframes_suite(void)
{
    Suite *s = suite_create("zframes");
    TCase *tc = tcase_create("frames and sets");
    tcase_add_test(tc, test_many_frames_same_text);
    tcase_add_test(tc, test_oversize_frame_streamed);
    tcase_add_test(tc, test_damaged_frames);
    tcase_add_test(tc, test_frame_short_of_its_header);
    tcase_add_test(tc, test_directory_in_byte_order);
    tcase_add_test(tc, test_headers_held_to_the_first);
    tcase_add_test(tc, test_set_checksum);
    tcase_set_timeout(tc, 300);
    suite_add_tcase(s, tc);
    return s;
}

int main(void) { return mr_check_run(zframes_suite(), 0); }
