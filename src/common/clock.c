#define _POSIX_C_SOURCE 200809L
#include <stdio.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "common/clock.h"

double mr__seconds_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + ts.tv_nsec * 1e-9;
}

int64_t mr__wall_ns_now(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_REALTIME, &ts);
    return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

int mr__utc_text(int64_t ns, char *buf, size_t cap)
{
    int64_t sec = ns / 1000000000, frac = ns % 1000000000;
    time_t t;
    struct tm tm;
    size_t n;
    buf[0] = '\0';
    if (frac < 0) sec--, frac += 1000000000;
    t = (time_t)sec;
    if (cap < 32 || gmtime_r(&t, &tm) == NULL || (n = strftime(buf, cap - 12, "%Y-%m-%dT%H:%M:%S", &tm)) == 0) {
        buf[0] = '\0';
        return -1;
    }
    snprintf(buf + n, cap - n, ".%09dZ", (int)frac);
    return 0;
}

void mr__host_name(char *buf, size_t cap)
{
    if (gethostname(buf, cap) != 0) buf[0] = '\0';
    buf[cap - 1] = '\0'; /* a name cut to the buffer is not terminated */
}
