/* store.h - decoded blocks kept for the later passes.
 *
 * Decompressing and parsing cost far more than one IRLS step, so the first
 * pass keeps each decoded block and the IRLS passes replay them:
 * in memory (--in-memory, the in-memory reference fit), or by default in
 * a temporary file that is unlinked as soon as it is created, so that it
 * vanishes however the process ends and memory stays flat.  Replayed
 * blocks hold the same numbers as decoded ones, so results are the same
 * bits either way. */
#ifndef MR_STORE_H
#define MR_STORE_H

#include <stdint.h>
#include "accum/decode.h"

typedef struct mr__store {
    int fd;              /* file backend, or -1 for memory */
    mr__block *block;    /* memory backend */
    int packed;          /* the packed memory backend (fd -1) */
    char **packs;        /* its block i's bytes */
    char **spare;        /* buffers of dropped blocks, for mr__store_adopt_packed */
    size_t nspare;
    uint64_t *offset;    /* file backend: start of block i; offset[n] = end */
    size_t n, cap;
    char *pack;          /* staging buffer for one packed block */
    size_t pack_cap;
    uint64_t bytes;
    uint64_t budget;     /* file backend: bytes it may take (0: no limit) */
    /* Blocks kept by the first pass carry their decoder's own level
     * numbers; remap[worker * nfac + f][local] is the shared number. */
    int32_t **remap;
    size_t nfac;
    /* The block its entry 0 holds: 0, or where a pass over a range of
     * blocks began keeping them (mr__pass_cfg.range). */
    uint64_t first_block;
} mr__store;

void mr__store_init_memory(mr__store *s);
/* Blocks kept in their packed form in memory (a sample of the file, or
 * every block with --in-memory: a fifth of the bytes of decoded rows, and
 * as many fewer pages to fault in).  Filled with mr__store_add_packed or
 * mr__store_keep. */
void mr__store_init_packed(mr__store *s);
/* A file store in `dir`; MR_ERR_IO if it cannot be created. */
mr_status mr__store_init_file(mr__store *s, const char *dir, mr__error *err);
void mr__store_release(mr__store *s);

/* Bytes one kept row takes, for the free-space check. */
size_t mr__store_row_bytes(const mr__binding *b);

/* Keeps block `*blk` as the next one.  The memory backend takes the block
 * itself and gives the caller a fresh one in its place; the file and the
 * packed memory backends pack it and write or copy the bytes. */
mr_status mr__store_keep(mr__store *s, mr__block *blk, const mr__binding *b, mr__error *err);

/* The file backend's packed form of a block (store.c says why it is
 * compact), so that workers pack and unpack in parallel and the threads
 * that keep the order only write and read bytes.  A packed block takes at
 * most mr__store_pack_bound bytes; mr__store_pack returns its size. */
size_t mr__store_pack_bound(const mr__binding *b);
size_t mr__store_pack(const mr__block *blk, const mr__binding *b, char *out);
/* Writes a packed block as the next one (file backend).  MR_ERR_IO when
 * the write fails or would take the file past its budget. */
mr_status mr__store_append(mr__store *s, const char *packed, size_t bytes, mr__error *err);
/* 1 when the store keeps blocks as packed bytes (file, packed memory). */
int mr__store_keeps_bytes(const mr__store *s);
/* A packed block as the next one: written to the file or copied. */
mr_status mr__store_put_packed(mr__store *s, const char *packed, size_t bytes, mr__error *err);
/* Reads packed block i into buf (file backend; at most the bound). */
mr_status mr__store_read(const mr__store *s, size_t i, char *buf, mr__error *err);
/* Packed memory backend: keeps a copy of a packed block as the next one;
 * block i's bytes; drops every other block (those at odd positions). */
mr_status mr__store_add_packed(mr__store *s, const char *packed, size_t bytes, mr__error *err);
const char *mr__store_packed(const mr__store *s, size_t i);
void mr__store_drop_odd(mr__store *s);
/* Packed memory backend: takes over *buf (mr__store_pack_bound bytes from
 * mr__malloc, `bytes` of them packed) as the next block, and puts in *buf
 * a buffer of the same size to pack into next: one a dropped block left
 * (mr__store_drop_odd keeps them), or NULL.  For a store that drops blocks
 * (the first pass's sample), it saves a copy of every block kept, and
 * fresh pages for every block kept after others were dropped: in the first
 * pass over 2e6 rows, 52 ms of the thread that adds the blocks in order.
 * A store filled this way is filled this way only. */
mr_status mr__store_adopt_packed(mr__store *s, char **buf, size_t bytes, mr__error *err);
/* Unpacks block i into dst and maps its level numbers. */
void mr__store_unpack(const mr__store *s, const char *packed, size_t i, const mr__binding *b, mr__block *dst);

/* Installs the level maps of the first pass (the store does not own them;
 * they must outlive it).  A memory store is rewritten at once; a file or
 * packed store maps each block as it is loaded. */
void mr__store_remap(mr__store *s, int32_t **remap, size_t nfac);

#endif
