/* share.c - a fit shared by several processes (run.h, mr_share in
 * millrace.h).  The one rule that keeps every rank in step: each rank
 * makes the same exchanges in the same order until one carries an error;
 * a rank that fails makes its next exchange with its error, after which
 * every rank has ended with the lowest failing rank's error and nobody
 * exchanges again. */
#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "accum/clusters.h"
#include "accum/group_bytes.h"
#include "common/alloc.h"
#include "fit/run.h"

#define GARBLED "the exchange between processes was garbled"
#define FAILED "the exchange between processes failed"

struct mr_share {
    int rank, nranks;
    mr_share_gather_fn gather;
    void *user;
    size_t *lens;              /* nranks: each rank's bytes in the last exchange */
    const unsigned char **got; /* nranks: each rank's payload in it */
    size_t *got_len;
    void *all;                 /* the gather's bytes (free) */
    int ended;
    mr__error end;             /* what it ended with */
};

mr_status mr_share_new(int rank, int nranks, mr_share_gather_fn gather, void *user, mr_share **out)
{
    mr_share *s;
    *out = NULL;
    if (nranks < 1 || rank < 0 || rank >= nranks || gather == NULL) return MR_ERR_USAGE;
    if ((s = mr__calloc(1, sizeof *s)) == NULL) return MR_ERR_NO_MEMORY;
    s->rank = rank;
    s->nranks = nranks;
    s->gather = gather;
    s->user = user;
    /* taken now: a failing rank must still be able to make its exchange */
    s->lens = mr__calloc((size_t)nranks, sizeof *s->lens);
    s->got = mr__calloc((size_t)nranks, sizeof *s->got);
    s->got_len = mr__calloc((size_t)nranks, sizeof *s->got_len);
    if (s->lens == NULL || s->got == NULL || s->got_len == NULL) {
        mr_share_free(s);
        return MR_ERR_NO_MEMORY;
    }
    *out = s;
    return MR_OK;
}

void mr_share_free(mr_share *s)
{
    if (s == NULL) return;
    free(s->all);
    mr__free(s->lens);
    mr__free(s->got);
    mr__free(s->got_len);
    mr__free(s);
}

int mr_share_rank(const mr_share *s) { return s->rank; }
int mr_share_nranks(const mr_share *s) { return s->nranks; }
int mr_share_ended(const mr_share *s) { return s->ended; }
void mr_fitter_set_share(mr_fitter *f, mr_share *share) { f->share = share; }

static mr_status end_with(mr_share *s, mr_status st, const char *msg, size_t len, mr__error *err)
{
    if (msg == NULL) len = 0;
    if (len >= sizeof s->end.msg) len = sizeof s->end.msg - 1;
    s->ended = 1;
    s->end.status = st;
    if (len > 0) memcpy(s->end.msg, msg, len);
    s->end.msg[len] = '\0';
    if (err != NULL) *err = s->end;
    return st;
}

/* Each rank's status, message and payload, read from the gathered bytes:
 * the lowest failing rank's error ends the share. */
static mr_status read_all(mr_share *s, mr__error *err)
{
    const unsigned char *at = s->all;
    int k;
    for (k = 0; k < s->nranks; k++) {
        mr__byteread rd;
        uint64_t st, n;
        const unsigned char *msg;
        mr__byteread_init(&rd, at, s->lens[k]);
        at += s->lens[k];
        st = mr__byteread_u64(&rd);
        msg = mr__byteread_text(&rd, &n);
        if (rd.bad) return end_with(s, MR_ERR_IO, GARBLED, strlen(GARBLED), err);
        if (st != MR_OK) return end_with(s, (mr_status)st, (const char *)msg, (size_t)n, err);
        s->got[k] = rd.at;
        s->got_len[k] = (size_t)(rd.end - rd.at);
    }
    return MR_OK;
}

/* One exchange: this rank's status (msg: its message when failing) and,
 * when it is MR_OK, payload (NULL: none). */
static mr_status exchange(mr_share *s, mr_status st, const char *msg, const mr__bytebuf *payload, mr__error *err)
{
    static const char oom[] = "out of memory";
    unsigned char small[8 + 8 + sizeof oom];
    mr__bytebuf b;
    const void *mine;
    size_t len;
    if (s->ended) {
        *err = s->end;
        return s->end.status;
    }
    memset(&b, 0, sizeof b);
    mr__bytebuf_u64(&b, (uint64_t)st);
    mr__bytebuf_text(&b, msg, st == MR_OK ? 0 : strlen(msg));
    if (st == MR_OK && payload != NULL && payload->len > 0) {
        unsigned char *at = mr__bytebuf_room(&b, payload->len);
        if (at != NULL) memcpy(at, payload->data, payload->len);
    }
    mine = b.data;
    len = b.len;
    if (b.failed) { /* still an exchange, saying so */
        mr__put_u64(small, MR_ERR_NO_MEMORY);
        mr__put_u64(small + 8, sizeof oom - 1);
        memcpy(small + 16, oom, sizeof oom - 1);
        mine = small;
        len = sizeof small - 1;
    }
    free(s->all);
    s->all = NULL;
    if (s->gather(s->user, mine, len, &s->all, s->lens) != 0) {
        mr__bytebuf_release(&b);
        return end_with(s, MR_ERR_IO, FAILED, strlen(FAILED), err);
    }
    mr__bytebuf_release(&b);
    return read_all(s, err);
}

mr_status mr_share_close(mr_share *s, mr_status status, const char *message, char *msg, size_t msgcap)
{
    mr__error err;
    mr__error_clear(&err);
    if (!s->ended) {
        (void)exchange(s, status, message ? message : "", NULL, &err);
        s->ended = 1;
        s->end = err;
    }
    mr__error_export(&s->end, msg, msgcap);
    return s->end.status;
}

/* ---- the fit's side ------------------------------------------------------ */

int mr__shared(const mr__run *r) { return r->f->share != NULL; }

/* What v1 of a shared fit cannot do, refused alike on every rank. */
static mr_status refuse(const mr__run *r, mr__error *err)
{
    const mr_fitter *f = r->f;
    const char *why = NULL;
    if (r->set.n == 0 && mr__read_only_once(r->path))
        why = "standard input or a pipe (each process reads the input itself: give a file)";
    else if (mr__spec_many(&f->spec) >= 0)
        why = "a factor declared many (its levels' sums are not exchanged yet)";
    if (why == NULL) return MR_OK;
    return mr__fail(err, MR_ERR_USAGE, "%s: a fit shared by several processes does not take %s; fit it in one process",
                    r->display, why);
}

mr_status mr__share_begin(mr__run *r, mr__error *err) { return r->f->share ? refuse(r, err) : MR_OK; }

mr_status mr__share_join(mr__run *r, mr__error *err)
{
    mr_share *s = r->f->share;
    if (s == NULL || s->rank == 0) return MR_OK;
    /* nothing to send: rank 0 sends its first pass */
    MR__TRY(exchange(s, MR_OK, "", NULL, err));
    MR__TRY(mr__checkpoint_take_state(r, s->got[0], s->got_len[0], &r->resume, err));
    r->have_resume = 1;
    return MR_OK;
}

mr_status mr__share_send_start(mr__run *r, const mr__irls *state, mr__error *err)
{
    mr_share *s = r->f->share;
    mr__bytebuf b;
    mr_status st;
    if (s == NULL || s->rank != 0) return MR_OK;
    memset(&b, 0, sizeof b);
    mr__checkpoint_put_state(r, state, &b);
    if (b.failed) st = exchange(s, mr__fail(err, MR_ERR_NO_MEMORY, "out of memory"), err->msg, NULL, err);
    else st = exchange(s, MR_OK, "", &b, err);
    mr__bytebuf_release(&b);
    return st;
}

mr__partial_range mr__share_range(const mr__run *r)
{
    const mr_share *s = r->f->share;
    uint64_t nb = r->first.map.n, groups = (nb + MR__GROUP_BLOCKS - 1) / MR__GROUP_BLOCKS, end;
    uint64_t g0 = groups * (uint64_t)s->rank / (uint64_t)s->nranks;
    uint64_t g1 = groups * (uint64_t)(s->rank + 1) / (uint64_t)s->nranks;
    mr__partial_range range;
    range.first_block = g0 * MR__GROUP_BLOCKS;
    end = g1 * MR__GROUP_BLOCKS < nb ? g1 * MR__GROUP_BLOCKS : nb;
    range.nblocks = end > range.first_block ? end - range.first_block : 0;
    return range;
}

/* MILLRACE_TEST_SHARE_ERROR=RANK:PASS (tests only, tests/cli/mpi.sh): that
 * rank's pass PASS fails as if it had met a malformed row in its blocks,
 * which the first pass would have caught; it proves every rank ends with
 * one rank's error. */
static mr_status test_error(const mr__run *r, mr__error *err)
{
    const char *v = getenv("MILLRACE_TEST_SHARE_ERROR");
    int rank = -1, pass = -1;
    if (v == NULL || sscanf(v, "%d:%d", &rank, &pass) != 2 || rank != r->f->share->rank || pass != r->npasses + 1)
        return MR_OK;
    return mr__fail(err, MR_ERR_FORMAT, "%s: rank %d met a malformed row in pass %d (MILLRACE_TEST_SHARE_ERROR)",
                    r->display, rank, pass);
}

static mr_status covered(const mr__run *r, uint64_t next, const char *what, mr__error *err)
{
    if (next == r->first.map.n) return MR_OK;
    return mr__fail(err, MR_ERR_INTERNAL, "the processes' %s cover %llu blocks of %llu", what,
                    (unsigned long long)next, (unsigned long long)r->first.map.n);
}

/* This rank's pass result (st, payload) exchanged: MR_OK when every rank's
 * payload came. */
static mr_status exchange_pass(mr__run *r, mr_status st, const mr__bytebuf *payload, mr__error *err)
{
    if (st == MR_OK) st = test_error(r, err);
    if (st == MR_OK && payload->failed) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return exchange(r->f->share, st, err->msg, payload, err);
}

/* Every rank's groups (rank k's: at[k], len[k] bytes), in rank order (the
 * group order), into the k zeroed totals. */
static mr_status add_groups(mr__run *r, const unsigned char *const *at, const size_t *len,
                            mr__block_sums *const *totals, size_t k, mr__error *err)
{
    size_t p = r->design.p, i;
    uint64_t next[2] = {0, 0};
    int rank;
    for (i = 0; i < k; i++) mr__sums_zero_totals(totals[i], p);
    for (rank = 0; rank < r->f->share->nranks; rank++) {
        mr__byteread rd;
        mr__byteread_init(&rd, at[rank], len[rank]);
        MR__TRY(mr__group_add_each(&rd, p, totals, k, next, err));
    }
    for (i = 0; i < k; i++) MR__TRY(covered(r, next[i], "group totals", err));
    return MR_OK;
}

static mr_status reduce_groups(mr__run *r, mr_status st, const mr__bytebuf *groups, mr__block_sums *const *totals,
                               size_t k, mr__error *err)
{
    mr_share *s = r->f->share;
    MR__TRY(exchange_pass(r, st, groups, err));
    return add_groups(r, s->got, s->got_len, totals, k, err);
}

mr_status mr__share_reduce(mr__run *r, mr_status st, const mr__bytebuf *groups, mr__pass_result *res, mr__error *err)
{
    mr__block_sums *totals[1];
    totals[0] = &res->sums;
    return reduce_groups(r, st, groups, totals, 1, err);
}

mr_status mr__share_reduce_meat(mr__run *r, mr_status st, const mr__bytebuf *groups, mr__pass_result *res,
                                mr__error *err)
{
    mr__block_sums *totals[2];
    totals[0] = &res->sums;
    totals[1] = &res->bread;
    return reduce_groups(r, st, groups, totals, 2, err);
}

/* Each rank's payload (u64 length of its groups, the groups, its blocks
 * of runs) cut in two: s->got and s->got_len then the groups, at and len
 * the blocks. */
static mr_status split_payloads(mr_share *s, const unsigned char **at, size_t *len, mr__error *err)
{
    int rank;
    for (rank = 0; rank < s->nranks; rank++) {
        mr__byteread rd;
        uint64_t n;
        mr__byteread_init(&rd, s->got[rank], s->got_len[rank]);
        n = mr__byteread_count(&rd, UINT64_MAX, 1);
        if (rd.bad) return end_with(s, MR_ERR_IO, GARBLED, strlen(GARBLED), err);
        s->got[rank] = rd.at;
        s->got_len[rank] = (size_t)n;
        at[rank] = rd.at + n;
        len[rank] = (size_t)(rd.end - rd.at) - (size_t)n;
    }
    return MR_OK;
}

/* Every rank's blocks of runs added in block order, as one process adds
 * its own (the same set of clusters seen, the same bits). */
static mr_status add_cluster_blocks(mr__run *r, const unsigned char *const *at, const size_t *len,
                                    mr__pass_result *res, mr__error *err)
{
    size_t p = r->design.p;
    uint64_t next = 0;
    int rank, not_grouped = 0;
    mr__clusters cl;
    mr_status st;
    mr__sums_zero_totals(&res->sums, p);
    st = mr__clusters_init(&cl, p, 0, r->f->cluster_memory, res->sums.xtwx, r->display, err);
    for (rank = 0; st == MR_OK && rank < r->f->share->nranks; rank++) {
        mr__byteread rd;
        mr__byteread_init(&rd, at[rank], len[rank]);
        st = mr__clusters_add_blocks(&cl, &rd, &next, &not_grouped, err);
    }
    if (st == MR_OK) st = mr__clusters_finish(&cl, err);
    if (st == MR_OK) st = covered(r, next, "clusters' sums", err);
    res->clusters = cl.n;
    mr__clusters_release(&cl);
    if (not_grouped)
        return mr__fail(err, MR_ERR_CLUSTERS,
                        "%s: the rows of each cluster are not together (a cluster comes back after others): a fit "
                        "shared by several processes takes cluster-robust standard errors only from a file grouped "
                        "by the cluster column; sort the rows by it (the header first), or fit in one process",
                        r->display);
    return st;
}

static void append(mr__bytebuf *b, const mr__bytebuf *more)
{
    unsigned char *room = more->len > 0 ? mr__bytebuf_room(b, more->len) : NULL;
    if (room != NULL) memcpy(room, more->data, more->len);
    b->failed |= more->failed;
}

mr_status mr__share_reduce_clusters(mr__run *r, mr_status st, const mr__bytebuf *groups, const mr__bytebuf *blocks,
                                    mr__pass_result *res, mr__error *err)
{
    mr_share *s = r->f->share;
    const unsigned char **at = mr__calloc((size_t)s->nranks, sizeof *at);
    size_t *len = mr__calloc((size_t)s->nranks, sizeof *len);
    mr__bytebuf payload;
    mr__block_sums *bread = &res->bread;
    memset(&payload, 0, sizeof payload);
    if (st == MR_OK && (at == NULL || len == NULL)) st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    mr__bytebuf_u64(&payload, groups->len);
    append(&payload, groups);
    append(&payload, blocks);
    st = exchange_pass(r, st, &payload, err);
    mr__bytebuf_release(&payload);
    if (st == MR_OK) st = split_payloads(s, at, len, err);
    if (st == MR_OK) st = add_groups(r, s->got, s->got_len, &bread, 1, err);
    if (st == MR_OK) st = add_cluster_blocks(r, at, len, res, err);
    mr__free(at);
    mr__free(len);
    return st;
}

mr_status mr__share_end(mr__run *r, mr_status st, mr__error *err)
{
    mr_share *s = r->f->share;
    if (s == NULL || st == MR_OK || s->ended) return st;
    return exchange(s, st, err->msg, NULL, err);
}
