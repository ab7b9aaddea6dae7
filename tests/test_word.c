/* tests/test_word.c - command words and check codes (docs/spec/subbit.md section 2).
 *
 * Sources of the expected values, named at each table:
 *  - CRC check values: the published catalogue of parametrised CRC algorithms (reveng):
 *    CRC-8/SMBUS check 0xF4, CRC-16/IBM-3740 check 0x29B1 for ASCII "123456789".
 *  - whole words with CRCs: python3-crcmod (Debian), crcmod.predefined 'crc-8' and
 *    'crc-ccitt-false', over the word's octets (W - C = 32 bits), computed once by hand
 *    in a Python shell and written here.
 *  - parity and field packing: worked out by hand (see the comment at parity_rows).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/word.h"

static void test_crc_catalogue_check_values(void **st)
{
    (void)st;
    const uint8_t *msg = (const uint8_t *)"123456789";
    /* reveng catalogue: CRC-8/SMBUS check=0xf4; CRC-16/IBM-3740 check=0x29b1 */
    assert_int_equal(ulk_crc8_bytes(msg, 9), 0xF4);
    assert_int_equal(ulk_crc16_bytes(0xFFFF, msg, 9), 0x29B1);
    /* and the bit-wise form of the contract on the same octets */
    uint8_t bits[72];
    for (int i = 0; i < 72; i++) bits[i] = (uint8_t)((msg[i / 8] >> (7 - i % 8)) & 1);
    assert_int_equal(ulk_check_compute(ULK_CHECK_CRC8, bits, 72), 0xF4);
    assert_int_equal(ulk_check_compute(ULK_CHECK_CRC16, bits, 72), 0x29B1);
}

/* Bit-wise (the contract's register loop) and byte-wise (catalogue) forms agree on whole
 * octets, for many pseudo-random messages of 0..16 octets. */
static void test_crc_bitwise_equals_bytewise(void **st)
{
    (void)st;
    uint32_t s = 12345u;
    for (int trial = 0; trial < 2000; trial++) {
        uint8_t msg[16], bits[128];
        int n = trial % 17;
        for (int i = 0; i < n; i++) {
            s = s * 1664525u + 1013904223u;
            msg[i] = (uint8_t)(s >> 24);
        }
        for (int i = 0; i < n * 8; i++) bits[i] = (uint8_t)((msg[i / 8] >> (7 - i % 8)) & 1);
        assert_int_equal(ulk_check_compute(ULK_CHECK_CRC8, bits, n * 8), ulk_crc8_bytes(msg, (size_t)n));
        assert_int_equal(ulk_check_compute(ULK_CHECK_CRC16, bits, n * 8), ulk_crc16_bytes(0xFFFF, msg, (size_t)n));
    }
}

static void test_parity_counts(void **st)
{
    (void)st;
    uint8_t bits[40];
    for (int ones = 0; ones <= 40; ones++) {
        memset(bits, 0, sizeof bits);
        for (int i = 0; i < ones; i++) bits[(i * 7) % 40] = 1;
        assert_int_equal(ulk_check_compute(ULK_CHECK_PARITY_EVEN, bits, 40), (uint32_t)(ones & 1));
        assert_int_equal(ulk_check_compute(ULK_CHECK_PARITY_ODD, bits, 40), (uint32_t)((ones & 1) ^ 1));
    }
    assert_int_equal(ulk_check_compute(ULK_CHECK_NONE, bits, 40), 0);
}

static void test_put_get_hex(void **st)
{
    (void)st;
    ulk_word w;
    memset(&w, 0, sizeof w);
    w.n_bits = 66;
    ulk_word_put(&w, 0, 2, 0x3);
    ulk_word_put(&w, 2, 64, 0x0123456789ABCDEFull);
    assert_int_equal(ulk_word_get(&w, 0, 2), 3);
    assert_true(ulk_word_get(&w, 2, 64) == 0x0123456789ABCDEFull);
    assert_int_equal(ulk_word_get(&w, 5, 0), 0);
    char hex[40];
    /* 66 bits -> 17 digits, value 11 followed by the 64-bit pattern */
    ulk_word_hex(&w, hex);
    assert_string_equal(hex, "30123456789ABCDEF");
    ulk_word back;
    assert_int_equal(ulk_word_from_hex(hex, 66, &back), 0);
    assert_int_equal(back.n_bits, 66);
    assert_memory_equal(back.bits, w.bits, 66);
    assert_int_equal(ulk_word_from_hex("30123456789abcdef", 66, &back), 0); /* lower case */
    /* a value wider than W (pad bits set), a wrong length, a non-hex digit */
    assert_int_equal(ulk_word_from_hex("40123456789ABCDEF", 66, &back), ULK_EPARSE);
    assert_int_equal(ulk_word_from_hex("0123456789ABCDEF", 66, &back), ULK_EPARSE);
    assert_int_equal(ulk_word_from_hex("3012345678GABCDEF", 66, &back), ULK_EPARSE);
    assert_int_equal(ulk_word_from_hex("1", 0, &back), ULK_EPARSE);
    char bin[130];
    ulk_word_bin(&w, bin);
    assert_int_equal(strlen(bin), 66);
    assert_memory_equal(bin, "110000000100100011", 18);
}

static ulk_link test_link(int av, uint32_t v, int as, int ob, int d, ulk_check_kind ck)
{
    ulk_link l;
    memset(&l, 0, sizeof l);
    l.vehicle_bits = av;
    l.vehicle_value = v;
    l.system_bits = as;
    l.opcode_bits = ob;
    l.argument_bits = d;
    l.check = ck;
    l.check_bits = ulk_check_bits(ck);
    l.word_bits = av + as + ob + d + l.check_bits;
    return l;
}

/* Worked example (parity-even), by hand:
 *   vehicle 4 bits = 0xA -> 1010; system 3 bits = 5 -> 101; opcode 5 bits = 0x13 -> 10011;
 *   arguments D = 16: one unsigned 8-bit value 0xC3 -> 11000011, then 8 zero bits.
 *   The first W - C = 28 bits are 1010 101 10011 11000011 00000000, with 2+2+3+4 = 11 ones,
 *   so the even-parity bit is 1 (12 ones in the whole word) and odd parity gives 0.
 *   W = 29 -> 8 hex digits with 3 zero pad bits in front:
 *   000 1010 1011 0011 1100 0011 0000 0000 1 = 0001 0101 0110 0111 1000 0110 0000 0001
 *   = 0x15678601 (odd parity: 0x15678600). */
static const struct {
    const char *name;
    ulk_check_kind ck;
    const char *hex;
} parity_rows[] = {
    {"parity-even", ULK_CHECK_PARITY_EVEN, "15678601"},
    {"parity-odd", ULK_CHECK_PARITY_ODD, "15678600"},
    /* no check: the 28 bits alone, 7 digits: 1010 1011 0011 1100 0011 0000 0000 */
    {"none", ULK_CHECK_NONE, "AB3C300"},
};

static void pack(uint8_t *dst, int n, uint64_t v)
{
    for (int i = 0; i < n; i++) dst[i] = (uint8_t)((v >> (n - 1 - i)) & 1);
}

static void test_word_parity_rows(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof parity_rows / sizeof parity_rows[0]; r++) {
        ulk_link l = test_link(4, 0xA, 3, 5, 16, parity_rows[r].ck);
        uint8_t args[16] = {0};
        pack(args, 8, 0xC3);
        ulk_word w;
        ulk_word_build(&l, 5, 0x13, args, &w);
        char hex[40];
        ulk_word_hex(&w, hex);
        print_message("row %s: %s\n", parity_rows[r].name, hex);
        assert_string_equal(hex, parity_rows[r].hex);
        assert_true(ulk_word_check_ok(&l, &w));
        /* any single flipped bit breaks a parity check (a copy is flipped, not w) */
        if (parity_rows[r].ck != ULK_CHECK_NONE)
            for (int i = 0; i < w.n_bits; i++) {
                ulk_word c = w;
                c.bits[i] ^= 1;
                assert_false(ulk_word_check_ok(&l, &c));
            }
    }
}

/* CRC words: vehicle 8 bits 0xA7, system 4 bits 0x5, opcode 4 bits 0x9, D = 16 carrying
 * 0xBEEF -> the 32 bits 0xA759BEEF. python3-crcmod: crc-8(a7 59 be ef) = 0x99,
 * crc-ccitt-false(a7 59 be ef) = 0xCE07. */
static const struct {
    const char *name;
    ulk_check_kind ck;
    const char *hex;
} crc_rows[] = {
    {"crc8", ULK_CHECK_CRC8, "A759BEEF99"},
    {"crc16", ULK_CHECK_CRC16, "A759BEEFCE07"},
};

static void test_word_crc_rows(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof crc_rows / sizeof crc_rows[0]; r++) {
        ulk_link l = test_link(8, 0xA7, 4, 4, 16, crc_rows[r].ck);
        uint8_t args[16];
        pack(args, 16, 0xBEEF);
        ulk_word w;
        ulk_word_build(&l, 0x5, 0x9, args, &w);
        char hex[40];
        ulk_word_hex(&w, hex);
        print_message("row %s: %s\n", crc_rows[r].name, hex);
        assert_string_equal(hex, crc_rows[r].hex);
        assert_true(ulk_word_check_ok(&l, &w));
        for (int i = 0; i < w.n_bits; i++) {
            ulk_word c = w;
            c.bits[i] ^= 1;
            assert_false(ulk_word_check_ok(&l, &c)); /* a CRC catches every single-bit error */
        }
        ulk_word shorter = w;
        shorter.n_bits--;
        assert_false(ulk_word_check_ok(&l, &shorter));
    }
}

/* Layout at the extremes: A_v = 0 and D = 64 (W = 0 + 16 + 16 + 64 + 16 = 112 bits). */
static void test_layout_extremes(void **st)
{
    (void)st;
    ulk_link l = test_link(0, 0, 16, 16, 64, ULK_CHECK_CRC16);
    ulk_word_layout y = ulk_word_layout_of(&l);
    assert_int_equal(y.vehicle_pos, 0);
    assert_int_equal(y.system_pos, 0);
    assert_int_equal(y.opcode_pos, 16);
    assert_int_equal(y.args_pos, 32);
    assert_int_equal(y.check_pos, 96);
    uint8_t args[64];
    pack(args, 64, 0xFEDCBA9876543210ull);
    ulk_word w;
    ulk_word_build(&l, 0xFFFF, 0x1234, args, &w);
    assert_int_equal(w.n_bits, 112);
    char hex[40];
    ulk_word_hex(&w, hex);
    assert_int_equal(strlen(hex), 28);
    assert_memory_equal(hex, "FFFF1234FEDCBA9876543210", 24);
    /* the check over 12 whole octets equals the catalogue form */
    const uint8_t oct[12] = {0xFF, 0xFF, 0x12, 0x34, 0xFE, 0xDC, 0xBA, 0x98, 0x76, 0x54, 0x32, 0x10};
    char crc[8];
    snprintf(crc, sizeof crc, "%04X", ulk_crc16_bytes(0xFFFF, oct, 12));
    assert_string_equal(hex + 24, crc);
    /* oversize system address and opcode are masked to their widths */
    ulk_link l2 = test_link(4, 0xA, 3, 5, 16, ULK_CHECK_NONE);
    ulk_word_build(&l2, 0xFD, 0xF3, NULL, &w);
    assert_int_equal(ulk_word_get(&w, 4, 3), 5);
    assert_int_equal(ulk_word_get(&w, 7, 5), 0x13);
    assert_int_equal(ulk_word_get(&w, 12, 16), 0);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_crc_catalogue_check_values),
        cmocka_unit_test(test_crc_bitwise_equals_bytewise),
        cmocka_unit_test(test_parity_counts),
        cmocka_unit_test(test_put_get_hex),
        cmocka_unit_test(test_word_parity_rows),
        cmocka_unit_test(test_word_crc_rows),
        cmocka_unit_test(test_layout_extremes),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
