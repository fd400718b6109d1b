/* multi.c - several models fitted to one file, their first pass shared:
 * the engine reads, decompresses and cuts the rows once, and a fan-out job
 * (accum/job_fanout.c) hands every block to each run's own first-pass job,
 * which decodes it with that run's columns, missing values and checks.
 * Each run is then finished alone by run.c (settling, warm start, IRLS
 * over its kept blocks, its patterns or the input again), so each fit has
 * the bits of that model fitted alone.  Input read only once (standard
 * input, a pipe) is copied once, by the first run, and every run rereads
 * that copy; the runs are released together at the end, the copy with
 * them. */
#define _POSIX_C_SOURCE 200809L
#include <cblas.h>
#include <stdio.h>
#include <string.h>

void openblas_set_num_threads(int num_threads);
int openblas_get_num_threads(void);

#include "accum/fanout.h"
#include "common/alloc.h"
#include "common/clock.h"
#include "fit/multi.h"
#include "fit/run.h"

typedef struct shared {
    mr__run *run;
    size_t n, begun;
    mr__pass_cfg *cfg;
    const mr__pass_cfg **cfgp;
    mr__pass_result **resp;
    size_t header_failed; /* the run whose columns the header lacks; n: none */
} shared;

/* Every run binds its columns to the one header. */
static mr_status on_header(void *user, const char *line, size_t len, mr__error *err)
{
    shared *sh = user;
    size_t m;
    for (m = 0; m < sh->n; m++)
        if (mr__run_on_header(&sh->run[m], line, len, err) != MR_OK) return sh->header_failed = m, err->status;
    return MR_OK;
}

static mr_status allocate(shared *sh, size_t n, mr__error *err)
{
    sh->n = n;
    sh->header_failed = n;
    sh->run = mr__calloc(n, sizeof *sh->run);
    sh->cfg = mr__calloc(n, sizeof *sh->cfg);
    sh->cfgp = mr__calloc(n, sizeof *sh->cfgp);
    sh->resp = mr__calloc(n, sizeof *sh->resp);
    if (!sh->run || !sh->cfg || !sh->cfgp || !sh->resp) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return MR_OK;
}

/* The one pass: the first run's configuration reads the input (and
 * copies it when it can be read only once) and runs the fan-out job. */
static mr_status first_pass(shared *sh, size_t *failed, mr__error *err)
{
    mr__fanout_cfg fc;
    mr__pass_cfg c;
    mr__pass_result whole;
    size_t m;
    mr_status st;
    for (m = 0; m < sh->n; m++) {
        if ((st = mr__run_scan_cfg(&sh->run[m], &sh->cfg[m], m == 0, &sh->run[m].f->err)) != MR_OK)
            return *failed = m, st;
        sh->cfgp[m] = &sh->cfg[m];
        sh->resp[m] = &sh->run[m].first;
    }
    fc.n = sh->n;
    fc.ops = &mr__job_scan;
    fc.cfg = sh->cfgp;
    fc.res = sh->resp;
    c = sh->cfg[0];
    c.ops = &mr__job_fanout;
    c.job_arg = &fc;
    c.on_header = on_header;
    c.header_user = sh;
    c.store = NULL;
    c.store_fill = 0;
    c.pool = NULL;
    st = mr__pass_run(&c, &whole, err);
    mr__pass_result_release(&whole, 0);
    *failed = sh->header_failed < sh->n ? sh->header_failed : fc.failed;
    return st;
}

/* After the pass: each run's own bookkeeping, every run rereading the
 * first run's copy of input read only once. */
static mr_status after_pass(shared *sh, mr_status st, size_t *failed)
{
    size_t m;
    for (m = 0; m < sh->n; m++) {
        mr__run *r = &sh->run[m];
        if (m > 0 && sh->run[0].spool_fd >= 0) {
            memcpy(r->spool, sh->run[0].spool, sizeof r->spool);
            r->read_path = r->spool;
        }
        st = mr__run_scan_done(r, st, &r->f->err);
        if (st != MR_OK) return *failed = m, st;
    }
    return MR_OK;
}

static void release(shared *sh)
{
    size_t m;
    for (m = 0; m < sh->begun; m++) mr__run_release(&sh->run[m]);
    mr__free(sh->run);
    mr__free(sh->cfg);
    mr__free(sh->cfgp);
    mr__free(sh->resp);
}

static mr_status fit_all(shared *sh, mr_fitter *const *f, const char *path, mr_fit **out, size_t *failed)
{
    int64_t started = mr__wall_ns_now();
    mr__error pass_err;
    mr_status st = MR_OK;
    size_t m;
    mr__error_clear(&pass_err);
    for (m = 0; st == MR_OK && m < sh->n; m++) {
        mr__error_clear(&f[m]->err);
        st = mr__run_begin(&sh->run[m], f[m], path);
        sh->begun = m + 1;
        if (st != MR_OK) return *failed = m, st;
    }
    st = first_pass(sh, failed, &pass_err);
    if (st != MR_OK) {
        /* the pass's message goes to the run at fault (the first: the input's) */
        f[*failed < sh->n ? *failed : 0]->err = pass_err;
        return st;
    }
    MR__TRY(after_pass(sh, st, failed));
    for (m = 0; m < sh->n; m++) {
        if ((st = mr__run_rest(&sh->run[m], &out[m])) != MR_OK) return *failed = m, st;
        if ((st = mr__fitter_record_run(f[m], out[m], started, &f[m]->err)) != MR_OK) return *failed = m, st;
    }
    return MR_OK;
}

mr_status mr__fit_shared(mr_fitter *const *f, size_t n, const char *path, mr_fit **out, size_t *failed)
{
    shared sh;
    mr_status st;
    size_t m;
    int blas_threads;
    memset(&sh, 0, sizeof sh);
    *failed = n;
    for (m = 0; m < n; m++) out[m] = NULL;
    if ((st = allocate(&sh, n, &f[0]->err)) != MR_OK) {
        release(&sh);
        return st;
    }
    /* as mr__fit_file: our workers use every core, BLAS none of them */
    blas_threads = openblas_get_num_threads();
    openblas_set_num_threads(1);
    st = fit_all(&sh, f, path, out, failed);
    release(&sh);
    openblas_set_num_threads(blas_threads);
    for (m = 0; st != MR_OK && m < n; m++) {
        mr_fit_free(out[m]);
        out[m] = NULL;
    }
    return st;
}
