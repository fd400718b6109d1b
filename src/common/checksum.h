/* checksum.h - FNV-1a 64 over bytes taken as little-endian 64-bit words:
 * the input's checksum (input/source.c), and each block's rows, which the
 * passes that reread a file by the block map compare (accum/pass.c). */
#ifndef MR_CHECKSUM_H
#define MR_CHECKSUM_H

#include <stddef.h>
#include <stdint.h>

#define MR__FNV_OFFSET 0xcbf29ce484222325ULL

/* h carried over n bytes as words; a last partial word is zero-padded, so
 * only the end of the data may hold one. */
uint64_t mr__fnv_words(uint64_t h, const char *p, size_t n);

#endif
