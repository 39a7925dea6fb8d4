/*
 * csv.h: the CSV reader. Streams a delimited text file (RFC 4180 quoting,
 * CRLF or LF, UTF-8 with or without a byte-order mark) into a table.
 * Not a spreadsheet reader and not a type guesser for the engine: it only
 * decides, cell by cell, number / ISO date / TRUE-FALSE / text / blank.
 */
#ifndef ROWFIT_CSV_H
#define ROWFIT_CSV_H

#include "error.h"
#include "table.h"

typedef struct csv_options {
    char delimiter;  /* ',' ';' '\t', or 0 to detect among those three */
    int header_row;  /* 1-based line of the header, 0 = first non-blank line */
} csv_options;

/* Reads path into a new table (*out, caller frees with table_free).
 * name is how messages name the file (the path as the job wrote it).
 * Numbers are parsed independent of the locale. Errors (RF_EINPUT):
 * empty file, binary file, invalid UTF-8, a quote never closed, duplicate
 * headers, a row with more fields than the header; RF_ESYSTEM when the
 * file cannot be opened or read. On error *out is NULL. */
rf_status csv_read(const char *path, const char *name, const csv_options *opt,
                   table **out, rf_warnings *warn, rf_error *err);

/* Parses s (len bytes, not NUL-terminated) as a number the way a CSV cell
 * is read: optional sign, digits, '.', exponent, surrounding spaces;
 * no thousands separators, no locale. Returns 1 and sets *v on success. */
int csv_parse_number(const char *s, size_t len, double *v);

#endif
