/*
 * test_team.c: the thread team of the network's passes (engine/team.c):
 * every member runs once a run, the caller sees what the members wrote,
 * runs follow one another without loss over many thousands of rounds and
 * across the members' sleeps, a team of one and no team run on the caller.
 */
#include "testutil.h"

#include <stdatomic.h>
#include <string.h>
#include <time.h>

#include "../engine/team.h"

typedef struct tally {
    size_t size_seen[TEAM_MAX];
    long runs[TEAM_MAX];        /* written by its member alone */
    double sum[TEAM_MAX];       /* a member's part of a sum */
    atomic_int entered;
} tally;

static void count_run(void *ctx, size_t member, size_t size)
{
    tally *t = ctx;
    t->size_seen[member] = size;
    t->runs[member]++;
    atomic_fetch_add(&t->entered, 1);
}

static void test_team_runs_every_member_once_a_run(void **state)
{
    (void)state;
    for (size_t want = 1; want <= 4; want++) {
        team *tm = team_create(want);
        assert_non_null(tm);
        size_t size = team_size(tm);
        assert_true(size >= 1 && size <= want);
        static tally t;
        memset(&t, 0, sizeof t);
        atomic_init(&t.entered, 0);
        enum { RUNS = 20000 };
        for (int r = 0; r < RUNS; r++) {
            team_run(tm, count_run, &t);
            /* all members have returned when team_run returns */
            assert_int_equal(atomic_load(&t.entered), (int)size * (r + 1));
        }
        for (size_t i = 0; i < size; i++) {
            assert_int_equal(t.runs[i], RUNS);
            assert_int_equal(t.size_seen[i], size);
        }
        for (size_t i = size; i < TEAM_MAX; i++)
            assert_int_equal(t.runs[i], 0);
        team_free(tm);
    }
}

/* A sum cut into the members' parts, added by the caller afterwards: the
 * caller reads each part as its member wrote it. */
typedef struct parts {
    const double *v;
    size_t n;
    double part[TEAM_MAX];
} parts;

static void add_part(void *ctx, size_t member, size_t size)
{
    parts *p = ctx;
    double s = 0;
    for (size_t i = p->n * member / size; i < p->n * (member + 1) / size; i++)
        s += p->v[i];
    p->part[member] = s;
}

static void test_team_caller_sees_the_members_writes(void **state)
{
    (void)state;
    enum { N = 100000 };
    static double v[N];
    for (size_t i = 0; i < N; i++)
        v[i] = (double)(i % 97) * 0.25;   /* exact sums in binary */
    double want = 0;
    for (size_t i = 0; i < N; i++)
        want += v[i];
    team *tm = team_create(3);
    assert_non_null(tm);
    parts p = { v, N, { 0 } };
    for (int r = 0; r < 200; r++) {
        memset(p.part, 0, sizeof p.part);
        team_run(tm, add_part, &p);
        double got = 0;
        for (size_t i = 0; i < team_size(tm); i++)
            got += p.part[i];
        assert_true(got == want);
    }
    team_free(tm);
}

/* Members that have slept (idle longer than their spin) wake for the
 * next run. */
static void test_team_wakes_sleeping_members(void **state)
{
    (void)state;
    team *tm = team_create(2);
    assert_non_null(tm);
    static tally t;
    memset(&t, 0, sizeof t);
    atomic_init(&t.entered, 0);
    for (int r = 0; r < 5; r++) {
        struct timespec pause = { 0, 5 * 1000 * 1000 };   /* 5 ms */
        nanosleep(&pause, NULL);
        team_run(tm, count_run, &t);
    }
    for (size_t i = 0; i < team_size(tm); i++)
        assert_int_equal(t.runs[i], 5);
    team_free(tm);
}

static void test_team_of_one_and_none_run_on_the_caller(void **state)
{
    (void)state;
    static tally t;
    memset(&t, 0, sizeof t);
    atomic_init(&t.entered, 0);
    team_run(NULL, count_run, &t);
    assert_int_equal(t.runs[0], 1);
    assert_int_equal(t.size_seen[0], 1);
    team *tm = team_create(1);
    assert_non_null(tm);
    assert_int_equal(team_size(tm), 1);
    team_run(tm, count_run, &t);
    assert_int_equal(t.runs[0], 2);
    team_free(tm);
    team_free(NULL);
    /* sizes are clamped to 1 .. TEAM_MAX */
    tm = team_create(0);
    assert_non_null(tm);
    assert_int_equal(team_size(tm), 1);
    team_free(tm);
    tm = team_create(TEAM_MAX + 5);
    assert_non_null(tm);
    assert_true(team_size(tm) <= TEAM_MAX);
    team_free(tm);
    assert_true(team_cores() >= 1 && team_cores() <= TEAM_MAX);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_team_runs_every_member_once_a_run),
        cmocka_unit_test(test_team_caller_sees_the_members_writes),
        cmocka_unit_test(test_team_wakes_sleeping_members),
        cmocka_unit_test(test_team_of_one_and_none_run_on_the_caller),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
