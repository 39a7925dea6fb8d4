/*
 * testutil.h: what every cmocka unit test includes. cmocka 1.1.5's
 * assert_float_equal works in single precision, so doubles are compared
 * here with a relative tolerance of our own.
 */
#ifndef ROWFIT_TESTUTIL_H
#define ROWFIT_TESTUTIL_H

#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
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

#endif
