/*
 * team.h: a fixed team of worker threads that runs one function for every
 * member and waits for all of them, for the network's passes over the rows
 * (network.c), which come thousands of times a second. Not a general
 * thread pool: no queue, no futures, one caller at a time, and nothing in
 * it decides how work is split (the caller's split must not depend on the
 * team's size if its results are to be the same on any machine).
 */
#ifndef ROWFIT_TEAM_H
#define ROWFIT_TEAM_H

#include <stddef.h>

/* Members a team may have: more than a laptop's cores, and a bound on the
 * caller's per-member buffers. */
#define TEAM_MAX 16

typedef struct team team;

/* Work for member i of a team of size members, 0 <= i < size; must not
 * fail (record failures in ctx). */
typedef void (*team_fn)(void *ctx, size_t member, size_t size);

/* The processors this process may use (its CPU affinity; else those
 * online; 1 when the system cannot tell), at most TEAM_MAX. */
size_t team_cores(void);

/* A team of up to `size` members (at least 1, at most TEAM_MAX): the caller
 * is member 0 and size - 1 threads are started. When the system refuses a
 * thread (or its lock) the team is smaller (team_size says how large); the
 * result is NULL only when memory runs out. Free with team_free. */
team *team_create(size_t size);

size_t team_size(const team *t);

/* Runs fn(ctx, i, size) for every member i, member 0 on the calling
 * thread, and returns when all have returned; everything the members wrote
 * is then visible to the caller. t may be NULL (fn(ctx, 0, 1) alone). */
void team_run(team *t, team_fn fn, void *ctx);

/* Stops and joins the threads; NULL is allowed. */
void team_free(team *t);

#endif
