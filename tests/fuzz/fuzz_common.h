/* Shared by the fuzz harnesses: libFuzzer hands over bytes, the readers take a path, so each input
 * is written to one temporary file per process first (the readers are what is under test). */
#ifndef BANDSIEVE_FUZZ_COMMON_H
#define BANDSIEVE_FUZZ_COMMON_H

#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

/* Writes data to the harness's file (in $TMPDIR, named after the process) and returns its path. */
static const char *fuzz_file(const char *suffix, const uint8_t *data, size_t size)
{
    static char path[512];
    if (!path[0]) {
        const char *tmp = getenv("TMPDIR");
        snprintf(path, sizeof path, "%s/bandsieve-fuzz-%d%s", tmp && *tmp ? tmp : "/tmp", (int)getpid(),
                 suffix);
    }
    FILE *fp = fopen(path, "wb");
    if (!fp) abort();
    if (size && fwrite(data, 1, size, fp) != size) abort();
    fclose(fp);
    return path;
}

#endif
