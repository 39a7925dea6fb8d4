/*
 * blascore.h: which of OpenBLAS's kernel sets this process runs, and the
 * set it should run when OpenBLAS did not recognise the processor. Not a
 * BLAS and not a processor database: it reads OpenBLAS's choice and the
 * processor's instruction-set features, nothing more.
 */
#ifndef ROWFIT_BLASCORE_H
#define ROWFIT_BLASCORE_H

/* The name of OpenBLAS's kernel set in use ("SkylakeX", "Haswell", ...). */
const char *blascore_name(void);

/* When OpenBLAS fell back to its oldest x86-64 kernels ("Prescott", SSE3)
 * on a processor that has AVX, the name of the newest kernel set the
 * processor can run, for OPENBLAS_CORETYPE; otherwise NULL. OpenBLAS
 * chooses its kernels once, when it loads, so only a new process can use
 * the answer (main.c). */
const char *blascore_better(void);

/* When blascore_better names a set and the user has not set
 * OPENBLAS_CORETYPE, sets it and runs the program again (execv of
 * /proc/self/exe with the same argv); returns only when nothing needed
 * doing or the restart failed, and then the program goes on with the
 * kernels it has. The variable, once set, prevents a second restart.
 * For a program's main() (rowfit's and the benches'), first thing, before
 * any thread of the program's own. */
void blascore_restart(char **argv);

#endif
