/*
 * team.c: a fixed team of threads for the network's passes (see team.h).
 * A run is announced by bumping a generation counter; members spin on it
 * for a short while, because a pass of the network comes every few
 * microseconds and waking a sleeping thread costs more than that, then
 * sleep on a condition variable so that an idle team costs no processor
 * time. The caller spins until every member has reported. Not a general
 * thread pool.
 */
#define _GNU_SOURCE   /* sched_getaffinity, CPU_COUNT */
#include "team.h"

#include <pthread.h>
#include <sched.h>
#include <stdatomic.h>
#include <stdlib.h>
#include <time.h>
#include <unistd.h>

/* How long an idle member spins before it sleeps: long enough to bridge
 * the solver's own work between two passes (an Adam update, an L-BFGS
 * direction: microseconds), short enough that a team left idle does not
 * hold a processor (common practice in spin-then-block locks). */
#define SPIN_NS 200000L
/* Pauses before a waiting thread starts yielding: some microseconds, the
 * usual imbalance between members at the end of a run. */
#define SPIN_TURNS 2048u

typedef struct seat {
    struct team *t;
    size_t i;
} seat;

/* The counters the members spin on and the one they add to sit on cache
 * lines of their own (a line is 64 bytes on the x86-64 and ARM64 machines
 * rowfit runs on; a gap of a line between the groups keeps them apart
 * without asking malloc for an alignment it does not promise), so a
 * member reporting does not disturb those still waiting. */
struct team {
    size_t size;                 /* members, the caller included */
    int sync;                    /* lock and wake initialized */
    pthread_t thread[TEAM_MAX];
    seat seats[TEAM_MAX];
    pthread_mutex_t lock;
    pthread_cond_t wake;
    team_fn fn;                  /* the current run, published by gen */
    void *ctx;
    char gap0[64];
    atomic_ulong gen;            /* bumped by every run, and to stop */
    atomic_int stop;
    atomic_int sleepers;         /* threads asleep or about to sleep */
    char gap1[64];
    atomic_size_t done;          /* threads finished with this run */
    char gap2[64];
};

static void relax(void)
{
#if defined(__x86_64__) || defined(__i386__)
    __builtin_ia32_pause();
#endif
}

/* The k-th turn of a wait: a pause for the first SPIN_TURNS turns, then
 * the processor offered to others, for when there are more threads than
 * processors (a member spinning on the processor its caller needs would
 * wait for its own time slice to end). */
static void pause_or_yield(unsigned k)
{
    if (k < SPIN_TURNS)
        relax();
    else
        sched_yield();
}

static long long elapsed_ns(const struct timespec *t0)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (long long)(t.tv_sec - t0->tv_sec) * 1000000000LL
           + (t.tv_nsec - t0->tv_nsec);
}

/* Waits until the generation differs from seen; returns the new one. The
 * sleeper count and the generation are both sequentially consistent, so
 * either the member sees the new generation before it sleeps or the
 * caller of team_run sees the member counted and wakes it. */
static unsigned long await_run(team *t, unsigned long seen)
{
    struct timespec t0;
    clock_gettime(CLOCK_MONOTONIC, &t0);
    for (unsigned k = 1;; k++) {
        unsigned long g = atomic_load_explicit(&t->gen, memory_order_acquire);
        if (g != seen)
            return g;
        pause_or_yield(k);
        if (k % 64 == 0 && elapsed_ns(&t0) > SPIN_NS)
            break;
    }
    pthread_mutex_lock(&t->lock);
    atomic_fetch_add(&t->sleepers, 1);
    unsigned long g;
    while ((g = atomic_load(&t->gen)) == seen)
        pthread_cond_wait(&t->wake, &t->lock);
    atomic_fetch_sub(&t->sleepers, 1);
    pthread_mutex_unlock(&t->lock);
    return g;
}

static void *member(void *arg)
{
    seat *s = arg;
    team *t = s->t;
    unsigned long seen = 0;
    for (;;) {
        seen = await_run(t, seen);
        if (atomic_load_explicit(&t->stop, memory_order_acquire))
            return NULL;
        t->fn(t->ctx, s->i, t->size);
        atomic_fetch_add_explicit(&t->done, 1, memory_order_release);
    }
}

/* The processors this process may run on (taskset, a container's CPU
 * set), not those the machine has: a team larger than that would wait
 * on itself. */
size_t team_cores(void)
{
    long c = 0;
    cpu_set_t set;
    if (sched_getaffinity(0, sizeof set, &set) == 0)
        c = CPU_COUNT(&set);
    if (c < 1)
        c = sysconf(_SC_NPROCESSORS_ONLN);
    if (c < 1)
        return 1;
    return (size_t)c < TEAM_MAX ? (size_t)c : TEAM_MAX;
}

team *team_create(size_t size)
{
    team *t = calloc(1, sizeof *t);
    if (t == NULL)
        return NULL;
    if (size < 1)
        size = 1;
    if (size > TEAM_MAX)
        size = TEAM_MAX;
    t->size = 1;
    atomic_init(&t->gen, 0);
    atomic_init(&t->done, 0);
    atomic_init(&t->sleepers, 0);
    atomic_init(&t->stop, 0);
    if (size == 1 || pthread_mutex_init(&t->lock, NULL) != 0)
        return t;   /* a team of one: the caller alone */
    if (pthread_cond_init(&t->wake, NULL) != 0) {
        pthread_mutex_destroy(&t->lock);
        return t;
    }
    t->sync = 1;
    /* members are numbered as started, so a refused thread only makes the
     * team smaller */
    for (size_t i = 1; i < size; i++) {
        t->seats[i].t = t;
        t->seats[i].i = i;
        if (pthread_create(&t->thread[i], NULL, member, &t->seats[i]) != 0)
            break;
        t->size = i + 1;
    }
    return t;
}

size_t team_size(const team *t)
{
    return t != NULL ? t->size : 1;
}

/* Announces a new generation and wakes the members that sleep. */
static void announce(team *t)
{
    atomic_fetch_add(&t->gen, 1);
    if (atomic_load(&t->sleepers) > 0) {
        pthread_mutex_lock(&t->lock);
        pthread_cond_broadcast(&t->wake);
        pthread_mutex_unlock(&t->lock);
    }
}

void team_run(team *t, team_fn fn, void *ctx)
{
    if (t == NULL || t->size == 1) {
        fn(ctx, 0, 1);
        return;
    }
    t->fn = fn;
    t->ctx = ctx;
    /* every member counted the previous run before it returned */
    atomic_store_explicit(&t->done, 0, memory_order_relaxed);
    announce(t);
    fn(ctx, 0, t->size);
    for (unsigned k = 1; atomic_load_explicit(&t->done, memory_order_acquire)
                         != t->size - 1; k++)
        pause_or_yield(k);
}

void team_free(team *t)
{
    if (t == NULL)
        return;
    if (t->size > 1) {
        atomic_store_explicit(&t->stop, 1, memory_order_release);
        announce(t);
        for (size_t i = 1; i < t->size; i++)
            pthread_join(t->thread[i], NULL);
    }
    if (t->sync) {
        pthread_cond_destroy(&t->wake);
        pthread_mutex_destroy(&t->lock);
    }
    free(t);
}
