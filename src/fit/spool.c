/* spool.c - input that can be read only once (standard input, a pipe, a
 * FIFO) is copied as the first pass reads it; later passes read the copy. */
#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "fit/run.h"
/* Where temporary files go: $TMPDIR, else /tmp. */
const char *mr__temp_dir(void)
{
    const char *dir = getenv("TMPDIR");
    return dir != NULL && *dir != '\0' ? dir : "/tmp";
}

/* Input that may not be there to read again - standard input, a pipe (a
 * /dev/fd/N name, as a shell's process substitution gives), a FIFO, a
 * character device, a socket - is copied as the first pass reads it, and
 * later passes read the copy: reopening a FIFO would wait for ever for a
 * writer, and a pipe read again is empty.  Only a regular file (or a
 * directory, which the source refuses) is read where it is. */
int mr__read_only_once(const char *path)
{
    struct stat st;
    if (strcmp(path, "-") == 0) return 1;
    return stat(path, &st) == 0 && !S_ISREG(st.st_mode) && !S_ISDIR(st.st_mode);
}

mr_status mr__open_spool(mr__run *r, mr__error *err)
{
    const char *dir = mr__temp_dir();
    snprintf(r->spool, sizeof r->spool, "%s/millrace-input-XXXXXX", dir);
    r->spool_fd = mkstemp(r->spool);
    if (r->spool_fd < 0)
        return mr__fail(err, MR_ERR_IO,
                        "%s can be read only once, and its copy for the later passes cannot be created in %s: %s "
                        "(set TMPDIR to a writable directory with room for the whole input)",
                        r->display, dir, strerror(errno));
    /* Unlinked at once, so that nothing is left behind however the process
     * ends; later passes reopen it through the descriptor. */
    unlink(r->spool);
    snprintf(r->spool, sizeof r->spool, "/proc/self/fd/%d", r->spool_fd);
    return MR_OK;
}
