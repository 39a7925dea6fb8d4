/*
 * fuzz_ods.c: libFuzzer harness for the .ods reader (io/ods.c). Bytes that
 * start like a zip ("PK\3\4") are the whole file, which exercises the
 * package checks of io/zipxml.c; any other bytes are content.xml, stored
 * (not deflated) in a package built here with minizip, so the mutations
 * reach the XML state machine. Each input is read as the first sheet, as
 * sheet "2" (a name or a number: the second pass), and listed with
 * ods_sheets. Crashes, sanitizer reports and broken invariants (an error
 * with an empty message, a table or a sheet list on error, a text cell
 * without text, a used size past the format limits) are the findings.
 * Build and run: tests/fuzz/README.md.
 */
#define _GNU_SOURCE  /* memfd_create: the file lives in memory, not on disk */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/mman.h>
#include <unistd.h>

#include <minizip/zip.h>

#include "../../io/ods.h"
#include "../../io/table.h"

#define FUZZ_NAME "fuzz_ods"
#include "fuzzutil.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);


static void read_once(const char *sheet, uint32_t header)
{
    table *t = NULL;
    rf_warnings w = {0};
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = ods_read(path, "fuzz.ods", sheet, header, &t, &w, &e);
    if (st == RF_OK) {
        check(t != NULL, "ok without a table");
        walk(t);
    } else {
        check(t == NULL, "a table on error");
        check(e.status == st && e.message[0] != '\0',
              "an error without its record");
    }
    for (size_t i = 0; i < w.n; i++)
        check(w.items[i] != NULL && w.items[i][0] != '\0', "empty warning");
    table_free(t);
    error_warnings_clear(&w);
}

static void list_once(void)
{
    grid_sheet *s = NULL;
    size_t n = 0;
    rf_error e;
    memset(&e, 0, sizeof e);
    rf_status st = ods_sheets(path, "fuzz.ods", &s, &n, &e);
    if (st == RF_OK) {
        check((n == 0) == (s == NULL), "sheet count and list disagree");
        for (size_t i = 0; i < n; i++) {
            check(s[i].name != NULL, "a sheet without a name");
            check(s[i].rows <= GRID_ROWS_MAX && s[i].cols <= GRID_COLS_MAX,
                  "a used size past the format limits");
        }
    } else {
        check(s == NULL && n == 0, "a sheet list on error");
        check(e.message[0] != '\0', "an error without its message");
    }
    grid_sheets_free(s, n);
}

/* The package: a stored content.xml holding the fuzzer's bytes. */
static void write_package(const uint8_t *data, size_t size)
{
    zipFile z = zipOpen64(path, APPEND_STATUS_CREATE);
    if (z == NULL) {
        perror("fuzz_ods: zipOpen64");
        abort();
    }
    static const char mt[] = "application/vnd.oasis.opendocument.spreadsheet";
    if (zipOpenNewFileInZip(z, "mimetype", NULL, NULL, 0, NULL, 0, NULL, 0,
                            0) != ZIP_OK
        || zipWriteInFileInZip(z, mt, sizeof mt - 1) != ZIP_OK
        || zipCloseFileInZip(z) != ZIP_OK
        || zipOpenNewFileInZip(z, "content.xml", NULL, NULL, 0, NULL, 0,
                               NULL, 0, 0) != ZIP_OK
        || (size > 0 && zipWriteInFileInZip(z, data, (unsigned)size)
                            != ZIP_OK)
        || zipCloseFileInZip(z) != ZIP_OK || zipClose(z, NULL) != ZIP_OK) {
        fprintf(stderr, "fuzz_ods: cannot write the package\n");
        abort();
    }
}

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
    fuzz_memfd();
    if (size > ((size_t)1 << 20))
        return 0;   /* content.xml of a MiB says all a small one can */
    if (ftruncate(fd, 0) != 0) {
        perror("fuzz_ods: memfd");
        abort();
    }
    if (size >= 4 && memcmp(data, "PK\3\4", 4) == 0) {
        if (pwrite(fd, data, size, 0) != (ssize_t)size) {
            perror("fuzz_ods: memfd");
            abort();
        }
    } else {
        write_package(data, size);
    }
    read_once(NULL, 0);
    read_once("2", size > 0 ? data[size - 1] % 4 : 0);
    list_once();
    return 0;
}
