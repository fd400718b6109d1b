#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <unistd.h>

#include "common/fileio.h"
#include "common/sysio.h"

mr_status mr__pread_full(int fd, char *buf, size_t n, uint64_t at)
{
    while (n > 0) {
        ssize_t got = mr__pread(fd, buf, n, (off_t)at);
        if (got < 0 && errno == EINTR) continue;
        if (got < 0) return MR_ERR_IO;
        if (got == 0) return MR_ERR_NO_DATA;
        buf += got;
        n -= (size_t)got;
        at += (uint64_t)got;
    }
    return MR_OK;
}
