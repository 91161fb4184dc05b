/* SHA-256 against the example vectors of the Secure Hash Standard (FIPS PUB 180-2, Appendix B,
 * the same algorithm as FIPS 180-4; values from memory of the NIST examples, and cross-checked
 * with Python's hashlib when the test was written). Exact: a hash matches to the bit or not. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdlib.h>
#include <string.h>

#include "bandsieve/sha256.h"

static void hex_of(const void *data, size_t len, size_t chunk, char out[BS_SHA256_HEX])
{
    bs_sha256 s;
    bs_sha256_init(&s);
    const unsigned char *p = data;
    for (size_t i = 0; i < len; i += chunk)
        bs_sha256_update(&s, p + i, len - i < chunk ? len - i : chunk);
    unsigned char d[BS_SHA256_BYTES];
    bs_sha256_final(&s, d);
    bs_sha256_hex(d, out);
}

static void test_fips_vectors(void **state)
{
    (void)state;
    char hex[BS_SHA256_HEX];
    /* B.1: one block. */
    hex_of("abc", 3, 3, hex);
    assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
    /* B.2: 448 bits, so the padding needs a second block. */
    const char *two = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
    hex_of(two, strlen(two), strlen(two), hex);
    assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
    /* The empty message (NIST example, common practice). */
    hex_of("", 0, 1, hex);
    assert_string_equal(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

/* B.3: one million 'a', fed in pieces of several sizes: the result must not depend on how the
 * message is cut (a property of the streaming interface). */
static void test_million_a_any_chunking(void **state)
{
    (void)state;
    size_t n = 1000000;
    char *a = malloc(n);
    assert_non_null(a);
    memset(a, 'a', n);
    const size_t chunks[] = {1000000, 64, 63, 65, 1, 4093};
    for (size_t i = 0; i < sizeof chunks / sizeof *chunks; i++) {
        char hex[BS_SHA256_HEX];
        hex_of(a, n, chunks[i], hex);
        assert_string_equal(hex, "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
    }
    free(a);
}

/* Messages of 55, 56 and 64 bytes sit at the padding boundaries; each must differ from its
 * neighbour (a padding bug tends to make two lengths collide). */
static void test_padding_boundaries_differ(void **state)
{
    (void)state;
    char buf[130];
    memset(buf, 'x', sizeof buf);
    char prev[BS_SHA256_HEX] = "", cur[BS_SHA256_HEX];
    for (size_t len = 54; len <= 129; len++) {
        hex_of(buf, len, 7, cur);
        assert_string_not_equal(cur, prev);
        memcpy(prev, cur, sizeof cur);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fips_vectors),
        cmocka_unit_test(test_million_a_any_chunking),
        cmocka_unit_test(test_padding_boundaries_differ),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
