#define _POSIX_C_SOURCE 200809L
#include <errno.h>
#include <unistd.h>

#include "common/fileio.h"
#include "common/sysio.h"

int mr__pread_full(int fd, char *buf, size_t n, uint64_t at)
{
    while (n > 0) {
        ssize_t got = mr__pread(fd, buf, n, (off_t)at);
        if (got < 0 && errno == EINTR) continue;
        if (got < 0) return -1;
        if (got == 0) return 1;
        buf += got;
        n -= (size_t)got;
        at += (uint64_t)got;
    }
    return 0;
}
