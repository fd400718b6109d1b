/* fileio.h - whole reads at an offset, through interrupted and short
 * reads: the cache file's blocks and a plain input's blocks are read so. */
#ifndef MR_FILEIO_H
#define MR_FILEIO_H

#include <stddef.h>
#include <stdint.h>

/* Reads n bytes at offset `at` of fd into buf (any thread, any time: the
 * file position is untouched).  0 when all were read; -1 on a read error
 * (errno says which); 1 when the file ends first. */
int mr__pread_full(int fd, char *buf, size_t n, uint64_t at);

#endif
