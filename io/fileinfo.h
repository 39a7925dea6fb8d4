/*
 * fileinfo.h: facts about an input file for the Job sheet: its size and
 * SHA-256 (FIPS 180-4, computed by nettle), so a result can be traced to
 * the exact bytes it came from. Not a reader: it never interprets content.
 */
#ifndef ROWFIT_FILEINFO_H
#define ROWFIT_FILEINFO_H

#include <stdint.h>

#include "error.h"

typedef struct fileinfo {
    uint64_t size;
    char sha256[65];   /* lowercase hex, NUL-terminated */
} fileinfo;

/* Reads path once, streaming. name is how messages name it. RF_ESYSTEM
 * when it cannot be read. */
rf_status fileinfo_get(const char *path, const char *name, fileinfo *info,
                       rf_error *err);

#endif
