/*
 * error.c: status codes, error records and the warning list (see error.h).
 */
#include "error.h"

#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

rf_status error_set(rf_error *e, rf_status s, const char *where,
                    const char *fmt, ...)
{
    if (e == NULL)
        return s;
    e->status = s;
    snprintf(e->where, sizeof e->where, "%s", where ? where : "");
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(e->message, sizeof e->message, fmt, ap);
    va_end(ap);
    return s;
}

rf_status error_nomem(rf_error *e, const char *where)
{
    return error_set(e, RF_ENOMEM, where, "out of memory");
}

int error_exit_code(rf_status s)
{
    switch (s) {
    case RF_OK:      return 0;
    case RF_EINPUT:  return 1;
    case RF_EUSAGE:  return 2;
    case RF_ESYSTEM: return 3;
    case RF_ENOMEM:  return 3;
    }
    return 3;
}

const char *error_status_str(rf_status s)
{
    switch (s) {
    case RF_OK:      return "ok";
    case RF_EINPUT:  return "bad input";
    case RF_EUSAGE:  return "bad command line";
    case RF_ESYSTEM: return "system failure";
    case RF_ENOMEM:  return "out of memory";
    }
    return "unknown status";
}

rf_status error_warn(rf_warnings *w, const char *where, const char *fmt, ...)
{
    if (w->n >= ERROR_WARNINGS_MAX) {
        w->dropped++;
        return RF_OK;
    }
    char msg[ERROR_WHERE_MAX + ERROR_MESSAGE_MAX];
    int k = 0;
    if (where && *where)
        k = snprintf(msg, sizeof msg, "%s: warning: ", where);
    else
        k = snprintf(msg, sizeof msg, "warning: ");
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(msg + k, sizeof msg - (size_t)k, fmt, ap);
    va_end(ap);
    if (w->n == w->cap) {
        size_t cap = w->cap ? 2 * w->cap : 16;
        char **items = realloc(w->items, cap * sizeof *items);
        if (items == NULL) {
            w->dropped++;   /* counted, like warnings past the cap */
            return RF_OK;
        }
        w->items = items;
        w->cap = cap;
    }
    char *copy = strdup(msg);
    if (copy == NULL) {
        w->dropped++;
        return RF_OK;
    }
    w->items[w->n++] = copy;
    return RF_OK;
}

void error_warnings_clear(rf_warnings *w)
{
    for (size_t i = 0; i < w->n; i++)
        free(w->items[i]);
    free(w->items);
    w->items = NULL;
    w->n = w->cap = w->dropped = 0;
}

void error_warnings_move(rf_warnings *to, rf_warnings *from)
{
    if (to == NULL) {   /* the caller keeps no warnings */
        error_warnings_clear(from);
        return;
    }
    for (size_t i = 0; i < from->n; i++) {
        if (to->n >= ERROR_WARNINGS_MAX) {
            to->dropped++;
            free(from->items[i]);
            continue;
        }
        if (to->n == to->cap) {
            size_t cap = to->cap ? 2 * to->cap : 16;
            char **items = realloc(to->items, cap * sizeof *items);
            if (items == NULL) {
                to->dropped++;
                free(from->items[i]);
                continue;
            }
            to->items = items;
            to->cap = cap;
        }
        to->items[to->n++] = from->items[i];
    }
    to->dropped += from->dropped;
    free(from->items);
    from->items = NULL;
    from->n = from->cap = from->dropped = 0;
}
