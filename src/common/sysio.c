/* sysio.c - the failing versions of the calls in sysio.h (test builds
 * only; a normal build calls the system directly through the header). */
#define _POSIX_C_SOURCE 200809L
#include "common/sysio.h"

#ifdef MR_IO_FAILURE_TESTS
#include <errno.h>
#include <stdatomic.h>

/* The planned failure: global, and only in test builds. */
static atomic_long countdown = -1;
static atomic_int fail_mode = MR__IO_FAIL;

void mr__io_fail_after(long n, int mode)
{
    atomic_store(&fail_mode, mode);
    atomic_store(&countdown, n);
}

long mr__io_failures_left(void) { return atomic_load(&countdown); }

/* 1 when this call is the planned one; each call of a kind the plan
 * concerns takes one from the count. */
static int planned(int moves_bytes)
{
    long left;
    if (atomic_load(&fail_mode) == MR__IO_SHORT && !moves_bytes) return 0;
    left = atomic_load(&countdown);
    while (left >= 0 && !atomic_compare_exchange_weak(&countdown, &left, left - 1)) {
    }
    return left == 0;
}

/* For a read or write: -1 with errno set when it is to fail, else the
 * count to pass on (halved when it is to come up short). */
static long long plan_transfer(size_t *n, int failure)
{
    if (!planned(1)) return 0;
    if (atomic_load(&fail_mode) == MR__IO_SHORT) {
        if (*n > 1) *n /= 2;
        return 0;
    }
    errno = failure;
    return -1;
}

ssize_t mr__read(int fd, void *buf, size_t n) { return plan_transfer(&n, EIO) ? -1 : read(fd, buf, n); }
ssize_t mr__pread(int fd, void *buf, size_t n, off_t at)
{
    return plan_transfer(&n, EIO) ? -1 : pread(fd, buf, n, at);
}
ssize_t mr__write(int fd, const void *buf, size_t n)
{
    return plan_transfer(&n, ENOSPC) ? -1 : write(fd, buf, n);
}
ssize_t mr__pwrite(int fd, const void *buf, size_t n, off_t at)
{
    return plan_transfer(&n, ENOSPC) ? -1 : pwrite(fd, buf, n, at);
}

static int failed_with(int e)
{
    errno = e;
    return -1;
}

int mr__fsync(int fd) { return planned(0) ? failed_with(EIO) : fsync(fd); }
int mr__rename(const char *from, const char *to) { return planned(0) ? failed_with(EIO) : rename(from, to); }
/* The descriptor is released even when close reports an error (Linux). */
int mr__close(int fd)
{
    int planned_failure = planned(0), rc = close(fd);
    return planned_failure ? failed_with(EIO) : rc;
}
#else
/* ISO C wants at least one declaration in a translation unit. */
typedef int mr__sysio_plain_build;
#endif
