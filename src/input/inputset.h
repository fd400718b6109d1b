/* inputset.h - several files read as one data set.
 *
 * A set is a list of regular files given in order; a directory given
 * among them stands for every regular file in it (symbolic links to
 * regular files included) whose name does not start with '.', in byte
 * order of their names.  Each file has its own header row, which must
 * name the same columns as the first file's; each may be plain, zstd or
 * gzip on its own; the rows are those of the files one after the other,
 * so a fit of the set is a fit of their concatenation (without the later
 * headers), bit for bit.  Line numbers in messages are each file's own. */
#ifndef MR_INPUTSET_H
#define MR_INPUTSET_H

#include <stddef.h>
#include <stdint.h>
#include "common/error.h"

/* One file of a set as a pass read it. */
typedef struct mr__file_identity {
    uint64_t size;       /* at open */
    int64_t mtime_ns;
    uint64_t raw_bytes, out_bytes, checksum; /* the source's (source.h) */
    int compression;     /* an mr__compression */
} mr__file_identity;

typedef struct mr__inputset {
    char **path;         /* as opened */
    const char **display; /* names in messages: the paths (a directory's files as DIR/NAME) */
    size_t n;
    uint64_t total_size; /* the files' sizes when listed */
} mr__inputset;

/* The set of `paths` (directories expanded).  "-" and anything but
 * regular files and directories are MR_ERR_USAGE (they cannot be read
 * again); an empty set (an empty directory) is MR_ERR_NO_DATA. */
mr_status mr__inputset_build(mr__inputset *set, const char *const *paths, size_t n, mr__error *err);
void mr__inputset_release(mr__inputset *set);

/* Whether `path` is a directory (a set by itself). */
int mr__path_is_directory(const char *path);

/* The header of a later file against the first file's: the same bytes, or
 * the same column names (split by `delim`; 0: the delimiter detected in
 * the first).  Otherwise MR_ERR_FORMAT naming the file and the first
 * column that differs. */
mr_status mr__inputset_check_header(const char *first, size_t first_len, const char *first_display,
                                    const char *line, size_t len, const char *display, char delim, mr__error *err);

/* The set's checksum: FNV-1a 64 (common/checksum.h) over each file's
 * checksum taken as a little-endian 64-bit word, in order. */
uint64_t mr__inputset_checksum(const mr__file_identity *files, size_t n);

#endif
