/*
 * fileinfo.c: size and SHA-256 of a file (see fileinfo.h).
 */
#include "fileinfo.h"

#include <errno.h>
#include <stdio.h>
#include <string.h>

#include <nettle/sha2.h>

rf_status fileinfo_get(const char *path, const char *name, fileinfo *info,
                       rf_error *err)
{
    FILE *fp = fopen(path, "rb");
    if (fp == NULL)
        return error_set(err, RF_ESYSTEM, name, "cannot open: %s",
                         strerror(errno));
    struct sha256_ctx ctx;
    sha256_init(&ctx);
    unsigned char buf[65536];
    size_t k;
    info->size = 0;
    while ((k = fread(buf, 1, sizeof buf, fp)) > 0) {
        sha256_update(&ctx, k, buf);
        info->size += k;
    }
    int bad = ferror(fp);
    int e = errno;
    fclose(fp);
    if (bad)
        return error_set(err, RF_ESYSTEM, name, "cannot read: %s",
                         strerror(e));
    uint8_t digest[SHA256_DIGEST_SIZE];
    sha256_digest(&ctx, sizeof digest, digest);
    for (size_t i = 0; i < sizeof digest; i++)
        snprintf(info->sha256 + 2 * i, 3, "%02x", digest[i]);
    return RF_OK;
}
