/* Unit tests for core/sha256: FIPS 180-4 digests, chunked updates, hex helpers, HMAC-SHA256. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "../../core/sha256.h"
#include "faults.h"

/* Digests of the SHA-256 example messages of FIPS 180-2/180-4 (appendix numbering from memory),
 * as listed in testdata CHECKS.md section 5 (taken from CPython's test_hashlib.py and verified
 * there with coreutils sha256sum). */
#define MSG448 "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"
#define MSG896                                                                                     \
    "abcdefghbcdefghicdefghijdefghijkefghijklfghijklmghijklmnhijklmnoijklmnopjklmnopqklmnopqrlmnop" \
    "qrsmnopqrstnopqrstu"

static const struct {
    const char *msg;
    const char *hex;
} fips_vectors[] = {
    {"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"},
    {"abc", "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"},
    {MSG448, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1"},
    {MSG896, "cf5b16a778af8380036ce59e7b0492370b249b11e8f07a51afac45037afee9d1"},
};
/* One million 'a' (FIPS 180-2 appendix, CHECKS.md section 5). */
static const char million_a_hex[] =
    "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0";

static void digest_hex(const void *data, size_t len, char hex[KILN_SHA256_HEX])
{
    uint8_t d[KILN_SHA256_LEN];
    struct kiln_err err = {0};
    assert_int_equal(kiln_sha256_buf(data, len, d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
}

static void test_fips_examples(void **state)
{
    (void)state;
    char hex[KILN_SHA256_HEX];
    for (size_t i = 0; i < sizeof fips_vectors / sizeof fips_vectors[0]; i++) {
        digest_hex(fips_vectors[i].msg, strlen(fips_vectors[i].msg), hex);
        assert_string_equal(hex, fips_vectors[i].hex); /* FIPS 180-4 example, CHECKS.md s5 */
    }
}

static void test_million_a(void **state)
{
    (void)state;
    char *buf = malloc(1000000);
    assert_non_null(buf);
    memset(buf, 'a', 1000000);
    char hex[KILN_SHA256_HEX];
    digest_hex(buf, 1000000, hex);
    assert_string_equal(hex, million_a_hex); /* FIPS 180-2 one million 'a', CHECKS.md s5 */

    /* The same message fed as 1000 updates of 1000 bytes, through one reused context. */
    struct kiln_sha256 ctx;
    struct kiln_err err = {0};
    assert_int_equal(kiln_sha256_init(&ctx, &err), KILN_OK);
    for (int i = 0; i < 1000; i++)
        kiln_sha256_update(&ctx, buf, 1000);
    uint8_t d[KILN_SHA256_LEN];
    assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
    assert_string_equal(hex, million_a_hex); /* FIPS 180-2, CHECKS.md s5 */
    kiln_sha256_free(&ctx);
    free(buf);
}

/* Splitting the input at 55, 56, 63, 64 and 65 bytes puts the block boundary and the padding
 * (one 0x80 byte and a 64-bit length, FIPS 180-4 section 5.1.1) at every awkward place; the
 * digests must still be the published ones (CHECKS.md s5 suggests exactly these cuts). */
static void test_chunked_updates(void **state)
{
    (void)state;
    static const size_t cuts[] = {0, 1, 55, 56, 63, 64, 65};
    const char *msgs[] = {MSG448, MSG896};
    const char *want[] = {fips_vectors[2].hex, fips_vectors[3].hex};
    struct kiln_err err = {0};
    struct kiln_sha256 ctx;
    assert_int_equal(kiln_sha256_init(&ctx, &err), KILN_OK);
    for (int m = 0; m < 2; m++) {
        size_t len = strlen(msgs[m]);
        for (size_t c = 0; c < sizeof cuts / sizeof cuts[0]; c++) {
            size_t cut = cuts[c] < len ? cuts[c] : len;
            uint8_t d[KILN_SHA256_LEN];
            char hex[KILN_SHA256_HEX];
            kiln_sha256_update(&ctx, msgs[m], cut);
            kiln_sha256_update(&ctx, msgs[m] + cut, len - cut);
            assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_OK); /* also resets the context for the next round */
            kiln_sha256_hex(d, hex);
            assert_string_equal(hex, want[m]); /* FIPS 180-4 example, CHECKS.md s5 */
        }
    }
    /* One million 'a' cut into pieces of 55, 56, 63, 64 and 65 bytes in turn. */
    static const size_t pieces[] = {55, 56, 63, 64, 65};
    char block[65];
    memset(block, 'a', sizeof block);
    size_t done = 0, k = 0;
    while (done < 1000000) {
        size_t n = pieces[k++ % 5];
        if (n > 1000000 - done)
            n = 1000000 - done;
        kiln_sha256_update(&ctx, block, n);
        done += n;
    }
    uint8_t d[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
    assert_string_equal(hex, million_a_hex); /* FIPS 180-2, CHECKS.md s5 */
    kiln_sha256_free(&ctx);
}

static void test_hex_round_trip(void **state)
{
    (void)state;
    uint8_t d[KILN_SHA256_LEN], back[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    for (int i = 0; i < KILN_SHA256_LEN; i++)
        d[i] = (uint8_t)(i * 37 + 11);
    kiln_sha256_hex(d, hex);
    assert_int_equal(strlen(hex), 64);
    /* Byte 0 is 11 = 0x0b and byte 31 is 31*37+11 = 1158 mod 256 = 0x86 (hand arithmetic);
     * lower-case hex is the coreutils sha256sum convention (common practice). */
    assert_memory_equal(hex, "0b", 2);
    assert_memory_equal(hex + 62, "86", 2);
    assert_int_equal(kiln_sha256_parse(hex, back), 0);
    assert_memory_equal(back, d, KILN_SHA256_LEN);

    /* Upper case is accepted and means the same digest. */
    const char *abc_upper = "BA7816BF8F01CFEA414140DE5DAE2223B00361A396177A9CB410FF61F20015AD";
    uint8_t abc[KILN_SHA256_LEN];
    struct kiln_err err = {0};
    assert_int_equal(kiln_sha256_buf("abc", 3, abc, &err), KILN_OK);
    assert_int_equal(kiln_sha256_parse(abc_upper, back), 0);
    assert_memory_equal(back, abc, KILN_SHA256_LEN); /* FIPS 180-4 "abc", CHECKS.md s5 */
}

static void test_hex_rejects(void **state)
{
    (void)state;
    uint8_t d[KILN_SHA256_LEN];
    const char *good = fips_vectors[1].hex;
    char buf[80];
    /* 63 and 65 digits */
    assert_int_equal(kiln_sha256_parse("ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015a", d), -1);
    snprintf(buf, sizeof buf, "%s0", good);
    assert_int_equal(kiln_sha256_parse(buf, d), -1);
    assert_int_equal(kiln_sha256_parse("", d), -1);
    /* a non-hex character at the first, a middle and the last position */
    static const char bad[] = {'g', 'G', ' ', 'x', '-', ':', '\n'};
    static const size_t where[] = {0, 31, 63};
    for (size_t b = 0; b < sizeof bad; b++)
        for (size_t w = 0; w < 3; w++) {
            strcpy(buf, good);
            buf[where[w]] = bad[b];
            assert_int_equal(kiln_sha256_parse(buf, d), -1);
        }
    /* "0x" prefix with 62 digits is still 64 characters, but not 64 hex digits */
    snprintf(buf, sizeof buf, "0x%.62s", good);
    assert_int_equal(kiln_sha256_parse(buf, d), -1);
}

/* RFC 4231 section 4 test cases; the expected values are from memory of the RFC and were
 * verified with Python's hmac module (hmac.new(key, msg, hashlib.sha256).hexdigest()). */
static void check_hmac(const void *key, size_t keylen, const char *msg, const char *want)
{
    uint8_t mac[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    struct kiln_err err = {0};
    assert_int_equal(kiln_hmac_sha256(key, keylen, msg, strlen(msg), mac, &err), KILN_OK);
    kiln_sha256_hex(mac, hex);
    assert_string_equal(hex, want);
}

static void test_hmac_rfc4231(void **state)
{
    (void)state;
    uint8_t key[131];
    /* Test case 1: key = 20 bytes of 0x0b, data = "Hi There". */
    memset(key, 0x0b, 20);
    check_hmac(key, 20, "Hi There",
               "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7");
    /* Test case 2: key = "Jefe", data = "what do ya want for nothing?". */
    check_hmac("Jefe", 4, "what do ya want for nothing?",
               "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
    /* Test case 6: key = 131 bytes of 0xaa (longer than the 64-byte block, so it is hashed
     * first), data = "Test Using Larger Than Block-Size Key - Hash Key First". */
    memset(key, 0xaa, 131);
    check_hmac(key, 131, "Test Using Larger Than Block-Size Key - Hash Key First",
               "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54");
    /* Test case 7: the same long key with a long message. */
    check_hmac(key, 131,
               "This is a test using a larger than block-size key and a larger than block-size "
               "data. The key needs to be hashed before being used by the HMAC algorithm.",
               "9b09ffa71b942fcb27635fbcd5b0e944bfdc63644f0713938a7f51535c3a35e2");
}

/* One keyed context for many messages (what split does for 10^6 unit keys) gives the RFC 4231
 * values of test cases 1 and 2 and keeps giving them, after a refused message too. */
static void test_hmac_context(void **state)
{
    (void)state;
    struct kiln_err err = {0};
    struct kiln_hmac h;
    uint8_t key[20], mac[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    memset(key, 0x0b, sizeof key);
    assert_int_equal(kiln_hmac_init(&h, key, sizeof key, &err), KILN_OK);
    for (int round = 0; round < 3; round++) {
        assert_int_equal(kiln_hmac_digest(&h, "Hi There", 8, mac, &err), KILN_OK);
        kiln_sha256_hex(mac, hex);
        assert_string_equal(hex,
                            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7");
        fault_update_prefix = "Hi There";
        memset(mac, 0xee, sizeof mac);
        assert_int_equal(kiln_hmac_digest(&h, "Hi There", 8, mac, &err), KILN_EINTERNAL);
        fault_reset();
        for (int i = 0; i < KILN_SHA256_LEN; i++)
            assert_int_equal(mac[i], 0);
    }
    kiln_hmac_free(&h);
    assert_int_equal(kiln_hmac_init(&h, "Jefe", 4, &err), KILN_OK);
    for (int round = 0; round < 2; round++) {
        const char *msg = "what do ya want for nothing?";
        assert_int_equal(kiln_hmac_digest(&h, msg, strlen(msg), mac, &err), KILN_OK);
        kiln_sha256_hex(mac, hex);
        assert_string_equal(hex,
                            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
    }
    kiln_hmac_free(&h);
    assert_int_equal(fault_evp_live, 0);
    assert_int_equal(fault_md_live, 0);
}

/* Keys of exactly 64 bytes are used as is and 65 bytes are hashed (RFC 2104 section 2); both
 * boundary values computed with Python's hmac module: hmac.new(b'\x01'*64, b'abc', sha256). */
static void test_hmac_key_boundary(void **state)
{
    (void)state;
    uint8_t key[65];
    memset(key, 0x01, sizeof key);
    check_hmac(key, 64, "abc", "0c462fe9789424c45ebeb37b90d6e879e8e0580849c91a84198b267a90c77250");
    check_hmac(key, 65, "abc", "fb1e9b9f783337ca807b11cd396d1c31eb5267d95d2d2bb0f1d83ffafbbf64e9");
}

/* A refusal by libcrypto is an error of the digest, never a digest of whatever was fed: an
 * update refused in the middle of a stream, or a refused final step, makes kiln_sha256_final
 * fail (and zero its output), and the context works again for the next message. */
static void test_libcrypto_refusals(void **state)
{
    (void)state;
    struct kiln_err err = {0};
    struct kiln_sha256 ctx;
    uint8_t d[KILN_SHA256_LEN];
    char hex[KILN_SHA256_HEX];
    assert_int_equal(kiln_sha256_init(&ctx, &err), KILN_OK);
    fault_update_prefix = "cdef";
    kiln_sha256_update(&ctx, "ab", 2);
    kiln_sha256_update(&ctx, "cdef", 4); /* refused */
    kiln_sha256_update(&ctx, "gh", 2);
    fault_reset();
    memset(d, 0xee, sizeof d);
    assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_EINTERNAL);
    assert_non_null(strstr(err.msg, "SHA-256"));
    for (int i = 0; i < KILN_SHA256_LEN; i++)
        assert_int_equal(d[i], 0);
    /* The context was re-armed: "abc" again gives the FIPS 180-4 digest (CHECKS.md s5). */
    kiln_sha256_update(&ctx, "abc", 3);
    assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_OK);
    kiln_sha256_hex(d, hex);
    assert_string_equal(hex, fips_vectors[1].hex);
    /* A refused final step. */
    kiln_sha256_update(&ctx, "abc", 3);
    fault_final_count = 1;
    assert_int_equal(kiln_sha256_final(&ctx, d, &err), KILN_EINTERNAL);
    fault_reset();
    kiln_sha256_free(&ctx);
    /* The one-shot helpers pass the refusal on. */
    fault_update_prefix = "Hi There";
    assert_int_equal(kiln_sha256_buf("Hi There", 8, d, &err), KILN_EINTERNAL);
    uint8_t key[20];
    memset(key, 0x0b, sizeof key);
    assert_int_equal(kiln_hmac_sha256(key, sizeof key, "Hi There", 8, d, &err), KILN_EINTERNAL);
    fault_reset();
    assert_int_equal(fault_evp_live, 0);
    assert_int_equal(fault_md_live, 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_fips_examples),     cmocka_unit_test(test_million_a),
        cmocka_unit_test(test_chunked_updates),   cmocka_unit_test(test_hex_round_trip),
        cmocka_unit_test(test_hex_rejects),       cmocka_unit_test(test_hmac_rfc4231),
        cmocka_unit_test(test_hmac_key_boundary), cmocka_unit_test(test_libcrypto_refusals),
        cmocka_unit_test(test_hmac_context),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
