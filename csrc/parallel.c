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
 * A call returns when its tasks are done; a helper that started too late
 * to take one exits on its own right after, and is joined by a later call
 * or at unload/exit (see the table of helpers below): no thread waits for
 * work between calls.
 */
#include "internal.h"

#include <stdlib.h>
#include <string.h>

#if !defined(FC_NO_THREADS) && (defined(__unix__) || defined(__APPLE__))
#define FC__HAVE_PTHREADS 1
#include <pthread.h>
#else
#define FC__HAVE_PTHREADS 0
#endif

#if FC__HAVE_PTHREADS
/*
 * A call's team: tasks handed out from next, counted in done when
 * finished; refs counts the calling thread and the helpers still holding
 * the team (the last to leave frees it, so a helper that starts after the
 * call has returned still finds it).
 */
typedef struct {
    fc__task_fn fn;
    void *arg;
    size_t ntasks, next, done;
    size_t refs;
    pthread_mutex_t lock;
    pthread_cond_t fin;
} team;

typedef struct {
    team *t;
    size_t worker;
    size_t slot;   /* its entry in the table of helpers not yet joined */
} member;

/*
 * Helpers not yet joined. The calling thread waits for every task to be
 * done, not for its helpers to start: a helper that the system starts late
 * (an idle virtual CPU to wake up, a busy machine) would otherwise hold the
 * call up for longer than its share of the work (measured: 0.37 ms per
 * call on the 2-core virtual machine, against frames of about 0.2 ms).
 * Such helpers find no task left, leave the team and exit; they are joined
 * by a later call, or when the library is unloaded or the process exits
 * (reap_all, a destructor), so that no thread runs the library's code
 * after it is gone. A child process after fork has none of them
 * (forget_all).
 */
#define FC__PENDING_MAX (2 * FC_THREADS_MAX)
static pthread_mutex_t pend_lock = PTHREAD_MUTEX_INITIALIZER;
static pthread_t pend_thread[FC__PENDING_MAX];
static unsigned char pend_used[FC__PENDING_MAX];  /* a thread is in the slot */
static unsigned char pend_exited[FC__PENDING_MAX]; /* it has left the team */
static pthread_once_t pend_once = PTHREAD_ONCE_INIT;

static void forget_all(void)
{
    /* in the child after fork: the parent's helpers are not here */
    memset(pend_used, 0, sizeof pend_used);
    memset(pend_exited, 0, sizeof pend_exited);
    pthread_mutex_init(&pend_lock, NULL);
}

static void pend_init(void)
{
    (void)pthread_atfork(NULL, NULL, forget_all);
}

/* Join the helpers in the table: all (wait) or only those that have left
   their team (their join returns at once). */
static void reap(int all)
{
    pthread_t th[FC__PENDING_MAX];
    size_t n = 0;
    pthread_mutex_lock(&pend_lock);
    for (size_t i = 0; i < FC__PENDING_MAX; i++)
        if (pend_used[i] && (all || pend_exited[i])) {
            th[n++] = pend_thread[i];
            pend_used[i] = pend_exited[i] = 0;
        }
    pthread_mutex_unlock(&pend_lock);
    for (size_t i = 0; i < n; i++) pthread_join(th[i], NULL);
}

__attribute__((destructor)) static void reap_all(void)
{
    reap(1);
}

static void team_leave(team *t)
{
    pthread_mutex_lock(&t->lock);
    size_t left = --t->refs;
    pthread_mutex_unlock(&t->lock);
    if (left == 0) {
        pthread_cond_destroy(&t->fin);
        pthread_mutex_destroy(&t->lock);
        free(t);
    }
}

static void work(team *t, size_t worker)
{
    for (;;) {
        size_t k;
        pthread_mutex_lock(&t->lock);
        k = t->next < t->ntasks ? t->next++ : t->ntasks;
        pthread_mutex_unlock(&t->lock);
        if (k >= t->ntasks) return;
        t->fn(t->arg, k, worker);
        pthread_mutex_lock(&t->lock);
        if (++t->done == t->ntasks) pthread_cond_signal(&t->fin);
        pthread_mutex_unlock(&t->lock);
    }
}

static void *run_member(void *p)
{
    member m = *(member *)p;
    free(p);
    work(m.t, m.worker);
    team_leave(m.t);
    pthread_mutex_lock(&pend_lock);
    /* the slot is still this thread's unless a full reap (take_slot, the
       destructor) has taken it to join, and a new helper has it now */
    if (pend_used[m.slot] && pthread_equal(pend_thread[m.slot], pthread_self()))
        pend_exited[m.slot] = 1;
    pthread_mutex_unlock(&pend_lock);
    return NULL;
}

/* A free slot of the table (joining the oldest helpers if none is free:
   they have no task left, so they end soon); FC__PENDING_MAX if none. */
static size_t take_slot(void)
{
    for (int round = 0; round < 2; round++) {
        pthread_mutex_lock(&pend_lock);
        for (size_t i = 0; i < FC__PENDING_MAX; i++)
            if (!pend_used[i]) {
                pend_used[i] = 1;
                pend_exited[i] = 0;
                pthread_mutex_unlock(&pend_lock);
                return i;
            }
        pthread_mutex_unlock(&pend_lock);
        reap(1);
    }
    return FC__PENDING_MAX;
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
        (void)pthread_once(&pend_once, pend_init);
        reap(0); /* helpers of earlier calls that have left */
        team *t = malloc(sizeof *t);
        if (t && pthread_mutex_init(&t->lock, NULL) == 0) {
            if (pthread_cond_init(&t->fin, NULL) != 0) {
                pthread_mutex_destroy(&t->lock);
                free(t);
                t = NULL;
            }
        } else {
            free(t);
            t = NULL;
        }
        if (t) {
            t->fn = fn;
            t->arg = arg;
            t->ntasks = ntasks;
            t->next = t->done = 0;
            t->refs = 1;
            for (size_t w = 1; w < nworkers; w++) {
                member *m = malloc(sizeof *m);
                size_t slot = m ? take_slot() : FC__PENDING_MAX;
                if (slot == FC__PENDING_MAX) {
                    free(m);
                    break; /* the workers started so far do the rest */
                }
                m->t = t;
                m->worker = w;
                m->slot = slot;
                pthread_mutex_lock(&t->lock);
                t->refs++;
                pthread_mutex_unlock(&t->lock);
                pthread_mutex_lock(&pend_lock);
                int bad = pthread_create(&pend_thread[slot], NULL, run_member, m) != 0;
                if (bad) pend_used[slot] = 0;
                pthread_mutex_unlock(&pend_lock);
                if (bad) {
                    free(m);
                    pthread_mutex_lock(&t->lock);
                    t->refs--;
                    pthread_mutex_unlock(&t->lock);
                    break;
                }
            }
            work(t, 0);
            /* every task done (some perhaps by helpers still running one);
               helpers that have not started are not waited for */
            pthread_mutex_lock(&t->lock);
            while (t->done < t->ntasks) pthread_cond_wait(&t->fin, &t->lock);
            pthread_mutex_unlock(&t->lock);
            team_leave(t);
            return;
        }
    }
#else
    (void)nworkers;
#endif
    for (size_t k = 0; k < ntasks; k++) fn(arg, k, 0);
}
