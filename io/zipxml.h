/*
 * zipxml.h: streaming the XML parts of a zip package (.xlsx, .ods) through
 * expat, with the safety limits a file from anywhere needs: declared sizes
 * checked before inflating (zip bombs), caps on inflated bytes and on the
 * inflate ratio, DOCTYPE refused, expat's amplification protection on.
 * Nothing is held whole in memory: a part is inflated and parsed in chunks.
 * Knows zips and XML, not what the parts mean.
 */
#ifndef ROWFIT_ZIPXML_H
#define ROWFIT_ZIPXML_H

#include <stddef.h>
#include <stdint.h>

#include <expat.h>

#include "error.h"

typedef struct zipxml zipxml;

/* Opens the zip at path (name: how messages name it). RF_EINPUT when it is
 * not a zip, is truncated or corrupt, or declares sizes past the limits;
 * RF_ESYSTEM when it cannot be read. */
rf_status zipxml_open(const char *path, const char *name, zipxml **out,
                      rf_error *err);
void zipxml_close(zipxml *z);  /* accepts NULL */

/* 1 when the package has a member of that exact name. */
int zipxml_has(const zipxml *z, const char *member);

/* Handlers for one part. The parser is namespace-aware with separator
 * ZIPXML_NS_SEP, so names arrive as "URI|local" ("...spreadsheetml/2006/
 * main|c"); ud is passed to every handler. */
#define ZIPXML_NS_SEP '|'
typedef struct zipxml_handlers {
    XML_StartElementHandler start;
    XML_EndElementHandler end;
    XML_CharacterDataHandler text;   /* may be NULL */
} zipxml_handlers;

/* Streams member through expat. A handler that finds the content wrong
 * calls zipxml_fail (from inside the handler) and parsing stops with that
 * error. Errors: RF_EINPUT "FILE: part MEMBER: ..." for a missing part,
 * malformed XML (with its line), a DOCTYPE, a limit; RF_ESYSTEM for I/O. */
rf_status zipxml_parse(zipxml *z, const char *member,
                       const zipxml_handlers *h, void *ud, rf_error *err);

/* From a handler: stop parsing the current part with this error (status
 * RF_EINPUT unless st says otherwise; where may be NULL for the part). */
void zipxml_fail(zipxml *z, rf_status st, const char *where,
                 const char *fmt, ...) __attribute__((format(printf, 4, 5)));

/* From a handler: stop parsing the current part here, successfully (a
 * reader that found what it wanted, e.g. a sheet's <dimension>). The rest
 * of the part is neither inflated nor checked. */
void zipxml_stop(zipxml *z);

/* The current part's name and the line expat is on, for messages. */
const char *zipxml_member(const zipxml *z);
unsigned long zipxml_line(const zipxml *z);

#endif
