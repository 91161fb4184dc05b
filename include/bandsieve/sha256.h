/* SHA-256 (FIPS PUB 180-4, Secure Hash Standard, section 6.2), used for content identity: the
 * hash of what determines a material's answer (model.h, tb_model_content_hash) and of a whole set.
 * Written here from the standard rather than taken from a crypto library, because only this one
 * function is needed and the program then builds against any site's libraries; the test checks
 * it against the standard's example vectors. Not for secrets (no constant-time guarantees). */
#ifndef BANDSIEVE_SHA256_H
#define BANDSIEVE_SHA256_H

#include <stddef.h>
#include <stdint.h>

/* Length of a digest in bytes, and of its lower-case hexadecimal text with the NUL. */
#define BS_SHA256_BYTES 32
#define BS_SHA256_HEX   65

/* Running state of one hash; the caller owns it (plain struct, no free needed). */
typedef struct bs_sha256 {
    uint32_t h[8];
    uint64_t nbytes; /* message length so far */
    unsigned char block[64];
    size_t used; /* bytes waiting in block */
} bs_sha256;

void bs_sha256_init(bs_sha256 *s);
/* Adds len bytes of data (borrowed). */
void bs_sha256_update(bs_sha256 *s, const void *data, size_t len);
/* Pads, finishes and writes the 32-byte digest; s must be initialised again before reuse. */
void bs_sha256_final(bs_sha256 *s, unsigned char out[BS_SHA256_BYTES]);
/* The digest as 64 lower-case hexadecimal characters and a NUL. */
void bs_sha256_hex(const unsigned char digest[BS_SHA256_BYTES], char out[BS_SHA256_HEX]);

#endif
