/* appendfile.h - the one output that grows rather than being replaced: a
 * log a line at a time (the command's run log).  Atomic replacement would
 * lose a line another process appended meanwhile; instead each line goes
 * to the end in one write() on a descriptor opened with O_APPEND, which
 * POSIX places at the end as one step, so lines of processes appending at
 * once never interleave within a line on a local file system. */
#ifndef MR_APPENDFILE_H
#define MR_APPENDFILE_H

#include <stddef.h>

#include "common/error.h"

/* Appends the n bytes of `line` (its newline included) to `path` in one
 * write, creating the file (mode 0666 less the umask) when absent, then
 * syncs it.  The target is checked as every output's is (outfile.h): a
 * symbolic link is followed, anything but a regular file is refused
 * (MR_ERR_IO), one of `inputs` is refused (MR_ERR_USAGE).  A short write
 * is MR_ERR_IO (the file may then end in part of the line). */
mr_status mr__append_line(const char *path, const char *line, size_t n, const char *const *inputs, size_t ninputs,
                          mr__error *err);

#endif
