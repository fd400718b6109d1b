#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/checksum.h"
#include "common/fileio.h"
#include "common/sysio.h"
#include "input/codec.h"
#include "input/source.h"
#include "input/zstd_frames.h"

struct mr__source {
    int fd, owns_fd, tee_fd;
    const char *display;
    char *raw;            /* raw read buffer */
    size_t raw_cap, raw_len, raw_pos;
    int eof, sniffed, is_file;
    const mr__codec *codec; /* NULL: plain text */
    void *dec;              /* the codec's decoder */
    int threads;            /* > 1: a zstd file's frames decoded by this many threads */
    mr__zframes *zf;        /* those threads, or NULL */
    uint64_t raw_bytes, out_bytes, size, checksum;
    int64_t mtime_ns;
    char carry[8]; /* bytes of a checksum word not yet complete */
    size_t carry_len;
};

static int64_t mtime_of(const struct stat *st)
{
    return (int64_t)st->st_mtim.tv_sec * 1000000000 + st->st_mtim.tv_nsec;
}

mr_status mr__source_open(mr__source **out, const char *path, const char *display, size_t read_size,
                          int tee_fd, mr__error *err)
{
    struct stat st;
    mr__source *s = mr__calloc(1, sizeof *s);
    *out = NULL;
    if (s == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s->display = display;
    s->tee_fd = tee_fd;
    s->checksum = MR__FNV_OFFSET;
    s->raw_cap = read_size < 16 ? 16 : read_size;
    s->raw = mr__malloc(s->raw_cap);
    if (s->raw == NULL) {
        mr__free(s);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    if (strcmp(path, "-") == 0) {
        s->fd = STDIN_FILENO;
    } else {
        s->fd = open(path, O_RDONLY);
        if (s->fd < 0) {
            int e = errno;
            mr__source_close(s);
            return mr__fail(err, MR_ERR_IO, "%s: cannot open: %s", display, strerror(e));
        }
        s->owns_fd = 1;
    }
    if (fstat(s->fd, &st) == 0) {
        if (S_ISDIR(st.st_mode)) {
            mr__source_close(s);
            return mr__fail(err, MR_ERR_IO, "%s: is a directory", display);
        }
        if (S_ISREG(st.st_mode)) {
            s->is_file = 1;
            s->size = (uint64_t)st.st_size;
            s->mtime_ns = mtime_of(&st);
        }
    }
    *out = s;
    return MR_OK;
}

void mr__source_close(mr__source *s)
{
    if (s == NULL) return;
    if (s->owns_fd) close(s->fd);
    if (s->codec != NULL) s->codec->close(s->dec);
    mr__zframes_close(s->zf);
    mr__free(s->raw);
    mr__free(s);
}

/* The checksum is over the stream taken as 64-bit words (common/checksum.h);
 * reads may end anywhere, so a partial word is carried to the next read. */
static void absorb(mr__source *s, const char *p, size_t n)
{
    size_t i = 0, whole;
    s->raw_bytes += n;
    while (s->carry_len > 0 && s->carry_len < 8 && i < n) s->carry[s->carry_len++] = p[i++];
    if (s->carry_len == 8) {
        s->checksum = mr__fnv_words(s->checksum, s->carry, 8);
        s->carry_len = 0;
    }
    whole = (n - i) / 8 * 8;
    s->checksum = mr__fnv_words(s->checksum, p + i, whole);
    for (i += whole; i < n; i++) s->carry[s->carry_len++] = p[i];
}

static mr_status tee(mr__source *s, const char *p, size_t n, mr__error *err)
{
    while (n > 0) {
        ssize_t w = mr__write(s->tee_fd, p, n);
        if (w < 0) {
            if (errno == EINTR) continue;
            return mr__fail(err, MR_ERR_IO,
                            "%s can be read only once, and its copy for the later passes cannot be written: %s "
                            "(set TMPDIR to a directory with room for the whole input)",
                            s->display, strerror(errno));
        }
        p += w;
        n -= (size_t)w;
    }
    return MR_OK;
}

/* One read(2) into buf, checksummed (and copied to the tee); sets eof at
 * the end of the input. */
static mr_status read_into(mr__source *s, char *buf, size_t cap, size_t *got, mr__error *err)
{
    ssize_t n;
    do {
        n = mr__read(s->fd, buf, cap);
    } while (n < 0 && errno == EINTR);
    if (n < 0) return mr__fail(err, MR_ERR_IO, "%s: read error: %s", s->display, strerror(errno));
    *got = (size_t)n;
    if (n == 0) {
        s->eof = 1;
        return MR_OK;
    }
    absorb(s, buf, (size_t)n);
    if (s->tee_fd >= 0) return tee(s, buf, (size_t)n, err);
    return MR_OK;
}

/* Refills the raw buffer once it is used up. */
static mr_status fill_raw(mr__source *s, mr__error *err)
{
    if (s->raw_pos < s->raw_len || s->eof) return MR_OK;
    s->raw_pos = 0;
    s->raw_len = 0;
    return read_into(s, s->raw, s->raw_cap, &s->raw_len, err);
}

/* Raw bytes for the frame threads (zstd_frames.h): checksummed and teed
 * like every other read. */
static mr_status pull_raw(void *user, char *buf, size_t cap, size_t *got, mr__error *err)
{
    mr__source *s = user;
    *got = 0;
    if (s->eof) return MR_OK;
    return read_into(s, buf, cap, got, err);
}

/* A codec's magic starts the stream (input/codec.h): the input is
 * compressed.  Needs the first MR__CODEC_MAGIC_MAX bytes, which may take
 * several reads, of at most SNIFF_READ bytes: plain text is then read
 * straight into the caller's buffers, and what the first read took is
 * copied there again. */
enum { SNIFF_READ = 64u << 10 };

static mr_status sniff(mr__source *s, mr__error *err)
{
    const mr__codec *codec;
    while (s->raw_len - s->raw_pos < MR__CODEC_MAGIC_MAX && !s->eof) {
        /* Keep what we have and append: the first reads may be tiny. */
        size_t have = s->raw_len - s->raw_pos, room = s->raw_cap - have, got;
        memmove(s->raw, s->raw + s->raw_pos, have);
        s->raw_pos = 0;
        s->raw_len = have;
        MR__TRY(read_into(s, s->raw + have, room < SNIFF_READ ? room : SNIFF_READ, &got, err));
        s->raw_len += got;
    }
    s->sniffed = 1;
    codec = mr__codec_find((const unsigned char *)s->raw + s->raw_pos, s->raw_len - s->raw_pos);
    if (codec == NULL) return MR_OK;
    if (codec->id == MR__COMPRESSION_ZSTD && s->threads > 1) {
        MR__TRY(mr__zframes_open(&s->zf, s->threads, s->display, pull_raw, s,
                                 (const unsigned char *)s->raw + s->raw_pos, s->raw_len - s->raw_pos, err));
        s->raw_pos = s->raw_len;
        s->codec = codec;
        return MR_OK;
    }
    MR__TRY(codec->open(&s->dec, s->display, err));
    s->codec = codec;
    return MR_OK;
}

/* Once the bytes read to sniff the format are used up, plain text is read
 * straight into the caller's buffer: a copy of the whole file less on the
 * reader thread, which every worker waits for. */
static mr_status read_plain(mr__source *s, char *buf, size_t cap, size_t *got, mr__error *err)
{
    size_t n;
    if (s->raw_pos == s->raw_len) return s->eof ? MR_OK : read_into(s, buf, cap, got, err);
    n = s->raw_len - s->raw_pos;
    if (n > cap) n = cap;
    memcpy(buf, s->raw + s->raw_pos, n);
    s->raw_pos += n;
    *got = n;
    return MR_OK;
}

/* Raw bytes through the codec until some text comes out or the input
 * ends (where the codec says whether it ended in the middle of a frame). */
static mr_status read_compressed(mr__source *s, char *buf, size_t cap, size_t *got, mr__error *err)
{
    mr__codec_io io = {NULL, 0, 0, 0, buf, cap, 0};
    while (io.out_pos == 0) {
        MR__TRY(fill_raw(s, err));
        if (s->raw_pos == s->raw_len && s->eof) {
            MR__TRY(s->codec->end(s->dec, s->raw_bytes, err));
            break;
        }
        io.in = (const unsigned char *)s->raw;
        io.in_len = s->raw_len;
        io.in_pos = s->raw_pos;
        io.in_offset = s->raw_bytes - s->raw_len; /* raw[raw_len - 1] is the last byte read */
        MR__TRY(s->codec->step(s->dec, &io, err));
        if (io.in_pos == s->raw_pos && io.out_pos == 0)
            return mr__fail(err, MR_ERR_INTERNAL, "%s: the %s decoder made no progress at offset %llu", s->display,
                            s->codec->name, (unsigned long long)(io.in_offset + io.in_pos));
        s->raw_pos = io.in_pos;
    }
    *got = io.out_pos;
    return MR_OK;
}

mr_status mr__source_read(mr__source *s, char *buf, size_t cap, size_t *got, mr__error *err)
{
    *got = 0;
    if (!s->sniffed) MR__TRY(sniff(s, err));
    if (s->zf != NULL) MR__TRY(mr__zframes_read(s->zf, buf, cap, got, err));
    else MR__TRY(s->codec ? read_compressed(s, buf, cap, got, err) : read_plain(s, buf, cap, got, err));
    s->out_bytes += *got;
    return MR_OK;
}

void mr__source_set_threads(mr__source *s, int threads)
{
    s->threads = threads > MR__ZFRAME_THREADS_MAX ? MR__ZFRAME_THREADS_MAX : threads;
}

uint64_t mr__source_parallel_frames(const mr__source *s) { return s->zf ? mr__zframes_parallel_frames(s->zf) : 0; }

uint64_t mr__source_raw_bytes(const mr__source *s) { return s->raw_bytes; }
uint64_t mr__source_size(const mr__source *s) { return s->size; }
uint64_t mr__source_out_bytes(const mr__source *s) { return s->out_bytes; }
int mr__source_compression(const mr__source *s) { return s->codec ? (int)s->codec->id : MR__COMPRESSION_NONE; }
int mr__source_is_zstd(const mr__source *s) { return mr__source_compression(s); }
int mr__source_is_file(const mr__source *s) { return s->is_file; }

mr_status mr__source_pread(const mr__source *s, char *buf, size_t n, uint64_t offset, mr__error *err)
{
    mr_status rc = mr__pread_full(s->fd, buf, n, offset);
    if (rc == MR_ERR_IO) return mr__fail(err, MR_ERR_IO, "%s: read error: %s", s->display, strerror(errno));
    if (rc != MR_OK)
        return mr__fail(err, MR_ERR_IO, "%s: the file changed during the fit (it ends before byte %llu)", s->display,
                        (unsigned long long)(offset + n));
    return MR_OK;
}

uint64_t mr__source_checksum(const mr__source *s) { return mr__fnv_words(s->checksum, s->carry, s->carry_len); }

mr_status mr__source_check_unchanged(const mr__source *s, int read_to_end, mr__error *err)
{
    struct stat st;
    if (!s->is_file) return MR_OK;
    if (fstat(s->fd, &st) != 0) return mr__fail(err, MR_ERR_IO, "%s: cannot stat: %s", s->display, strerror(errno));
    if ((uint64_t)st.st_size != s->size || mtime_of(&st) != s->mtime_ns)
        return mr__fail(err, MR_ERR_IO, "%s: the file changed during the fit (%llu bytes when opened, %llu now)",
                        s->display, (unsigned long long)s->size, (unsigned long long)st.st_size);
    if (read_to_end && s->raw_bytes != s->size)
        return mr__fail(err, MR_ERR_IO, "%s: the file changed during the fit (%llu bytes when opened, it ended after %llu)",
                        s->display, (unsigned long long)s->size, (unsigned long long)s->raw_bytes);
    return MR_OK;
}

void mr__source_identity(const mr__source *s, uint64_t *size, int64_t *mtime_ns)
{
    *size = s->size;
    *mtime_ns = s->mtime_ns;
}
