/* sysio.h - the library's reads, writes, syncs and renames, in one place
 * so that a test build (-DMR_IO_FAILURE_TESTS) can make the n-th of them
 * fail, or come up short, and every I/O error path gets exercised
 * (tests/check_io.c).  In a normal build each is the plain system call. */
#ifndef MR_SYSIO_H
#define MR_SYSIO_H

#include <stddef.h>
#include <stdio.h>
#include <sys/types.h>
#include <unistd.h>

#ifdef MR_IO_FAILURE_TESTS
ssize_t mr__read(int fd, void *buf, size_t n);
ssize_t mr__pread(int fd, void *buf, size_t n, off_t at);
ssize_t mr__write(int fd, const void *buf, size_t n);
ssize_t mr__pwrite(int fd, const void *buf, size_t n, off_t at);
int mr__fsync(int fd);
int mr__close(int fd);
int mr__rename(const char *from, const char *to);

/* Test builds only.  MR__IO_FAIL: the call after the next n reads,
 * writes, syncs, closes or renames fails (EIO; ENOSPC for a write).
 * MR__IO_SHORT: the read or write after the next n moves only half its
 * bytes (at least one), as the kernel may.  n < 0: nothing fails.
 * Process-wide, so that worker threads' calls count too. */
enum { MR__IO_FAIL = 0, MR__IO_SHORT = 1 };
void mr__io_fail_after(long n, int mode);
/* How many calls are still to go before the planned one; negative once
 * it has happened (or when none is planned). */
long mr__io_failures_left(void);
#else
static inline ssize_t mr__read(int fd, void *buf, size_t n) { return read(fd, buf, n); }
static inline ssize_t mr__pread(int fd, void *buf, size_t n, off_t at) { return pread(fd, buf, n, at); }
static inline ssize_t mr__write(int fd, const void *buf, size_t n) { return write(fd, buf, n); }
static inline ssize_t mr__pwrite(int fd, const void *buf, size_t n, off_t at) { return pwrite(fd, buf, n, at); }
static inline int mr__fsync(int fd) { return fsync(fd); }
static inline int mr__close(int fd) { return close(fd); }
static inline int mr__rename(const char *from, const char *to) { return rename(from, to); }
#endif

#endif
