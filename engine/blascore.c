/*
 * blascore.c: OpenBLAS's kernel choice (blascore.h). Debian 12's OpenBLAS
 * (0.3.21, built for every x86-64 kernel set and choosing one when it
 * loads) does not know processors newer than its release: on one such
 * machine (an Intel Xeon of family 6, model 207, with AVX-512) it chose
 * its SSE3 kernels, and cblas_dgemm ran 1000 x 1000 products at 16 GFLOP/s
 * instead of 74 to 104 with the AVX-512 set (tests/bench_net.c,
 * 2026-12-02). OpenBLAS takes the set to use from the environment
 * variable OPENBLAS_CORETYPE, read when it loads (OpenBLAS's USAGE.md, "How to
 * choose TARGET manually at runtime", shipped in libopenblas-dev), and
 * names the set in use through openblas_get_corename.
 */
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/auxv.h>
#include <unistd.h>

#include "blascore.h"

/* OpenBLAS's own query, declared in its cblas.h, which cannot be included
 * beside GSL's gsl_cblas.h (network.c says why). */
char *openblas_get_corename(void);

const char *blascore_name(void)
{
    const char *name = openblas_get_corename();
    return name != NULL ? name : "unknown";
}

const char *blascore_better(void)
{
#if defined(__x86_64__) && defined(__GNUC__)
    /* Prescott is the set OpenBLAS's dynamic dispatch falls back to when
     * it does not know the processor; a processor that really is of that
     * age has no AVX, and then nothing is changed. */
    if (strcasecmp(blascore_name(), "Prescott") != 0)
        return NULL;
    __builtin_cpu_init();
    /* the features each set's kernels use (OpenBLAS's cpuid_x86.c and
     * kernel/x86_64/KERNEL.*, from memory); __builtin_cpu_supports also
     * checks that the operating system saves the registers */
    if (__builtin_cpu_supports("avx512f") && __builtin_cpu_supports("avx512cd")
        && __builtin_cpu_supports("avx512bw")
        && __builtin_cpu_supports("avx512dq")
        && __builtin_cpu_supports("avx512vl"))
        return "SkylakeX";
    if (__builtin_cpu_supports("avx2") && __builtin_cpu_supports("fma"))
        return "Haswell";
    if (__builtin_cpu_supports("avx"))
        return "Sandybridge";
#endif
    return NULL;
}

void blascore_restart(char **argv)
{
    const char *better = blascore_better();
    if (better == NULL || getenv("OPENBLAS_CORETYPE") != NULL)
        return;
    /* /proc/self/exe is the program only when the kernel loaded it with
     * its program interpreter; started as `ld-linux... rowfit`, it is
     * the interpreter itself, and the auxiliary vector then has no
     * interpreter base (getauxval(3)) */
    if (getauxval(AT_BASE) == 0)
        return;
    if (setenv("OPENBLAS_CORETYPE", better, 1) != 0)
        return;
    execv("/proc/self/exe", argv);
    unsetenv("OPENBLAS_CORETYPE");
}
