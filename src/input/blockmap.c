#include "common/alloc.h"
#include "common/checksum.h"
#include "input/blockmap.h"

/* Blank lines that at most double a block's bytes (a file with a blank line
 * after each row), and up to this many more, are read with the block. */
#define BLANK_SLACK (1u << 20)

uint64_t mr__chunk_rows_hash(const mr__chunk *c) { return mr__fnv_words(MR__FNV_OFFSET, c->data, c->len); }

mr_status mr__block_map_add(mr__block_map *m, const mr__chunk *c, uint64_t rows_hash, mr__error *err)
{
    mr__block_span *s;
    if (c->end - c->offset > 2 * (uint64_t)c->len + BLANK_SLACK) m->mostly_blank = 1;
    if (mr__reserve((void **)&m->span, &m->cap, m->n + 1, sizeof *m->span) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s = &m->span[m->n++];
    s->offset = c->offset;
    s->end = c->end;
    s->first_line = c->first_line;
    s->nrows = c->nrows;
    s->rows_hash = rows_hash;
    return MR_OK;
}

void mr__block_map_release(mr__block_map *m)
{
    mr__free(m->span);
    m->span = NULL;
    m->n = m->cap = 0;
    m->usable = m->mostly_blank = 0;
}
