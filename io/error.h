/*
 * error.h: the program's one status type, the error record that carries a
 * place and a message up to main(), and the list of warnings a run collects.
 * Not a logger: nothing here prints; main() decides what reaches stderr.
 */
#ifndef ROWFIT_ERROR_H
#define ROWFIT_ERROR_H

#include <stddef.h>

typedef enum rf_status {
    RF_OK = 0,
    RF_EINPUT,   /* the job file or its data is wrong (exit 1) */
    RF_EUSAGE,   /* the command line is wrong (exit 2) */
    RF_ESYSTEM,  /* the system failed: unreadable file, disk full (exit 3) */
    RF_ENOMEM    /* an allocation failed (exit 3) */
} rf_status;

#define ERROR_WHERE_MAX 512
#define ERROR_MESSAGE_MAX 1024

/* The first error of a call chain. where is the most precise place known:
 * "spring.job:7", "sales.csv:1042", "sales.xlsx[Closed sales]!D17", or "" */
typedef struct rf_error {
    rf_status status;
    char where[ERROR_WHERE_MAX];
    char message[ERROR_MESSAGE_MAX];
} rf_error;

/* Fills e (when e is not NULL) and returns s, so callers can write
 * `return error_set(err, RF_EINPUT, where, "...", ...);`. where may be NULL. */
rf_status error_set(rf_error *e, rf_status s, const char *where,
                    const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));

/* Shorthand for an allocation failure at where. */
rf_status error_nomem(rf_error *e, const char *where);

/* The process exit status for s: 0, 1, 2 or 3 (contract section 1). */
int error_exit_code(rf_status s);

/* A short name for s ("ok", "bad input", ...), for tests and logs. */
const char *error_status_str(rf_status s);

/* Warnings: each item is "WHERE: warning: WHAT" (or "warning: WHAT" when
 * where is empty), the way main() prints it after "rowfit: ".
 * At most ERROR_WARNINGS_MAX are kept; after that only `dropped` counts up,
 * so a file with a million odd rows cannot flood memory or the Job sheet. */
#define ERROR_WARNINGS_MAX 200

typedef struct rf_warnings {
    char **items;
    size_t n, cap;
    size_t dropped;
} rf_warnings;

/* Appends a warning. Always RF_OK: a warning that cannot be stored (no
 * memory) is counted in `dropped`, like those past the cap, since losing a
 * warning must not turn a good run into a failed one. */
rf_status error_warn(rf_warnings *w, const char *where, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));

/* Appends every warning of from to to (respecting to's cap; to may be
 * NULL, which drops them) and leaves from empty. */
void error_warnings_move(rf_warnings *to, rf_warnings *from);

/* Frees the items; w itself is the caller's and is left empty. */
void error_warnings_clear(rf_warnings *w);

#endif
