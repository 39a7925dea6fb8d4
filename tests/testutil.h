/*
 * testutil.h: what every cmocka unit test includes. cmocka 1.1.5's
 * assert_float_equal works in single precision, so doubles are compared
 * here with a relative tolerance of our own. Also the few helpers that
 * more than one test file needs, each defined once here: a seeded
 * generator for invented data, a long-double linear solver for reference
 * answers, and the folder of the statsmodels oracle files. Not for
 * anything only one test file uses (that stays static in the file).
 */
#ifndef ROWFIT_TESTUTIL_H
#define ROWFIT_TESTUTIL_H

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <cmocka.h>

/* Fails unless |a - b| <= rel * max(|a|, |b|) + abs. */
#define assert_close(a, b, rel, abs_tol) \
    assert_close_at((a), (b), (rel), (abs_tol), #a, __FILE__, __LINE__)

static inline void assert_close_at(double a, double b, double rel,
                                   double abs_tol, const char *what,
                                   const char *file, int line)
{
    double scale = fmax(fabs(a), fabs(b));
    if (!(fabs(a - b) <= rel * scale + abs_tol)) {
        print_error("%s = %.17g, expected %.17g (rel %g, abs %g)\n",
                       what, a, b, rel, abs_tol);
        _fail(file, line);
    }
}

/* A small deterministic generator so the data are the same everywhere:
 * splitmix64 (Steele, Lea & Flood, "Fast splittable pseudorandom number
 * generators", OOPSLA 2014) and Box-Muller for normal deviates (Box &
 * Muller, Ann. Math. Statist. 29 (1958) 610). */
typedef struct tu_rng { uint64_t s; } tu_rng;

static inline double tu_uniform(tu_rng *r)
{
    uint64_t z = (r->s += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    z ^= z >> 31;
    return ((double)(z >> 11) + 0.5) / 9007199254740992.0;  /* (0, 1) */
}

static inline double tu_normal(tu_rng *r)
{
    double u1 = tu_uniform(r), u2 = tu_uniform(r);
    return sqrt(-2 * log(u1)) * cos(6.283185307179586 * u2);
}

/* Solves the k x k system A z = b in place (z overwrites b) by Gaussian
 * elimination with partial pivoting in long double (Golub & Van Loan,
 * Matrix Computations, 4th ed., sec. 3.4). Only for the small,
 * well-conditioned reference answers of the tests. */
static inline void tu_gauss_solve(long double *A, long double *b, size_t k)
{
    for (size_t c = 0; c < k; c++) {
        size_t piv = c;
        for (size_t r = c + 1; r < k; r++)
            if (fabsl(A[r * k + c]) > fabsl(A[piv * k + c]))
                piv = r;
        if (piv != c) {
            for (size_t j = 0; j < k; j++) {
                long double t = A[c * k + j];
                A[c * k + j] = A[piv * k + j];
                A[piv * k + j] = t;
            }
            long double t = b[c];
            b[c] = b[piv];
            b[piv] = t;
        }
        for (size_t r = c + 1; r < k; r++) {
            long double f = A[r * k + c] / A[c * k + c];
            for (size_t j = c; j < k; j++)
                A[r * k + j] -= f * A[c * k + j];
            b[r] -= f * b[c];
        }
    }
    for (size_t c = k; c-- > 0;) {
        long double s = b[c];
        for (size_t j = c + 1; j < k; j++)
            s -= A[c * k + j] * b[j];
        b[c] = s / A[c * k + c];
    }
}

/* Where the scripts of tests/oracle/ wrote their datasets and statsmodels'
 * answers: `make check` and `make unit` run them into $(BUILD)/oracle and
 * pass the folder in ROWFIT_ORACLE_DIR. */
static inline const char *tu_oracle_dir(void)
{
    const char *d = getenv("ROWFIT_ORACLE_DIR");
    return d && *d ? d : "build/oracle";
}

#endif
