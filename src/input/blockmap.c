#include "common/alloc.h"
#include "input/blockmap.h"

/* Blank lines that at most double a block's bytes (a file with a blank line
 * after each row), and up to this many more, are read with the block. */
#define BLANK_SLACK (1u << 20)

mr_status mr__block_map_add(mr__block_map *m, uint64_t offset, uint64_t end, uint64_t first_line, uint32_t nrows,
                            uint64_t kept, mr__error *err)
{
    mr__block_span *s;
    if (end - offset > 2 * kept + BLANK_SLACK) m->mostly_blank = 1;
    if (mr__reserve((void **)&m->span, &m->cap, m->n + 1, sizeof *m->span) != 0)
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    s = &m->span[m->n++];
    s->offset = offset;
    s->end = end;
    s->first_line = first_line;
    s->nrows = nrows;
    return MR_OK;
}

void mr__block_map_release(mr__block_map *m)
{
    mr__free(m->span);
    m->span = NULL;
    m->n = m->cap = 0;
    m->usable = m->mostly_blank = 0;
}
