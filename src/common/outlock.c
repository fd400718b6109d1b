/* outlock.c - one writer per output (mr_output_lock in millrace.h).
 *
 * The lock is a write lock on the side file TARGET.lock, taken with an
 * open-file-description lock where the system has one (Linux: it
 * conflicts within one process too, and closing another descriptor of
 * the file does not drop it), else a POSIX record lock.  The kernel
 * drops it when the holder ends however it ends (a crash, kill -9, a
 * reboot), so a lock is never stale.
 *
 * Only the holder removes the file, while it holds the lock, as it lets
 * go.  A taker may have opened the file just before that unlink and lock
 * it just after - a lock on a name that is gone, while a third creates
 * the file anew and locks that: so a taker that got its lock checks that
 * the name still leads to the file it locked, and starts over if not.  A
 * holder that was killed leaves the file, unlocked: the next run takes
 * it.  Its content - pid, host, start time - only names the holder in
 * the message of a run that is refused. */
#define _GNU_SOURCE
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/outfile.h"
#include "common/sysio.h"
#include "millrace.h"

#ifdef F_OFD_SETLK
#define LOCK_CMD F_OFD_SETLK
#else
#define LOCK_CMD F_SETLK
#endif

#define LOCK_TRIES 100

struct mr_output_lock {
    int fd;
    char *path; /* the lock file, removed as the lock is let go */
};

static mr_status busy(int fd, const char *path, const char *lockpath, mr__error *err)
{
    char holder[256];
    ssize_t n = mr__pread(fd, holder, sizeof holder - 1, 0);
    size_t len = n > 0 ? (size_t)n : 0;
    while (len > 0 && (holder[len - 1] == '\n' || holder[len - 1] == '\0')) len--;
    holder[len] = '\0';
    return mr__fail(err, MR_ERR_IO,
                    "%s: another run is writing it (%s, per %s); wait for it to end or write elsewhere", path,
                    len ? holder : "not yet identified", lockpath);
}

static void name_holder(int fd)
{
    char line[256], host[128] = "unknown host";
    time_t now = time(NULL);
    struct tm tm;
    int n;
    gethostname(host, sizeof host - 1);
    host[sizeof host - 1] = '\0';
    if (gmtime_r(&now, &tm) == NULL) memset(&tm, 0, sizeof tm);
    n = snprintf(line, sizeof line, "pid %ld on %s since %04d-%02d-%02dT%02d:%02d:%02dZ\n", (long)getpid(), host,
                 tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, tm.tm_hour, tm.tm_min, tm.tm_sec);
    /* only a name for messages: the lock holds whether or not it is written */
    if (ftruncate(fd, 0) == 0 && n > 0) (void)!mr__pwrite(fd, line, (size_t)n < sizeof line ? (size_t)n : sizeof line - 1, 0);
}

/* The lock on the file open as fd; *gone when the name no longer leads
 * to that file (its holder removed it meanwhile: try again). */
static mr_status lock_open_file(int fd, const char *path, const char *lockpath, int *gone, mr__error *err)
{
    struct flock fl;
    struct stat st, now;
    *gone = 0;
    if (fstat(fd, &st) != 0 || !S_ISREG(st.st_mode))
        return mr__fail(err, MR_ERR_IO, "%s: its lock file %s is not a regular file", path, lockpath);
    memset(&fl, 0, sizeof fl);
    fl.l_type = F_WRLCK;
    fl.l_whence = SEEK_SET;
    if (fcntl(fd, LOCK_CMD, &fl) != 0) {
        int e = errno;
        if (e == EACCES || e == EAGAIN) return busy(fd, path, lockpath, err);
        return mr__fail(err, MR_ERR_IO, "%s: cannot lock %s: %s", path, lockpath, strerror(e));
    }
    *gone = lstat(lockpath, &now) != 0 || now.st_dev != st.st_dev || now.st_ino != st.st_ino;
    return MR_OK;
}

static mr_status lock_file(const char *path, const char *lockpath, int *fd_out, mr__error *err)
{
    int tries;
    *fd_out = -1;
    for (tries = 0; tries < LOCK_TRIES; tries++) {
        int gone, fd = open(lockpath, O_RDWR | O_CREAT | O_CLOEXEC | O_NOFOLLOW, 0666);
        mr_status st;
        if (fd < 0)
            return mr__fail(err, MR_ERR_IO, "%s: cannot open its lock file %s: %s", path, lockpath, strerror(errno));
        st = lock_open_file(fd, path, lockpath, &gone, err);
        if (st == MR_OK && !gone) {
            name_holder(fd);
            *fd_out = fd;
            return MR_OK;
        }
        mr__close(fd);
        if (st != MR_OK) return st;
    }
    return mr__fail(err, MR_ERR_IO, "%s: its lock file %s keeps being replaced; is another run starting?", path,
                    lockpath);
}

static mr_status take(const char *path, mr_output_lock **out, mr__error *err)
{
    char *target = NULL, *lockpath = NULL;
    int fd = -1;
    mr_status st = mr__outfile_target(path, &target, err);
    if (st == MR_OK && (lockpath = mr__malloc(strlen(target) + sizeof ".lock")) == NULL)
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (st == MR_OK) {
        strcpy(lockpath, target);
        strcat(lockpath, ".lock");
        st = lock_file(path, lockpath, &fd, err);
    }
    if (st == MR_OK && (*out = mr__malloc(sizeof **out)) == NULL) {
        unlink(lockpath); /* still held: see above */
        mr__close(fd);
        st = mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    }
    if (st == MR_OK) {
        (*out)->fd = fd;
        (*out)->path = lockpath;
        lockpath = NULL;
    }
    mr__free(target);
    mr__free(lockpath);
    return st;
}

mr_status mr_output_lock_take(const char *path, mr_output_lock **out, char *msg, size_t msgcap)
{
    mr__error err;
    mr_status st;
    *out = NULL;
    mr__error_clear(&err);
    st = take(path, out, &err);
    mr__error_export(&err, msg, msgcap);
    return st;
}

const char *mr_output_lock_file(const mr_output_lock *lock) { return lock->path; }

void mr_output_lock_release(mr_output_lock *lock)
{
    if (lock == NULL) return;
    unlink(lock->path); /* while the lock is held: see above */
    mr__close(lock->fd);
    mr__free(lock->path);
    mr__free(lock);
}
