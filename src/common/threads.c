#include <pthread.h>

#include "common/threads.h"

void mr__run_threads(void *(*fn)(void *), void *work, size_t size, size_t T)
{
    pthread_t th[MR__THREADS_MAX];
    int made[MR__THREADS_MAX] = {0};
    size_t t;
    if (T < 1) T = 1;
    if (T > MR__THREADS_MAX) T = MR__THREADS_MAX;
    for (t = 0; t + 1 < T; t++) made[t] = pthread_create(&th[t], NULL, fn, (char *)work + t * size) == 0;
    for (t = 0; t + 1 < T; t++)
        if (!made[t]) fn((char *)work + t * size);
    fn((char *)work + (T - 1) * size);
    for (t = 0; t + 1 < T; t++)
        if (made[t]) pthread_join(th[t], NULL);
}
