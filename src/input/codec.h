/* codec.h - compressed input formats behind one table of operations.
 *
 * Each format is a file of its own (codec_zstd.c, codec_gzip.c) that fills
 * in an mr__codec; source.c recognises a stream by the magic bytes the
 * codecs claim and from then on calls only these operations.  A decoder
 * works on byte buffers alone - it never reads a file - so a test or a
 * fuzz target can drive one straight from memory: mr__codec_find on the
 * first bytes, open, step over the input in slices of any size (each step
 * with an empty output buffer), step again with no input left until no
 * more output comes, end with the total, close.
 *
 * Adding a format: a new file, its value in mr__compression, and one line
 * in the table of codec.c. */
#ifndef MR_CODEC_H
#define MR_CODEC_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

/* Permanent: a fit keeps the value and its JSON the name (codec.c). */
typedef enum mr__compression {
    MR__COMPRESSION_NONE = 0,
    MR__COMPRESSION_ZSTD = 1,
    MR__COMPRESSION_GZIP = 2
} mr__compression;

/* One step's buffers: the decoder reads in[in_pos, in_len) and writes
 * out[out_pos, out_cap), moving both positions on.  in_offset is where
 * in[0] lies in the compressed stream (for the offsets in messages). */
typedef struct mr__codec_io {
    const unsigned char *in;
    size_t in_len, in_pos;
    uint64_t in_offset;
    char *out;
    size_t out_cap, out_pos;
} mr__codec_io;

typedef struct mr__codec {
    const char *name;       /* "zstd": in reports, the JSON, messages */
    mr__compression id;
    size_t magic_len;       /* the bytes `claims` looks at */
    int (*claims)(const unsigned char *head); /* head: magic_len bytes */
    /* A decoder for one stream (several frames or members one after the
     * other); `display` names the input in its messages and must outlive
     * it.  MR_ERR_NO_MEMORY when it cannot be made (*dec then NULL). */
    mr_status (*open)(void **dec, const char *display, mr__error *err);
    void (*close)(void *dec); /* NULL is fine */
    /* Decodes what it can of io.  With input left and room for output it
     * always moves in_pos or out_pos on, unless it fails: MR_ERR_FORMAT for
     * a stream that is damaged or not of this format, MR_ERR_NO_MEMORY.
     * With no input left it writes out what it still holds, if anything. */
    mr_status (*step)(void *dec, mr__codec_io *io, mr__error *err);
    /* The stream ended after `total` bytes, all given to step:
     * MR_ERR_FORMAT when that is inside a frame or member. */
    mr_status (*end)(void *dec, uint64_t total, mr__error *err);
} mr__codec;

extern const mr__codec mr__codec_zstd;
extern const mr__codec mr__codec_gzip;

/* The most bytes any codec's magic takes. */
enum { MR__CODEC_MAGIC_MAX = 4 };

/* The codec whose magic begins head[0, n), or NULL (plain text).  A codec
 * whose magic is longer than n is not considered. */
const mr__codec *mr__codec_find(const unsigned char *head, size_t n);
/* "none", "zstd", "gzip"; NULL for a value no codec has. */
const char *mr__compression_name(int id);
/* The value of such a name, or -1. */
int mr__compression_from_name(const char *name);

#endif
