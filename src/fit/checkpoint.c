/* checkpoint.c - a fit that goes on after its process was killed
 * (mr_fitter_set_checkpoint in millrace.h).  Nothing read from the file is
 * trusted before its length and checksum are right, and nothing is used
 * unless the input, model and options are the ones it was made for: else
 * the fit starts afresh, saying why.
 *
 * After every finished pass that reads the data (the first, once the warm
 * start is taken; then each IRLS pass) the run writes, atomically through
 * common/outfile.c and under the one-writer lock on the path, what it needs
 * to go on: the first pass's result (accum/first_bytes.h), the IRLS state
 * (fit/irls.h) and the run's counts.  After the last IRLS pass, and after
 * the robust pass, it writes what the published fit takes from them
 * (checkpoint_done.c): a run killed once its passes are over, before its
 * outputs are in place, finishes without reading the data again.  A run given the same path reads it
 * first: when it is whole and was made for this input, model and options,
 * the run takes up after its last pass, to the same bits.
 *
 * THE FILE (version 2), little-endian (common/bytes.h, common/bytebuf.h):
 *   "MRCK", u32 version, u64 the file's length
 *   the input: its name as given (text), size, mtime (ns)
 *   the model and the options that change results (text: the model
 *     lines, tolerance, pass limit, level, bad rows, delimiter, missing
 *     tokens, collapsing, the start's name, the robust type and cluster
 *     column)
 *   the header row (text), passes done, each pass's seconds (f64), the
 *     warm start's flag, iterations, blocks, polish blocks
 *   the first pass's result (text framing its bytes)
 *   the IRLS state (text framing its bytes)
 *   u64 the stage: 0 IRLS passes go on, 1 they are over, 2 the robust
 *     pass too; at stage 1 and 2 the finished parts (checkpoint_done.c)
 *   u64 FNV-1a over every byte before (common/checksum.h)
 * A file whose length, tag, version or checksum is wrong is damaged and
 * never read further; one of another input, model or options is stale.
 * Either is said in the run's note and the fit starts afresh. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "accum/first_bytes.h"
#include "common/alloc.h"
#include "common/bytebuf.h"
#include "common/checksum.h"
#include "common/outfile.h"
#include "common/strbuf.h"
#include "common/sysio.h"
#include "fit/irls.h"
#include "fit/run.h"
#include "fit/start.h"

#define MR__CHECKPOINT_VERSION 2u

/* Longest checkpoint read: patterns and the block map of any file fit well
 * within it; a longer file is not one of ours. */
#define MAX_BYTES ((uint64_t)1 << 32)

/* The model lines and every option that changes a number of the result. */
static char *model_key(const mr__run *r)
{
    const mr_fitter *f = r->f;
    mr__strbuf sb;
    size_t i;
    mr__strbuf_init(&sb);
    for (i = 0; i < f->spec.nlines; i++) mr__strbuf_printf(&sb, "%s\n", f->spec.line[i]);
    mr__strbuf_printf(&sb, "tolerance %a\nmax-passes %d\nlevel %a\non-bad-row %d\ndelimiter %d\nno-collapse %d\n",
                      f->tolerance, f->max_passes, f->level, f->skip_bad, f->delimiter, f->no_collapse);
    for (i = 0; i < f->nmissing; i++) mr__strbuf_printf(&sb, "missing %s\n", f->missing[i]);
    if (f->start) mr__strbuf_printf(&sb, "start-from %s\n", f->start->label);
    /* the robust type and its cluster column (bound by the first pass, its
     * missing cells leaving rows out); not the clusters' memory limit, which
     * changes no number, so a fit that ran out of it goes on with more */
    mr__strbuf_printf(&sb, "robust %d\n", mr__robust_type(f));
    /* a profile's fits share the model lines but not the parameter */
    mr__strbuf_printf(&sb, "family-parameter %a profile %d\n", f->spec.family_param, f->spec.family_profile);
    if (f->cluster) mr__strbuf_printf(&sb, "cluster %s\n", f->cluster);
    return mr__strbuf_take(&sb);
}

/* ---- writing ------------------------------------------------------------- */

static void put_run(mr__bytebuf *b, const mr__run *r)
{
    int i;
    mr__bytebuf_text(b, r->header, r->header_len);
    mr__bytebuf_u64(b, (uint64_t)r->npasses);
    for (i = 0; i < r->npasses; i++) mr__bytebuf_f64(b, r->pass_seconds[i]);
    mr__bytebuf_u64(b, (uint64_t)r->warm);
    mr__bytebuf_u64(b, (uint64_t)r->warm_iterations);
    mr__bytebuf_u64(b, (uint64_t)r->warm_blocks);
    mr__bytebuf_u64(b, (uint64_t)r->warm_polish_blocks);
}

/* The run's counts, the first pass's result and the IRLS state's n bytes:
 * `state` as given, or s encoded when state is NULL. */
static void put_state(mr__run *r, const mr__irls *s, const unsigned char *state, size_t n, mr__bytebuf *b)
{
    size_t start;
    unsigned char *at;
    put_run(b, r);
    mr__bytebuf_u64(b, 0);
    start = b->len;
    if (r->first_bytes.len == 0) mr__first_encode(&r->first, r->bind.ncol, r->bind.nnum, r->bind.nfac, b);
    else if ((at = mr__bytebuf_room(b, r->first_bytes.len)) != NULL)
        memcpy(at, r->first_bytes.data, r->first_bytes.len);
    if (!b->failed) mr__put_u64(b->data + start - 8, b->len - start);
    mr__bytebuf_u64(b, n);
    if ((at = mr__bytebuf_room(b, n)) == NULL) return;
    if (state != NULL) memcpy(at, state, n);
    else mr__irls_encode(s, at);
}

void mr__checkpoint_put_state(mr__run *r, const mr__irls *s, mr__bytebuf *b)
{
    int stage = r->have_resume && r->resume_stage > 0 ? r->resume_stage : 0;
    unsigned char *at;
    put_state(r, s, NULL, mr__irls_encoded_size(s), b);
    /* as a checkpoint goes on: the stage, its finished parts as they were
     * read, and where the checksum goes (take_done reads them alike) */
    mr__bytebuf_u64(b, (uint64_t)stage);
    if (stage > 0 && (at = mr__bytebuf_room(b, r->resume_done_len)) != NULL)
        memcpy(at, r->resume_done, r->resume_done_len);
    mr__bytebuf_u64(b, 0);
}

/* state: the IRLS state's n bytes; stage 1 and 2 add their parts. */
static mr_status encode(mr__run *r, const unsigned char *state, size_t n, int stage, const char *key, mr__bytebuf *b,
                        mr__error *err)
{
    mr__bytebuf_head(b, "MRCK", MR__CHECKPOINT_VERSION);
    mr__bytebuf_u64(b, 0); /* the length, once known */
    mr__bytebuf_text(b, r->path, strlen(r->path));
    mr__bytebuf_u64(b, r->size);
    mr__bytebuf_u64(b, (uint64_t)r->mtime_ns);
    mr__bytebuf_text(b, key, strlen(key));
    put_state(r, NULL, state, n, b);
    mr__bytebuf_u64(b, (uint64_t)stage);
    if (stage > 0) mr__checkpoint_done_put(b, r, stage);
    if (b->failed) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    mr__put_u64(b->data + 8, b->len + 8);
    mr__bytebuf_u64(b, mr__fnv_words(MR__FNV_OFFSET, (const char *)b->data, b->len));
    return b->failed ? mr__fail(err, MR_ERR_NO_MEMORY, "out of memory") : MR_OK;
}

/* MILLRACE_TEST_KILL=checkpoint:N:during|after (tests only, see
 * tests/cli/checkpoint.sh): the process kills itself with SIGKILL in the
 * middle of writing its N-th checkpoint, or just after it, as kill -9
 * from outside would at that moment. */
static void test_kill(int nth, int after)
{
    const char *v = getenv("MILLRACE_TEST_KILL");
    int n = 0;
    char when[8] = "";
    if (v == NULL || sscanf(v, "checkpoint:%d:%7s", &n, when) != 2 || n != nth) return;
    if (strcmp(when, after ? "after" : "during") == 0) raise(SIGKILL);
}

static mr_status write_bytes(mr__run *r, const mr__bytebuf *b, mr__error *err)
{
    const char *inputs[1] = {r->path};
    mr__outfile *o;
    size_t half = b->len / 2;
    MR__TRY(mr__outfile_open(&o, r->f->checkpoint, inputs, 1, err));
    if (mr__outfile_write(o, b->data, half, err) != MR_OK) {
        mr__outfile_abort(o);
        return MR_ERR_IO;
    }
    test_kill(r->checkpoint_writes + 1, 0);
    if (mr__outfile_write(o, b->data + half, b->len - half, err) != MR_OK) {
        mr__outfile_abort(o);
        return MR_ERR_IO;
    }
    return mr__outfile_commit(o, err);
}

static mr_status write_stage(mr__run *r, const unsigned char *state, size_t n, int stage, mr__error *err)
{
    mr__bytebuf b;
    char *key;
    mr_status st;
    memset(&b, 0, sizeof b);
    if ((key = model_key(r)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    st = encode(r, state, n, stage, key, &b, err);
    mr__free(key);
    if (st == MR_OK) st = write_bytes(r, &b, err);
    mr__bytebuf_release(&b);
    if (st != MR_OK) return st;
    r->checkpoint_writes++;
    test_kill(r->checkpoint_writes, 1);
    return MR_OK;
}

/* Only a run that took the lock writes (mr__fit_file; not a comparison's
 * models). */
static int writes(const mr__run *r) { return r->f->checkpoint != NULL && r->checkpoint_lock != NULL; }

/* The state as bytes in *out (the caller frees it). */
static mr_status state_bytes(const mr__irls *s, unsigned char **out, size_t *n, mr__error *err)
{
    *n = mr__irls_encoded_size(s);
    if ((*out = mr__malloc(*n)) == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    mr__irls_encode(s, *out);
    return MR_OK;
}

mr_status mr__checkpoint_write(mr__run *r, const mr__irls *s, mr__error *err)
{
    unsigned char *state;
    size_t n;
    mr_status st;
    if (!writes(r)) return MR_OK;
    MR__TRY(state_bytes(s, &state, &n, err));
    st = write_stage(r, state, n, 0, err);
    mr__free(state);
    return st;
}

mr_status mr__checkpoint_write_done(mr__run *r, const mr__irls *s, mr__error *err)
{
    if (!writes(r)) return MR_OK;
    mr__free(r->done_state);
    r->done_state = NULL;
    MR__TRY(state_bytes(s, &r->done_state, &r->done_state_len, err));
    return write_stage(r, r->done_state, r->done_state_len, 1, err);
}

mr_status mr__checkpoint_write_robust(mr__run *r, mr__error *err)
{
    if (!writes(r) || r->done_state == NULL) return MR_OK;
    return write_stage(r, r->done_state, r->done_state_len, 2, err);
}

/* ---- reading ------------------------------------------------------------- */

/* The whole file in *data (NULL and MR_OK when there is none). */
static mr_status read_all(const char *path, unsigned char **data, size_t *len, mr__error *err)
{
    struct stat sb;
    size_t got = 0;
    int fd = open(path, O_RDONLY | O_CLOEXEC);
    *data = NULL;
    *len = 0;
    if (fd < 0 && errno == ENOENT) return MR_OK;
    if (fd < 0 || fstat(fd, &sb) != 0) {
        int e = errno;
        if (fd >= 0) close(fd);
        return mr__fail(err, MR_ERR_IO, "checkpoint %s: cannot read it: %s", path, strerror(e));
    }
    if ((uint64_t)sb.st_size > MAX_BYTES) sb.st_size = (off_t)MAX_BYTES; /* read so much: its length is wrong */
    *data = mr__malloc((size_t)sb.st_size + 1);
    if (*data == NULL) {
        close(fd);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    while (got < (size_t)sb.st_size) {
        ssize_t n = mr__read(fd, *data + got, (size_t)sb.st_size - got);
        if (n < 0 && errno == EINTR) continue;
        if (n <= 0) break;
        got += (size_t)n;
    }
    close(fd);
    *len = got;
    return MR_OK;
}

/* Whether the bytes are a whole checkpoint: its length and checksum. */
static const char *damage(const unsigned char *data, size_t len)
{
    uint32_t version;
    uint64_t said, sum;
    if (len < 24 || !mr__get_head(data, "MRCK", &version)) return "not a checkpoint, or cut short";
    if (version != MR__CHECKPOINT_VERSION) return "made by another version";
    mr__get_u64(data + 8, &said);
    if (said != len) return said > len ? "cut short" : "longer than it says";
    mr__get_u64(data + len - 8, &sum);
    if (sum != mr__fnv_words(MR__FNV_OFFSET, (const char *)data, len - 8)) return "its checksum does not match";
    return NULL;
}

/* Whether the checkpoint was made for this input, model and options. */
static const char *stale(mr__run *r, mr__byteread *rd, const char *key)
{
    struct stat sb;
    uint64_t n, k, size, mtime;
    const unsigned char *name = mr__byteread_text(rd, &n), *text;
    size = mr__byteread_u64(rd);
    mtime = mr__byteread_u64(rd);
    text = mr__byteread_text(rd, &k);
    if (rd->bad) return "damaged";
    if (n != strlen(r->path) || memcmp(name, r->path, n) != 0) return "made for another input file";
    if (stat(r->path, &sb) != 0 || (uint64_t)sb.st_size != size ||
        mtime != (uint64_t)((int64_t)sb.st_mtim.tv_sec * 1000000000 + sb.st_mtim.tv_nsec))
        return "the input's size or time changed since it was made";
    if (k != strlen(key) || memcmp(text, key, k) != 0) return "made for another model or other options";
    return NULL;
}

static void get_run(mr__run *r, mr__byteread *rd, const unsigned char **header, uint64_t *header_len)
{
    uint64_t i, n;
    *header = mr__byteread_text(rd, header_len);
    n = mr__byteread_count(rd, INT32_MAX, 8);
    if (rd->bad) return;
    r->pass_seconds = mr__malloc_array(n + 1, sizeof *r->pass_seconds);
    if (r->pass_seconds == NULL) {
        rd->bad = 1;
        return;
    }
    r->npasses = (int)n;
    for (i = 0; i < n; i++) r->pass_seconds[i] = mr__byteread_f64(rd);
    r->warm = (int)mr__byteread_count(rd, 1, 0);
    r->warm_iterations = (int)mr__byteread_count(rd, INT32_MAX, 0);
    r->warm_blocks = (int)mr__byteread_count(rd, INT32_MAX, 0);
    r->warm_polish_blocks = (int)mr__byteread_count(rd, INT32_MAX, 0);
}

/* Each worker's outcome counts hold a table per pair and per triple of
 * interacting factors the binding found (fit/zero_cells.c reads them so). */
static int outcomes_fit(const mr__run *r, const mr__pass_result *first)
{
    size_t w;
    for (w = 0; first->worker_outcomes && w < first->nworkers; w++)
        if (first->worker_outcomes[w] && (first->worker_outcomes[w]->ntables != r->dcfg.npairs + r->dcfg.ntriples ||
                                          first->worker_outcomes[w]->nfac != r->bind.nfac))
            return 0;
    return 1;
}

/* The header bound as the first pass bound it; 0 when its columns (or
 * pairs of factors) are not those the first pass's result was made with. */
static int bind_again(mr__run *r, const unsigned char *header, uint64_t len, size_t ncol, size_t nnum, size_t nfac,
                      const mr__pass_result *first)
{
    mr__error scratch;
    if (mr__run_on_header(r, (const char *)header, (size_t)len, &scratch) == MR_OK && r->bind.ncol == ncol &&
        r->bind.nnum == nnum && r->bind.nfac == nfac && outcomes_fit(r, first))
        return 1;
    if (r->bound) mr__binding_release(&r->bind);
    r->bound = 0;
    mr__free(r->header);
    r->header = NULL;
    r->dcfg.bind = NULL;
    return 0;
}

static void forget_run(mr__run *r)
{
    mr__free(r->pass_seconds);
    mr__free(r->resume_done);
    mr__free(r->done_state);
    r->resume_done = r->done_state = NULL;
    r->resume_done_len = r->done_state_len = 0;
    r->resume_stage = 0;
    r->pass_seconds = NULL;
    r->npasses = r->warm = r->warm_iterations = r->warm_blocks = r->warm_polish_blocks = 0;
}

/* The stage and its finished parts (kept as bytes until the design is
 * built), and after stage 1 the state's bytes for a stage-2 checkpoint:
 * 0, or -1 with r->resume_stage -1 when damaged. */
static int take_done(mr__run *r, mr__byteread *rd, const unsigned char *state, size_t n)
{
    uint64_t stage = mr__byteread_count(rd, 2, 0);
    size_t left = (size_t)(rd->end - rd->at);
    r->resume_stage = -1;
    if (rd->bad || left < 8 || (stage == 0 && left != 8)) return -1;
    r->resume_stage = (int)stage;
    if (stage == 0) return 0;
    r->resume_done_len = left - 8;
    r->done_state_len = n;
    r->resume_done = mr__malloc(r->resume_done_len + 1);
    r->done_state = mr__malloc(n + 1);
    if (r->resume_done == NULL || r->done_state == NULL) return -1;
    memcpy(r->resume_done, rd->at, r->resume_done_len);
    memcpy(r->done_state, state, n);
    return 0;
}

/* The parts after the identity: 0 and the state taken, or why not.  A
 * checkpoint's stage and finished parts follow (take_done), as they do in
 * another process's start (mr__checkpoint_take_state). */
static const char *take_parts(mr__run *r, mr__byteread *rd, int checkpoint, mr__irls *resume, mr__error *err)
{
    const unsigned char *header, *part;
    uint64_t header_len, n;
    size_t ncol = 0, nnum = 0, nfac = 0;
    mr__byteread sub;
    mr__pass_result first;
    get_run(r, rd, &header, &header_len);
    part = mr__byteread_text(rd, &n);
    if (part == NULL) return "damaged";
    mr__byteread_init(&sub, part, (size_t)n);
    if (mr__first_decode(&sub, &first, &ncol, &nnum, &nfac, err) != MR_OK)
        return err->status == MR_ERR_NO_MEMORY ? "no memory to read it" : "its first-pass result is damaged";
    if (sub.at != sub.end || (part = mr__byteread_text(rd, &n)) == NULL || (!checkpoint && rd->at != rd->end) ||
        mr__irls_decode(part, (size_t)n, resume, err) != MR_OK) {
        mr__pass_result_release(&first, nfac);
        return "its IRLS state is damaged";
    }
    if (checkpoint && take_done(r, rd, part, (size_t)n) != 0) {
        mr__pass_result_release(&first, nfac);
        mr__irls_release(resume);
        return r->resume_stage < 0 ? "its stage is damaged" : "no memory to read it";
    }
    if (!bind_again(r, header, header_len, ncol, nnum, nfac, &first)) {
        mr__pass_result_release(&first, nfac);
        mr__irls_release(resume);
        return "its header row does not bind as it did";
    }
    r->first = first;
    return NULL;
}

/* Reads the checkpoint; *have = 1 when it is taken up. */
static mr_status try_resume(mr__run *r, mr__irls *resume, int *have, mr__error *err)
{
    unsigned char *data;
    size_t len;
    const char *why;
    char *key;
    mr__byteread rd;
    mr__error scratch;
    MR__TRY(read_all(r->f->checkpoint, &data, &len, err));
    if (data == NULL) return MR_OK;
    if ((key = model_key(r)) == NULL) {
        mr__free(data);
        return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    why = damage(data, len);
    mr__byteread_init(&rd, data + 16, why ? 0 : len - 16);
    if (why == NULL) why = stale(r, &rd, key);
    if (why == NULL) why = take_parts(r, &rd, 1, resume, &scratch);
    if (why != NULL) forget_run(r);
    *have = why == NULL;
    if (why == NULL) {
        r->resumed_from = r->npasses;
        snprintf(r->f->checkpoint_note, sizeof r->f->checkpoint_note, "checkpoint %s: resumed after pass %d",
                 r->f->checkpoint, r->npasses);
    } else {
        snprintf(r->f->checkpoint_note, sizeof r->f->checkpoint_note,
                 "checkpoint %s: not used (%s); the fit starts afresh", r->f->checkpoint, why);
    }
    mr__free(key);
    mr__free(data);
    return MR_OK;
}

mr_status mr__checkpoint_take_state(mr__run *r, const unsigned char *data, size_t len, mr__irls *resume,
                                    mr__error *err)
{
    mr__byteread rd;
    mr__error scratch;
    const char *why;
    mr__error_clear(&scratch);
    mr__byteread_init(&rd, data, len);
    why = take_parts(r, &rd, 1, resume, &scratch);
    if (why == NULL) return MR_OK;
    forget_run(r);
    if (scratch.status == MR_ERR_NO_MEMORY) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    return mr__fail(err, MR_ERR_INTERNAL, "%s: the first pass's result from rank 0: %s", r->display, why);
}

mr_status mr__checkpoint_begin(mr__run *r, mr__irls *resume, int *have_resume, mr__error *err)
{
    const char *inputs[1] = {r->path};
    char msg[MR__MSG_CAP];
    mr_status st;
    *have_resume = 0;
    if (r->f->checkpoint == NULL) return MR_OK;
    /* a set's files would each need their identity kept and checked: not
     * yet, so refused rather than taken up wrongly */
    if (r->set.n > 0)
        return mr__fail(err, MR_ERR_USAGE, "checkpoint: %s: a set of %zu files; --checkpoint takes one input file "
                                           "(fit the set without it, or join the files into one)", r->display, r->set.n);
    if (mr__read_only_once(r->path))
        return mr__fail(err, MR_ERR_USAGE, "checkpoint: %s is read only once (standard input or a pipe), so a "
                                           "killed fit could not read it again; give a file", r->display);
    /* shared by several processes, rank 0 alone keeps the checkpoint:
     * the others take up its state, resumed or not (fit/share.c) */
    if (r->f->share != NULL && mr_share_rank(r->f->share) != 0) return MR_OK;
    MR__TRY(mr__outfile_check(r->f->checkpoint, inputs, 1, err));
    st = mr_output_lock_take(r->f->checkpoint, &r->checkpoint_lock, msg, sizeof msg);
    if (st != MR_OK) return mr__fail(err, st, "%s", msg);
    return try_resume(r, resume, have_resume, err);
}

void mr__checkpoint_end(mr__run *r, int succeeded)
{
    if (r->checkpoint_lock == NULL) return;
    if (succeeded && !r->f->checkpoint_keep) unlink(r->f->checkpoint);
    mr_output_lock_release(r->checkpoint_lock);
    r->checkpoint_lock = NULL;
}

mr_status mr_fitter_checkpoint_remove(mr_fitter *f)
{
    mr_output_lock *lock = NULL;
    char msg[MR__MSG_CAP];
    mr_status st;
    mr__error_clear(&f->err);
    if (f->checkpoint == NULL) return MR_OK;
    st = mr_output_lock_take(f->checkpoint, &lock, msg, sizeof msg);
    if (st != MR_OK) return mr__fail(&f->err, st, "checkpoint %s: not removed: %s", f->checkpoint, msg);
    if (unlink(f->checkpoint) != 0 && errno != ENOENT)
        st = mr__fail(&f->err, MR_ERR_IO, "checkpoint %s: cannot remove it: %s", f->checkpoint, strerror(errno));
    mr_output_lock_release(lock);
    return st;
}
