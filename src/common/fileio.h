/* fileio.h - whole reads at an offset, through interrupted and short
 * reads: the cache file's blocks and a plain input's blocks are read so. */
#ifndef MR_FILEIO_H
#define MR_FILEIO_H

#include <stddef.h>
#include <stdint.h>
#include "millrace.h"

/* Reads n bytes at offset `at` of fd into buf (any thread, any time: the
 * file position is untouched).  MR_OK when all were read; MR_ERR_IO on a
 * read error (errno says which); MR_ERR_NO_DATA when the file ends first.
 * The caller words the message. */
mr_status mr__pread_full(int fd, char *buf, size_t n, uint64_t at);

#endif
