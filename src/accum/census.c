#include "common/alloc.h"
#include "accum/census.h"

mr_status mr__census_init(mr__level_census *c, const mr__binding *b, mr__error *err)
{
    size_t f;
    c->nfac = b->nfac;
    c->seen = mr__calloc(b->nfac + 1, sizeof *c->seen);
    if (c->seen == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (f = 0; f < b->nfac; f++) {
        mr__levelset_init(&c->seen[f]);
        c->seen[f].limit = mr__factor_level_limit(b, f);
    }
    return MR_OK;
}

void mr__census_release(mr__level_census *c)
{
    size_t f;
    for (f = 0; c->seen && f < c->nfac; f++) mr__levelset_release(&c->seen[f]);
    mr__free(c->seen);
    c->seen = NULL;
    c->nfac = 0;
}

mr_status mr__census_add(mr__level_census *c, const mr__block *blk, const mr__chunk *ch, const mr__decode_cfg *cfg,
                         mr__error *err)
{
    size_t i;
    for (i = 0; i < blk->nnew_levels; i++) {
        const mr__new_level *v = &blk->new_levels[i];
        int32_t id;
        mr_status rc = mr__levelset_add(&c->seen[v->var], v->str, v->len, &id);
        if (rc == MR_ERR_NO_MEMORY) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        if (rc == MR_ERR_DOMAIN) {
            char msg[300];
            mr__cell_message(msg, sizeof msg, &cfg->bind->col[cfg->bind->fac_col[v->var]],
                             mr__too_many_levels(cfg->bind, v->var), v->str, v->len);
            return mr__fail(err, MR_ERR_DOMAIN, "%s:%llu:%s", mr__chunk_row_display(ch, v->row, cfg->display),
                            (unsigned long long)(ch->first_line + ch->row_line[v->row]), msg);
        }
    }
    return MR_OK;
}
