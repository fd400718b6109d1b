/* outfile.h - an output file written atomically: the one way the library
 * writes a file a user keeps (the JSON now; scoring tables, reports and
 * checkpoints later).
 *
 * The rules (millrace.h, mr_output_check, says them to users):
 * - a path whose last component is a symbolic link writes the link's
 *   target (followed to the end); the link itself is kept;
 * - an existing target that is not a regular file (directory, device,
 *   FIFO, socket) is refused, never replaced;
 * - a target that is one of the run's inputs (same device and inode) is
 *   refused;
 * - bytes go to a temporary file beside the target, named
 *   TARGET.tmp-PID-XXXXXX, which is synced, renamed over the target and
 *   the directory synced; a failure anywhere unlinks it and leaves the old
 *   target as it was;
 * - a new file gets mode 0666 less the umask; a replaced one keeps its
 *   mode, and its owner and group where the process may set them;
 * - temporary files of this pattern for the same target left by a process
 *   that no longer exists (killed) are removed when the next is opened;
 * - while a temporary file exists its name is in a small fixed table that
 *   mr_output_unlink_temps() (async-signal-safe) empties from a handler. */
#ifndef MR_OUTFILE_H
#define MR_OUTFILE_H

#include <stddef.h>

#include "common/error.h"

typedef struct mr__outfile mr__outfile;

/* Whether `path` may take an output, given the run's input files
 * (`inputs`, "-" for standard input): MR_OK, MR_ERR_USAGE (it is one of
 * the inputs) or MR_ERR_IO (it is not a regular file, its directory
 * cannot take a new file, or it cannot be examined).  Creates nothing. */
mr_status mr__outfile_check(const char *path, const char *const *inputs, size_t ninputs, mr__error *err);

/* The file `path` writes: its last component's links followed (*target
 * freed by the caller). */
mr_status mr__outfile_target(const char *path, char **target, mr__error *err);

/* Checks as mr__outfile_check, sweeps stale temporary files and creates
 * this one.  On MR_OK *out is to be ended by commit or abort. */
mr_status mr__outfile_open(mr__outfile **out, const char *path, const char *const *inputs, size_t ninputs,
                           mr__error *err);

/* Buffered; a failure is final (abort the file). */
mr_status mr__outfile_write(mr__outfile *o, const void *data, size_t n, mr__error *err);

/* Flushes, syncs, closes and renames the temporary file over the target,
 * then syncs the directory.  Frees o whatever happens; on any failure
 * before the rename the temporary file is gone and the target untouched
 * (a failed directory sync comes after the rename: MR_ERR_IO with the new
 * file in place). */
mr_status mr__outfile_commit(mr__outfile *o, mr__error *err);

/* Unlinks the temporary file and frees o (NULL is fine). */
void mr__outfile_abort(mr__outfile *o);

#endif
