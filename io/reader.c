/*
 * reader.c: format detection and dispatch (see reader.h).
 */
#include "reader.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#include <minizip/unzip.h>

#include "csv.h"
#include "ods.h"
#include "xls.h"
#include "xlsx.h"

/* The ODS package's mimetype member holds this (OpenDocument 1.2 part 3,
 * sec. 3.3). */
#define ODS_MIMETYPE "application/vnd.oasis.opendocument.spreadsheet"

const char *reader_format_name(reader_format f)
{
    switch (f) {
    case FORMAT_CSV:  return "CSV text";
    case FORMAT_XLSX: return "an .xlsx workbook";
    case FORMAT_ODS:  return "an .ods spreadsheet";
    case FORMAT_XLS:  return "an .xls workbook";
    }
    return "file";
}

/* Which kind of zip: 1 xlsx, 2 ods, 0 neither, -1 unreadable zip. */
static int zip_kind(const char *path)
{
    unzFile z = unzOpen64(path);
    if (z == NULL)
        return -1;
    int kind = 0;
    if (unzLocateFile(z, "xl/workbook.xml", 1) == UNZ_OK) {
        kind = 1;
    } else if (unzLocateFile(z, "mimetype", 1) == UNZ_OK
               && unzOpenCurrentFile(z) == UNZ_OK) {
        char buf[64] = "";
        int k = unzReadCurrentFile(z, buf, sizeof buf - 1);
        unzCloseCurrentFile(z);
        if (k > 0) {
            buf[k] = '\0';
            if (strcmp(buf, ODS_MIMETYPE) == 0)
                kind = 2;
        }
    }
    unzClose(z);
    return kind;
}

/* The extension a format's files usually have, for the warning. */
static int name_fits(const char *name, reader_format f)
{
    const char *dot = strrchr(name, '.');
    const char *slash = strrchr(name, '/');
    if (dot == NULL || (slash && dot < slash))
        return 1;   /* no extension: nothing to contradict */
    dot++;
    switch (f) {
    case FORMAT_CSV:
        return strcasecmp(dot, "xlsx") != 0 && strcasecmp(dot, "xls") != 0
               && strcasecmp(dot, "ods") != 0 && strcasecmp(dot, "xlsm") != 0;
    case FORMAT_XLSX:
        return strcasecmp(dot, "xlsx") == 0 || strcasecmp(dot, "xlsm") == 0;
    case FORMAT_ODS:
        return strcasecmp(dot, "ods") == 0;
    case FORMAT_XLS:   /* an encrypted .xlsx is a compound file too */
        return strcasecmp(dot, "xls") == 0 || strcasecmp(dot, "xlsx") == 0
               || strcasecmp(dot, "xlsm") == 0;
    }
    return 1;
}

rf_status reader_detect(const char *path, const char *name,
                        reader_format *fmt, rf_warnings *warn,
                        rf_error *err)
{
    FILE *f = fopen(path, "rb");
    if (f == NULL && errno == ENOENT)
        return error_set(err, RF_EINPUT, name, "no such file");
    if (f == NULL)
        return error_set(err, RF_ESYSTEM, name, "cannot open: %s",
                         strerror(errno));
    unsigned char sig[8] = { 0 };
    size_t k = fread(sig, 1, sizeof sig, f);
    int bad = ferror(f);
    int e = errno;
    fclose(f);
    if (bad)
        return error_set(err, RF_ESYSTEM, name, "cannot read: %s",
                         strerror(e));

    static const unsigned char zip[4] = { 'P', 'K', 3, 4 };
    static const unsigned char zip_empty[4] = { 'P', 'K', 5, 6 };
    static const unsigned char cfbf[8] = { 0xD0, 0xCF, 0x11, 0xE0,
                                           0xA1, 0xB1, 0x1A, 0xE1 };
    if (k >= 4 && (memcmp(sig, zip, 4) == 0 || memcmp(sig, zip_empty, 4) == 0)) {
        int kind = zip_kind(path);
        if (kind < 0)
            return error_set(err, RF_EINPUT, name,
                             "a zip file that cannot be opened: it is "
                             "truncated or damaged");
        if (kind == 0)
            return error_set(err, RF_EINPUT, name,
                             "a zip file, but not an .xlsx workbook (no "
                             "xl/workbook.xml) nor an .ods spreadsheet (no "
                             "OpenDocument spreadsheet mimetype)");
        *fmt = kind == 1 ? FORMAT_XLSX : FORMAT_ODS;
    } else if (k == 8 && memcmp(sig, cfbf, 8) == 0) {
        /* .xls, or a password-protected .xlsx (also a compound file):
         * the .xls reader tells them apart and says which */
        *fmt = FORMAT_XLS;
    } else {
        *fmt = FORMAT_CSV;
    }
    if (!name_fits(name, *fmt))
        error_warn(warn, name, "the file's name says otherwise, but it is "
                   "%s; read as such", reader_format_name(*fmt));
    return RF_OK;
}

rf_status reader_read(const char *path, const char *name,
                      const reader_options *opt, table **out,
                      rf_warnings *warn, rf_error *err)
{
    *out = NULL;
    reader_format fmt;
    rf_status st = reader_detect(path, name, &fmt, warn, err);
    if (st != RF_OK)
        return st;
    if (fmt == FORMAT_CSV) {
        if (opt->sheet)
            return error_set(err, RF_EINPUT, name,
                             "is CSV text, which has no sheets; 'sheet' "
                             "applies to .xlsx, .xls and .ods files");
        csv_options co = { opt->delimiter, (int)opt->header };
        return csv_read(path, name, &co, out, warn, err);
    }
    if (opt->delimiter)
        return error_set(err, RF_EINPUT, name,
                         "is %s; 'delimiter' applies to CSV text only",
                         reader_format_name(fmt));
    switch (fmt) {
    case FORMAT_XLSX:
        return xlsx_read(path, name, opt->sheet, opt->header, out, warn, err);
    case FORMAT_ODS:
        return ods_read(path, name, opt->sheet, opt->header, out, warn, err);
    case FORMAT_XLS:
        return xls_read(path, name, opt->sheet, opt->header, out, warn, err);
    case FORMAT_CSV:
        break;
    }
    return RF_OK;
}

rf_status reader_sheets(const char *path, const char *name,
                        reader_format *fmt, grid_sheet **out, size_t *n,
                        rf_warnings *warn, rf_error *err)
{
    *out = NULL;
    *n = 0;
    rf_status st = reader_detect(path, name, fmt, warn, err);
    if (st != RF_OK)
        return st;
    switch (*fmt) {
    case FORMAT_XLSX:
        return xlsx_sheets(path, name, out, n, err);
    case FORMAT_ODS:
        return ods_sheets(path, name, out, n, err);
    case FORMAT_XLS:
        return xls_sheets(path, name, out, n, err);
    case FORMAT_CSV:
        break;
    }
    return RF_OK;
}
