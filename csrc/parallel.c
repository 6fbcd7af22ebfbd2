/*
 * parallel.c -- a call's tasks run by several threads (the batch engines,
 * lagsum.c). Tasks are numbered 0 .. ntasks-1 and handed out in order
 * from a counter under a mutex; the calling thread is worker 0 and takes
 * tasks too. Each task writes its own part of the output and reads only
 * data written before the threads start, so the result does not depend
 * on which thread ran which task, or on how many threads there were.
 *
 * Nothing here can fail the call: when a mutex or a thread cannot be
 * made, fewer threads (down to the calling thread alone) run the same
 * tasks, with the same result. Built with FC_NO_THREADS, or on a platform
 * without POSIX threads, every task runs on the calling thread.
 * The library keeps no thread alive between calls.
 */
#include "internal.h"

#if !defined(FC_NO_THREADS) && (defined(__unix__) || defined(__APPLE__))
#define FC__HAVE_PTHREADS 1
#include <pthread.h>
#else
#define FC__HAVE_PTHREADS 0
#endif

typedef struct {
    fc__task_fn fn;
    void *arg;
    size_t ntasks;
    size_t next;
#if FC__HAVE_PTHREADS
    pthread_mutex_t lock;
#endif
} team;

typedef struct {
    team *t;
    size_t worker;
} member;

#if FC__HAVE_PTHREADS
static void *run_member(void *p)
{
    member *m = p;
    team *t = m->t;
    for (;;) {
        size_t k;
        pthread_mutex_lock(&t->lock);
        k = t->next < t->ntasks ? t->next++ : t->ntasks;
        pthread_mutex_unlock(&t->lock);
        if (k >= t->ntasks) break;
        t->fn(t->arg, k, m->worker);
    }
    return NULL;
}
#endif

int fc__have_threads(void)
{
    return FC__HAVE_PTHREADS;
}

void fc__run_tasks(size_t ntasks, size_t nworkers, fc__task_fn fn, void *arg)
{
    if (nworkers > ntasks) nworkers = ntasks;
    if (nworkers > FC_THREADS_MAX) nworkers = FC_THREADS_MAX;
#if FC__HAVE_PTHREADS
    if (nworkers > 1) {
        team t;
        t.fn = fn;
        t.arg = arg;
        t.ntasks = ntasks;
        t.next = 0;
        if (pthread_mutex_init(&t.lock, NULL) == 0) {
            pthread_t th[FC_THREADS_MAX];
            member mem[FC_THREADS_MAX];
            size_t started = 0;
            for (size_t w = 1; w < nworkers; w++) {
                mem[w].t = &t;
                mem[w].worker = w;
                if (pthread_create(&th[w], NULL, run_member, &mem[w]) != 0)
                    break; /* the workers started so far do the rest */
                started = w;
            }
            mem[0].t = &t;
            mem[0].worker = 0;
            run_member(&mem[0]);
            for (size_t w = 1; w <= started; w++) pthread_join(th[w], NULL);
            pthread_mutex_destroy(&t.lock);
            return;
        }
    }
#else
    (void)nworkers;
#endif
    for (size_t k = 0; k < ntasks; k++) fn(arg, k, 0);
}
