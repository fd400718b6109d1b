#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <fcntl.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "common/appendfile.h"
#include "common/outfile.h"
#include "common/sysio.h"

static mr_status append_failed(const char *path, const char *what, int e, mr__error *err)
{
    return mr__fail(err, MR_ERR_IO, "%s: %s: %s", path, what, strerror(e));
}

mr_status mr__append_line(const char *path, const char *line, size_t n, const char *const *inputs, size_t ninputs,
                          mr__error *err)
{
    struct stat st;
    ssize_t w;
    int fd, e = 0;
    MR__TRY(mr__outfile_check(path, inputs, ninputs, err));
    /* O_NONBLOCK: a FIFO swapped in after the check must not hang the open */
    fd = open(path, O_WRONLY | O_APPEND | O_CREAT | O_CLOEXEC | O_NONBLOCK, 0666);
    if (fd < 0) return append_failed(path, "cannot open to append", errno, err);
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
        mr__close(fd);
        return mr__fail(err, MR_ERR_IO, "%s: is not a regular file; a log is appended only to one", path);
    }
    do w = mr__write(fd, line, n);
    while (w < 0 && errno == EINTR);
    if (w < 0) e = errno;
    else if ((size_t)w != n) e = ENOSPC; /* the rest cannot follow as part of the same write */
    if (e == 0 && mr__fsync(fd) != 0) e = errno;
    if (mr__close(fd) != 0 && e == 0) e = errno;
    return e ? append_failed(path, "cannot append", e, err) : MR_OK;
}
