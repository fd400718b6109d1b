/* checkpoint.h - a fit that goes on after its process was killed
 * (mr_fitter_set_checkpoint in millrace.h).
 *
 * After every finished pass that reads the data (the first, once the warm
 * start is taken; then each IRLS pass) the run writes, atomically through
 * common/outfile.c and under the one-writer lock on the path, what it needs
 * to go on: the first pass's result (accum/first_bytes.h), the IRLS state
 * (fit/irls.h) and the run's counts.  A run given the same path reads it
 * first: when it is whole and was made for this input, model and options,
 * the run takes up after its last pass, to the same bits.
 *
 * THE FILE (version 1), little-endian (common/bytes.h, common/bytebuf.h):
 *   "MRCK", u32 version, u64 the file's length
 *   the input: its name as given (text), size, mtime (ns)
 *   the model and the options that change results (text: the model
 *     lines, tolerance, pass limit, level, bad rows, delimiter, missing
 *     tokens, collapsing, the start's name)
 *   the header row (text), passes done, each pass's seconds (f64), the
 *     warm start's flag, iterations, blocks, polish blocks
 *   the first pass's result (text framing its bytes)
 *   the IRLS state (text framing its bytes)
 *   u64 FNV-1a over every byte before (common/checksum.h)
 * A file whose length, tag, version or checksum is wrong is damaged and
 * never read further; one of another input, model or options is stale.
 * Either is said in the run's note and the fit starts afresh. */
#ifndef MR_CHECKPOINT_H
#define MR_CHECKPOINT_H

#include "fit/irls.h"
#include "fit/run.h"

#define MR__CHECKPOINT_VERSION 1u

/* Before the first pass: refuses standard input and pipes (MR_ERR_USAGE),
 * takes the lock and checks the path as an output (MR_ERR_IO), and reads
 * a checkpoint there.  When one can be resumed, r->first, the binding, the
 * run's counts and *resume (a decoded IRLS state) are set and
 * r->resumed_from is its pass; otherwise r->checkpoint_note may say why
 * it was not used.  A run without a checkpoint path: MR_OK, nothing done. */
mr_status mr__checkpoint_begin(mr__run *r, mr__irls *resume, int *have_resume, mr__error *err);

/* After a finished pass: the state `s` written (MR_ERR_IO, MR_ERR_NO_MEMORY). */
mr_status mr__checkpoint_write(mr__run *r, const mr__irls *s, mr__error *err);

/* The run's end: the checkpoint removed when the fit succeeded, the lock let go. */
void mr__checkpoint_end(mr__run *r, int succeeded);

#endif
