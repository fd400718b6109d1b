/* check_outlock.c - one writer per output (mr_output_lock_take).
 * Source of truth: the contract in millrace.h.  Processes race to take
 * and let go of the lock on one target many times; inside, each creates a
 * marker with O_EXCL and removes it: a second holder at any moment would
 * find the marker there.  The lock files the holders remove while they
 * hold them must never let two in (the race of an unlink between another
 * taker's open and its lock). */
#define _POSIX_C_SOURCE 200809L
#include <check.h>
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <string.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "millrace.h"
#include "check_common.h"

#define RACERS 6
#define ROUNDS 150

static char dir[] = "/tmp/check_outlock-XXXXXX";

/* One racer: returns how many times it held the lock, or -1 when it
 * found another holder inside. */
static int race(const char *target, const char *marker)
{
    int held = 0, round;
    for (round = 0; round < ROUNDS; round++) {
        mr_output_lock *lock = NULL;
        char msg[512];
        int fd;
        if (mr_output_lock_take(target, &lock, msg, sizeof msg) != MR_OK) {
            if (strstr(msg, "another run is writing it") == NULL) return -2;
            continue;
        }
        fd = open(marker, O_WRONLY | O_CREAT | O_EXCL, 0600);
        if (fd < 0) return -1;
        close(fd);
        held++;
        unlink(marker);
        mr_output_lock_release(lock);
    }
    return held;
}

START_TEST(one_holder_at_a_time)
{
    char target[128], marker[128], lockfile[160];
    pid_t child[RACERS];
    int i, total = 0;
    snprintf(target, sizeof target, "%s/fit.json", dir);
    snprintf(marker, sizeof marker, "%s/inside", dir);
    snprintf(lockfile, sizeof lockfile, "%s.lock", target);
    for (i = 0; i < RACERS; i++) {
        child[i] = fork();
        ck_assert_int_ge(child[i], 0);
        if (child[i] == 0) {
            int held = race(target, marker);
            _exit(held < 0 ? 200 - held : held > 100 ? 100 : held);
        }
    }
    for (i = 0; i < RACERS; i++) {
        int status;
        ck_assert_int_eq(waitpid(child[i], &status, 0), child[i]);
        ck_assert(WIFEXITED(status));
        ck_assert_msg(WEXITSTATUS(status) <= 100, "racer %d: %s", i,
                      WEXITSTATUS(status) == 201 ? "two holders at once" : "an error other than 'busy'");
        total += WEXITSTATUS(status);
    }
    ck_assert_int_gt(total, 0);
    ck_assert_msg(access(lockfile, F_OK) != 0, "the last holder removes the lock file");
}
END_TEST

/* Within one process too (an open-file-description lock), and the
 * message names this process. */
START_TEST(second_taker_in_the_same_process)
{
    char target[128], msg[512], want[64];
    mr_output_lock *a = NULL, *b = (mr_output_lock *)1;
    snprintf(target, sizeof target, "%s/same.json", dir);
    ck_assert_int_eq(mr_output_lock_take(target, &a, msg, sizeof msg), MR_OK);
    ck_assert_int_eq(mr_output_lock_take(target, &b, msg, sizeof msg), MR_ERR_IO);
    ck_assert_ptr_null(b);
    snprintf(want, sizeof want, "pid %ld on ", (long)getpid());
    ck_assert_msg(strstr(msg, want) != NULL, "%s", msg);
    mr_output_lock_release(a);
    ck_assert_int_eq(mr_output_lock_take(target, &b, msg, sizeof msg), MR_OK);
    mr_output_lock_release(b);
    mr_output_lock_release(NULL);
}
END_TEST

int main(void)
{
    Suite *s = suite_create("outlock");
    TCase *tc = tcase_create("lock");
    int rc;
    if (mkdtemp(dir) == NULL) return EXIT_FAILURE;
    tcase_set_timeout(tc, 120);
    tcase_add_test(tc, second_taker_in_the_same_process);
    tcase_add_test(tc, one_holder_at_a_time);
    suite_add_tcase(s, tc);
    rc = mr_check_run(s, 1);
    rmdir(dir);
    return rc;
}
