/* outfile.c - outputs written atomically (rules in outfile.h).
 *
 * The target is found by following the last component's symbolic links
 * ourselves, not by realpath: a link to a file not yet there must still
 * write that file, and the temporary file must sit in the target's own
 * directory for the rename to be atomic. */
#define _POSIX_C_SOURCE 200809L
#ifdef __linux__
#define _GNU_SOURCE /* sync_file_range */
#endif
#include <dirent.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <signal.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "common/alloc.h"
#include "common/outfile.h"
#include "common/sysio.h"

#define MAX_LINKS 40
#define TEMP_TRIES 100
#define TEMP_TAG ".tmp-"
#define RANDOM_CHARS 6
/* ".tmp-" + a pid of at most 10 digits + "-" + 6 characters + NUL */
#define TEMP_SUFFIX_CAP (sizeof TEMP_TAG + 10 + 1 + RANDOM_CHARS + 1)
#define OUT_BUFFER (1 << 16)
/* Every WRITEBACK_STEP bytes the kernel is asked to start writing the
 * file out (Linux), so that the commit's fsync waits for the last few
 * megabytes of a large output, not for all of it. */
#define WRITEBACK_STEP ((size_t)8 << 20)

struct mr__outfile {
    int fd, slot, created;
    char *display; /* the path as given, for messages */
    char *target;  /* the file replaced: the path with its links followed */
    char *temp;
    size_t len;
    size_t written, written_back; /* bytes written; those whose writeback was started */
    char buf[OUT_BUFFER]; /* gathers small writes (JSON comes a token at a time) */
};

/* ---- the table of temporary files a signal handler may remove ---------- */

/* A slot's state word: the low two bits say free, being filled or armed,
 * the rest counts how often it was freed, so that a handler can tell that
 * the name it copied was not rewritten meanwhile. */
enum { SLOT_FREE = 0, SLOT_FILLING = 1, SLOT_ARMED = 2 };
_Static_assert(ATOMIC_INT_LOCK_FREE == 2, "a signal handler reads the slots' state");
#define TEMP_SLOTS 16
static struct temp_slot {
    atomic_uint state;
    char path[PATH_MAX];
} temp_slots[TEMP_SLOTS];

static int register_temp(const char *path)
{
    size_t len = strlen(path);
    int i;
    if (len >= PATH_MAX) return -1;
    for (i = 0; i < TEMP_SLOTS; i++) {
        unsigned s = atomic_load(&temp_slots[i].state);
        if ((s & 3) != SLOT_FREE || !atomic_compare_exchange_strong(&temp_slots[i].state, &s, s | SLOT_FILLING))
            continue;
        memcpy(temp_slots[i].path, path, len + 1);
        atomic_store(&temp_slots[i].state, s | SLOT_ARMED);
        return i;
    }
    return -1; /* table full: the file is still removed on every failure, just not from a handler */
}

static void unregister_temp(int slot)
{
    if (slot >= 0) atomic_store(&temp_slots[slot].state, (atomic_load(&temp_slots[slot].state) & ~3u) + 4);
}

void mr_output_unlink_temps(void)
{
    char copy[PATH_MAX];
    int i;
    size_t k;
    for (i = 0; i < TEMP_SLOTS; i++) {
        unsigned s = atomic_load(&temp_slots[i].state);
        if ((s & 3) != SLOT_ARMED) continue;
        for (k = 0; k < PATH_MAX - 1 && temp_slots[i].path[k] != '\0'; k++) copy[k] = temp_slots[i].path[k];
        copy[k] = '\0';
        if (atomic_load(&temp_slots[i].state) == s) unlink(copy);
    }
}

/* ---- finding the target ---------------------------------------------- */

/* Length of the directory part of p, its last '/' included (0: none). */
static size_t dir_length(const char *p)
{
    const char *slash = strrchr(p, '/');
    return slash ? (size_t)(slash - p) + 1 : 0;
}

/* The file the symbolic link `link` names, relative to the link's own
 * directory; frees link.  NULL on failure (err set). */
static char *follow_link(char *link, const char *path, mr__error *err)
{
    char *dest = mr__malloc(PATH_MAX), *joined = NULL;
    ssize_t n = dest ? readlink(link, dest, PATH_MAX - 1) : -1;
    if (dest == NULL) {
        mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    } else if (n < 0) {
        mr__fail(err, MR_ERR_IO, "%s: cannot read the link %s: %s", path, link, strerror(errno));
    } else {
        size_t dirlen = dest[0] == '/' ? 0 : dir_length(link);
        joined = mr__malloc(dirlen + (size_t)n + 1);
        if (joined == NULL) {
            mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
        } else {
            memcpy(joined, link, dirlen);
            memcpy(joined + dirlen, dest, (size_t)n);
            joined[dirlen + (size_t)n] = '\0';
        }
    }
    mr__free(dest);
    mr__free(link);
    return joined;
}

/* Follows the last component's links; *exists says whether the target is
 * there, *st describes it when it is. */
static mr_status resolve_target(const char *path, char **target, struct stat *st, int *exists, mr__error *err)
{
    char *cur = mr__strdup(path);
    int hops;
    *target = NULL;
    for (hops = 0; cur != NULL; hops++) {
        if (lstat(cur, st) != 0) {
            int e = errno;
            *exists = 0;
            if (e == ENOENT) break;
            mr__free(cur);
            return mr__fail(err, MR_ERR_IO, "%s: cannot write there: %s", path, strerror(e));
        }
        *exists = 1;
        if (!S_ISLNK(st->st_mode)) break;
        if (hops == MAX_LINKS) {
            mr__free(cur);
            return mr__fail(err, MR_ERR_IO, "%s: too many symbolic links", path);
        }
        cur = follow_link(cur, path, err);
        if (cur == NULL) return err ? err->status : MR_ERR_IO;
    }
    if (cur == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    *target = cur;
    return MR_OK;
}

mr_status mr__outfile_target(const char *path, char **target, mr__error *err)
{
    struct stat st;
    int exists;
    return resolve_target(path, target, &st, &exists, err);
}

static const char *kind_of(mode_t m)
{
    if (S_ISDIR(m)) return "a directory";
    if (S_ISCHR(m)) return "a character device";
    if (S_ISBLK(m)) return "a block device";
    if (S_ISFIFO(m)) return "a FIFO";
    if (S_ISSOCK(m)) return "a socket";
    return "not a regular file";
}

static mr_status regular_or_absent(const char *path, const char *target, const struct stat *st, mr__error *err)
{
    if (S_ISREG(st->st_mode)) return MR_OK;
    if (strcmp(path, target) == 0)
        return mr__fail(err, MR_ERR_IO, "%s: is %s; an output replaces only a regular file", path, kind_of(st->st_mode));
    return mr__fail(err, MR_ERR_IO, "%s: links to %s, %s; an output replaces only a regular file", path, target,
                    kind_of(st->st_mode));
}

static mr_status not_an_input(const char *path, const struct stat *out, const char *const *inputs, size_t n,
                              mr__error *err)
{
    size_t i;
    for (i = 0; i < n; i++) {
        struct stat in;
        int is_stdin = strcmp(inputs[i], "-") == 0;
        if ((is_stdin ? fstat(STDIN_FILENO, &in) : stat(inputs[i], &in)) != 0) continue;
        if (in.st_dev == out->st_dev && in.st_ino == out->st_ino)
            return mr__fail(err, MR_ERR_USAGE, "%s: is the input file %s; refusing to overwrite it", path,
                            is_stdin ? "(standard input)" : inputs[i]);
    }
    return MR_OK;
}

/* The directory must take a new file: found out before a long run rather
 * than when its result is to be written. */
static mr_status directory_writable(const char *path, const char *target, mr__error *err)
{
    size_t dirlen = dir_length(target);
    char *dir = dirlen ? mr__strndup(target, dirlen) : mr__strdup(".");
    struct stat st;
    int e = 0;
    if (dir == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (stat(dir, &st) != 0) e = errno;
    else if (!S_ISDIR(st.st_mode)) e = ENOTDIR;
    else if (faccessat(AT_FDCWD, dir, W_OK | X_OK, AT_EACCESS) != 0) e = errno;
    if (e != 0) mr__fail(err, MR_ERR_IO, "%s: cannot create a file in %s: %s", path, dir, strerror(e));
    mr__free(dir);
    return e ? MR_ERR_IO : MR_OK;
}

/* Resolves and checks; on MR_OK *target is the file to replace. */
static mr_status examine(const char *path, const char *const *inputs, size_t n, char **target, struct stat *st,
                         int *exists, mr__error *err)
{
    mr_status s;
    size_t len = strlen(path);
    if (len == 0 || path[len - 1] == '/')
        return mr__fail(err, MR_ERR_IO, "'%s': an output needs a file name, not a directory", path);
    MR__TRY(resolve_target(path, target, st, exists, err));
    s = *exists ? regular_or_absent(path, *target, st, err) : MR_OK;
    if (s == MR_OK && *exists) s = not_an_input(path, st, inputs, n, err);
    if (s == MR_OK) s = directory_writable(path, *target, err);
    if (s != MR_OK) {
        mr__free(*target);
        *target = NULL;
    }
    return s;
}

mr_status mr__outfile_check(const char *path, const char *const *inputs, size_t ninputs, mr__error *err)
{
    char *target;
    struct stat st;
    int exists;
    MR__TRY(examine(path, inputs, ninputs, &target, &st, &exists, err));
    mr__free(target);
    return MR_OK;
}

mr_status mr_output_check(const char *path, const char *const *inputs, size_t ninputs, char *msg, size_t msgcap)
{
    mr__error err;
    mr_status st;
    mr__error_clear(&err);
    st = mr__outfile_check(path, inputs, ninputs, &err);
    mr__error_export(&err, msg, msgcap);
    return st;
}

/* ---- stale temporary files -------------------------------------------- */

/* Whether `name` is BASE.tmp-PID-XXXXXX with PID a process that no longer
 * exists (on this machine: see millrace.h). */
static int names_dead_temp(const char *name, const char *base)
{
    size_t blen = strlen(base), digits = 0, k;
    const char *p = name + blen + sizeof TEMP_TAG - 1;
    long long pid = 0;
    if (strncmp(name, base, blen) != 0 || strncmp(name + blen, TEMP_TAG, sizeof TEMP_TAG - 1) != 0) return 0;
    for (; *p >= '0' && *p <= '9' && digits < 10; p++, digits++) pid = pid * 10 + (*p - '0');
    if (digits == 0 || *p++ != '-' || pid <= 0 || pid > INT_MAX || pid == (long long)getpid()) return 0;
    for (k = 0; k < RANDOM_CHARS; k++)
        if (!((p[k] >= '0' && p[k] <= '9') || (p[k] >= 'a' && p[k] <= 'z') || (p[k] >= 'A' && p[k] <= 'Z'))) return 0;
    return p[RANDOM_CHARS] == '\0' && kill((pid_t)pid, 0) != 0 && errno == ESRCH;
}

/* Removes the temporary files of `target` left by killed processes: our
 * own pattern only, in that directory only, regular files of this user
 * only.  Best effort: a sweep that cannot run changes nothing else. */
static void sweep_stale(const char *target)
{
    size_t dirlen = dir_length(target);
    char *dir = dirlen ? mr__strndup(target, dirlen) : mr__strdup(".");
    DIR *d = dir ? opendir(dir) : NULL;
    struct dirent *e;
    while (d != NULL && (e = readdir(d)) != NULL) {
        struct stat st;
        if (!names_dead_temp(e->d_name, target + dirlen)) continue;
        if (fstatat(dirfd(d), e->d_name, &st, AT_SYMLINK_NOFOLLOW) == 0 && S_ISREG(st.st_mode) &&
            st.st_uid == geteuid())
            unlinkat(dirfd(d), e->d_name, 0);
    }
    if (d != NULL) closedir(d);
    mr__free(dir);
}

/* ---- the temporary file ------------------------------------------------ */

static void name_temp(char *temp, size_t cap, const char *target, int attempt)
{
    static const char alphabet[] = "0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ";
    char chars[RANDOM_CHARS + 1];
    struct timespec ts;
    uint64_t z;
    int k;
    clock_gettime(CLOCK_REALTIME, &ts);
    /* Unpredictable enough to avoid collisions; O_EXCL makes it safe. */
    z = (uint64_t)ts.tv_nsec ^ ((uint64_t)ts.tv_sec << 30) ^ (uint64_t)(uintptr_t)&ts ^ (uint64_t)attempt << 56;
    z = (z ^ (z >> 30)) * UINT64_C(0xBF58476D1CE4E5B9);
    z = (z ^ (z >> 27)) * UINT64_C(0x94D049BB133111EB);
    z ^= z >> 31;
    for (k = 0; k < RANDOM_CHARS; k++, z /= 62) chars[k] = alphabet[z % 62];
    chars[RANDOM_CHARS] = '\0';
    snprintf(temp, cap, "%s%s%ld-%s", target, TEMP_TAG, (long)getpid(), chars);
}

/* A replaced file's owner and mode go to its successor where allowed;
 * the owner first, as changing it may clear set-id bits. */
static void keep_owner_and_mode(int fd, const struct stat *old)
{
    if (fchown(fd, old->st_uid, old->st_gid) != 0) {
        /* not ours to give away: the new file stays this user's */
    }
    if (fchmod(fd, old->st_mode & 07777) != 0) {
        /* the mode it was created with stands */
    }
}

static mr_status create_temp(mr__outfile *o, const struct stat *old, mr__error *err)
{
    size_t cap = strlen(o->target) + TEMP_SUFFIX_CAP;
    int attempt;
    o->temp = mr__malloc(cap);
    if (o->temp == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    for (attempt = 0; attempt < TEMP_TRIES && o->fd < 0; attempt++) {
        int e;
        name_temp(o->temp, cap, o->target, attempt);
        /* Named in the table before it exists: no moment when a signal
         * could leave it behind unseen. */
        o->slot = register_temp(o->temp);
        o->fd = open(o->temp, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC | O_NOFOLLOW, old ? old->st_mode & 07777 : 0666);
        if (o->fd >= 0) break;
        e = errno;
        unregister_temp(o->slot);
        o->slot = -1;
        if (e != EEXIST)
            return mr__fail(err, MR_ERR_IO, "%s: cannot create a temporary file beside it: %s", o->display, strerror(e));
    }
    if (o->fd < 0) return mr__fail(err, MR_ERR_IO, "%s: no free temporary file name beside it", o->display);
    o->created = 1;
    if (old != NULL) keep_owner_and_mode(o->fd, old);
    return MR_OK;
}

static void outfile_free(mr__outfile *o)
{
    mr__free(o->display);
    mr__free(o->target);
    mr__free(o->temp);
    mr__free(o);
}

void mr__outfile_abort(mr__outfile *o)
{
    if (o == NULL) return;
    if (o->fd >= 0) close(o->fd);
    if (o->created) unlink(o->temp);
    unregister_temp(o->slot);
    outfile_free(o);
}

mr_status mr__outfile_open(mr__outfile **out, const char *path, const char *const *inputs, size_t ninputs,
                           mr__error *err)
{
    struct stat st;
    int exists;
    mr_status s;
    mr__outfile *o = mr__calloc(1, sizeof *o);
    *out = NULL;
    if (o == NULL) return mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    o->fd = o->slot = -1;
    o->display = mr__strdup(path);
    s = o->display ? examine(path, inputs, ninputs, &o->target, &st, &exists, err)
                   : mr__fail(err, MR_ERR_NO_MEMORY, "out of memory");
    if (s == MR_OK) sweep_stale(o->target);
    if (s == MR_OK) s = create_temp(o, exists ? &st : NULL, err);
    if (s != MR_OK) {
        mr__outfile_abort(o);
        return s;
    }
    *out = o;
    return MR_OK;
}

/* ---- writing and committing ------------------------------------------- */

static mr_status io_failure(const mr__outfile *o, const char *what, int e, mr__error *err)
{
    return mr__fail(err, MR_ERR_IO, "%s: %s: %s", o->display, what, strerror(e));
}

static void start_writeback(mr__outfile *o)
{
    if (o->written - o->written_back < WRITEBACK_STEP) return;
#ifdef __linux__
    /* a hint: a failure shows again at the fsync, which reports it */
    (void)sync_file_range(o->fd, (off_t)o->written_back, (off_t)(o->written - o->written_back), SYNC_FILE_RANGE_WRITE);
#endif
    o->written_back = o->written;
}

static mr_status write_all(mr__outfile *o, const char *p, size_t n, mr__error *err)
{
    while (n > 0) {
        ssize_t w = mr__write(o->fd, p, n);
        if (w < 0 && errno == EINTR) continue;
        if (w <= 0) return io_failure(o, "cannot write", w < 0 ? errno : ENOSPC, err);
        p += w;
        n -= (size_t)w;
        o->written += (size_t)w;
    }
    start_writeback(o);
    return MR_OK;
}

static mr_status flush_buffer(mr__outfile *o, mr__error *err)
{
    size_t n = o->len;
    o->len = 0;
    return write_all(o, o->buf, n, err);
}

/* A piece as large as the buffer goes out as it is, after what the buffer
 * holds: a scored block's megabytes are not copied through it. */
mr_status mr__outfile_write(mr__outfile *o, const void *data, size_t n, mr__error *err)
{
    const char *p = data;
    if (n >= sizeof o->buf) {
        MR__TRY(flush_buffer(o, err));
        return write_all(o, p, n, err);
    }
    while (n > 0) {
        size_t take = sizeof o->buf - o->len < n ? sizeof o->buf - o->len : n;
        memcpy(o->buf + o->len, p, take);
        o->len += take;
        p += take;
        n -= take;
        if (o->len == sizeof o->buf) MR__TRY(flush_buffer(o, err));
    }
    return MR_OK;
}

/* The rename is what makes the file durable under its name only once the
 * directory entry is on disk too.  A directory that cannot be opened, or
 * a file system that cannot sync one (EINVAL), is left as it is. */
static mr_status sync_directory(const mr__outfile *o, mr__error *err)
{
    size_t dirlen = dir_length(o->target);
    char *dir = dirlen ? mr__strndup(o->target, dirlen) : mr__strdup(".");
    int fd = dir ? open(dir, O_RDONLY | O_DIRECTORY | O_CLOEXEC) : -1, e = 0;
    mr__free(dir);
    if (fd < 0) return MR_OK;
    if (mr__fsync(fd) != 0 && errno != EINVAL) e = errno;
    close(fd);
    return e ? io_failure(o, "written, but its directory could not be synced", e, err) : MR_OK;
}

/* Just before the rename: the target may have been swapped for something
 * that must not be replaced while the file was being written. */
static mr_status still_replaceable(const mr__outfile *o, mr__error *err)
{
    struct stat st;
    if (lstat(o->target, &st) != 0) return MR_OK;
    return regular_or_absent(o->display, o->target, &st, err);
}

mr_status mr__outfile_commit(mr__outfile *o, mr__error *err)
{
    mr_status s = flush_buffer(o, err);
    if (s == MR_OK && mr__fsync(o->fd) != 0) s = io_failure(o, "cannot write", errno, err);
    if (mr__close(o->fd) != 0 && s == MR_OK) s = io_failure(o, "cannot write", errno, err);
    o->fd = -1;
    if (s == MR_OK) s = still_replaceable(o, err);
    if (s == MR_OK && mr__rename(o->temp, o->target) != 0)
        s = io_failure(o, "cannot rename the finished file into place", errno, err);
    if (s != MR_OK) {
        mr__outfile_abort(o);
        return s;
    }
    unregister_temp(o->slot);
    s = sync_directory(o, err);
    outfile_free(o);
    return s;
}
