/*
 * ziptest.h: writing small zip packages inside a test (minizip's zip.h and
 * zlib), including the wrong ones a reader must survive: a member whose
 * declared size lies, a member with a compression method we refuse.
 * For tests only; rowfit itself never writes zips this way.
 */
#ifndef ROWFIT_ZIPTEST_H
#define ROWFIT_ZIPTEST_H

#include <stdlib.h>
#include <string.h>

#include <minizip/zip.h>
#include <zlib.h>

static inline zipFile zt_create(const char *path)
{
    zipFile zf = zipOpen64(path, APPEND_STATUS_CREATE);
    assert_non_null(zf);
    return zf;
}

/* A member compressed (method 8) or stored (method 0) by minizip. */
static inline void zt_add(zipFile zf, const char *name, const void *data,
                          size_t len, int method)
{
    zip_fileinfo fi;
    memset(&fi, 0, sizeof fi);
    assert_int_equal(zipOpenNewFileInZip64(zf, name, &fi, NULL, 0, NULL, 0,
                                           NULL, method,
                                           method ? Z_BEST_SPEED : 0, 0),
                     ZIP_OK);
    assert_int_equal(zipWriteInFileInZip(zf, data, (unsigned)len), ZIP_OK);
    assert_int_equal(zipCloseFileInZip(zf), ZIP_OK);
}

static inline void zt_add_text(zipFile zf, const char *name, const char *s)
{
    zt_add(zf, name, s, strlen(s), Z_DEFLATED);
}

/* A member written raw: data is already compressed with method, and the
 * central directory declares `declared` bytes uncompressed, true or not. */
static inline void zt_add_raw(zipFile zf, const char *name, const void *data,
                              size_t len, int method, uint64_t declared,
                              unsigned long crc)
{
    zip_fileinfo fi;
    memset(&fi, 0, sizeof fi);
    assert_int_equal(zipOpenNewFileInZip2_64(zf, name, &fi, NULL, 0, NULL, 0,
                                             NULL, method, 0, 1, 0),
                     ZIP_OK);
    assert_int_equal(zipWriteInFileInZip(zf, data, (unsigned)len), ZIP_OK);
    assert_int_equal(zipCloseFileInZipRaw64(zf, declared, crc), ZIP_OK);
}

/* Raw deflate (no zlib header, as zip stores it) of data; caller frees. */
static inline unsigned char *zt_deflate(const void *data, size_t len,
                                        size_t *out_len)
{
    z_stream s;
    memset(&s, 0, sizeof s);
    assert_int_equal(deflateInit2(&s, 9, Z_DEFLATED, -15, 9,
                                  Z_DEFAULT_STRATEGY), Z_OK);
    size_t cap = deflateBound(&s, (uLong)len);
    unsigned char *out = malloc(cap);
    assert_non_null(out);
    s.next_in = (Bytef *)(uintptr_t)data;
    s.avail_in = (uInt)len;
    s.next_out = out;
    s.avail_out = (uInt)cap;
    assert_int_equal(deflate(&s, Z_FINISH), Z_STREAM_END);
    *out_len = s.total_out;
    deflateEnd(&s);
    return out;
}

static inline void zt_close(zipFile zf)
{
    assert_int_equal(zipClose(zf, NULL), ZIP_OK);
}

#endif
