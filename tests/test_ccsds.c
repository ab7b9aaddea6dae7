/* tests/test_ccsds.c - the CCSDS telecommand bit layer against the standards.
 *
 * Outside sources, named beside each check: CCSDS 231.0-B-4 (randomizer section 6, BCH code section 3, start
 * and tail sequences section 5), CCSDS 232.0-B-4 section 4.1.2 and 133.0-B-2 section 4.1.3
 * (header layouts; all these section numbers from memory, rebuilt here field by field
 * with a slow bit writer), the published CRC catalogue (CRC-16/IBM-3740 check value).
 * The FECF is also cross-checked with python3-crcmod by tests/py/test_ccsds_crcmod.py,
 * which runs this program as `test_ccsds --print-frames` to get frames to check; the BCH
 * encoder is checked on non-zero codeblocks against the polynomial-division encoder of
 * tests/py/test_ccsds_bch.py, which runs it as `test_ccsds --print-codeblocks`.
 */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "ulk/ccsds.h"
#include "ulk/error.h"

/* ---- slow obvious helpers ---- */

/* A bit writer: one bit per octet, MSB first. */
typedef struct {
    uint8_t bits[8 * 64];
    size_t n;
} bitw;

static void bw_put(bitw *w, int width, uint64_t v)
{
    for (int i = width - 1; i >= 0; i--) w->bits[w->n++] = (uint8_t)(v >> i & 1);
}

static void bw_octets(const bitw *w, uint8_t *out)
{
    for (size_t i = 0; i < w->n / 8; i++) {
        out[i] = 0;
        for (int b = 0; b < 8; b++) out[i] = (uint8_t)(out[i] << 1 | w->bits[8 * i + (size_t)b]);
    }
}

/* Deterministic pseudo-random numbers (a 64-bit LCG; common practice constants). */
static uint64_t g_rng = 0x2545F4914F6CDD1Dull;
static uint32_t rnd(void)
{
    g_rng = g_rng * 6364136223846793005ull + 1442695040888963407ull;
    return (uint32_t)(g_rng >> 33);
}
static void rnd_fill(uint8_t *p, size_t n)
{
    for (size_t i = 0; i < n; i++) p[i] = (uint8_t)rnd();
}

/* Remainder of a(x) (coefficients a[0..na-1], a[d] of x^d) by b(x) of degree db, in place. */
static void poly_rem(uint8_t *a, int na, const uint8_t *b, int db)
{
    for (int d = na - 1; d >= db; d--)
        if (a[d])
            for (int k = 0; k <= db; k++) a[d - db + k] ^= b[k];
}

static int poly_is_zero(const uint8_t *a, int n)
{
    for (int i = 0; i < n; i++)
        if (a[i]) return 0;
    return 1;
}

/* g(x) = x^7 + x^6 + x^2 + 1 written out from the standard (CCSDS 231.0-B-4 section 3.2,
 * section from memory; the same polynomial verified in CCSDS 201.0-B-3 section 3.3.2), not
 * taken from the library, so the slow encoder below shares nothing with src/. Coefficients of
 * x^0 .. x^7. */
static void generator_coeffs(uint8_t g[8])
{
    static const uint8_t std_g[8] = {1, 0, 1, 0, 0, 0, 1, 1};
    memcpy(g, std_g, 8);
}

static void flip(uint8_t *p, int bit) { p[bit / 8] ^= (uint8_t)(0x80u >> (bit % 8)); }

/* A generic Fibonacci LFSR written from the recurrence of a characteristic polynomial
 * (coefficient list, degree 8), register all ones: s(n+8) = sum c_k s(n+k). */
static void slow_lfsr(const int *coeff_degrees, int n_terms, uint8_t *out, int n_octets)
{
    uint8_t s[8 * 64 + 8];
    assert_true(n_octets >= 0 && n_octets <= 64); /* the register history holds 64 octets */
    for (int i = 0; i < 8; i++) s[i] = 1;
    for (size_t n = 8; n < (size_t)(8 * n_octets + 8); n++) { /* s[n] from s[n-8 .. n-1] */
        int v = 0;
        for (int t = 0; t < n_terms; t++)
            if (coeff_degrees[t] >= 0 && coeff_degrees[t] < 8) v ^= s[n - 8 + (size_t)coeff_degrees[t]];
        s[n] = (uint8_t)v;
    }
    for (int i = 0; i < n_octets; i++) {
        out[i] = 0;
        for (int b = 0; b < 8; b++) out[i] = (uint8_t)(out[i] << 1 | s[8 * i + b]);
    }
}

/* ---- pseudo-randomizer ---- */

static void test_randomizer_first_40_bits(void **state)
{
    (void)state;
    /* CCSDS 231.0-B-4 section 6 (from memory): the first 40 bits of the TC pseudo-random sequence. */
    const uint8_t expect[5] = {0xFF, 0x39, 0x9E, 0x5A, 0x68};
    uint8_t seq[5];
    ulk_tc_random_sequence(seq, 5);
    assert_memory_equal(seq, expect, 5);
    /* Applied to zeros it gives the same; applied twice it gives the data back. */
    uint8_t z[5] = {0};
    ulk_tc_randomize(z, 5);
    assert_memory_equal(z, expect, 5);
}

static void test_randomizer_polynomial(void **state)
{
    (void)state;
    /* CCSDS 231.0-B-4 section 6 (from memory): h(x) = x^8 + x^6 + x^4 + x^3 + x^2 + x + 1, all-ones start. */
    assert_int_equal(ULK_TC_RANDOMIZER_POLY, (1u << 8) | (1u << 6) | (1u << 4) | (1u << 3) |
                                                 (1u << 2) | (1u << 1) | 1u);
    static const int tc_poly[] = {8, 6, 4, 3, 2, 1, 0};
    uint8_t slow[64], lib[64];
    slow_lfsr(tc_poly, 7, slow, 64);
    ulk_tc_random_sequence(lib, 64);
    assert_memory_equal(lib, slow, 64);
    /* Maximal length: period 255 bits, and not 255/3, 255/5, 255/17. */
    uint8_t bits[512];
    ulk_octets_to_bits(lib, 64, bits);
    for (int i = 0; i + 255 < 512; i++) assert_int_equal(bits[i], bits[i + 255]);
    static const int divisors[] = {85, 51, 15};
    for (int d = 0; d < 3; d++) {
        int same = 1;
        for (int i = 0; i + divisors[d] < 512; i++) same &= bits[i] == bits[i + divisors[d]];
        assert_false(same);
    }
    /* The polynomial x^8+x^7+x^5+x^3+1 is the TM randomizer (CCSDS 131.0-B-2 section 9; its sequence
     * FF 48 0E C0 9A from memory): the same generic LFSR gives that, not the TC sequence. */
    static const int tm_poly[] = {8, 7, 5, 3, 0};
    uint8_t tm[5];
    slow_lfsr(tm_poly, 5, tm, 5);
    const uint8_t tm_expect[5] = {0xFF, 0x48, 0x0E, 0xC0, 0x9A};
    assert_memory_equal(tm, tm_expect, 5);
    assert_memory_not_equal(tm, lib, 5);
}

static void test_randomize_is_its_inverse(void **state)
{
    (void)state;
    uint8_t data[300], copy[300], seq[300];
    rnd_fill(data, sizeof data);
    memcpy(copy, data, sizeof data);
    ulk_tc_random_sequence(seq, sizeof seq);
    ulk_tc_randomize(copy, sizeof copy);
    for (size_t i = 0; i < sizeof data; i++) assert_int_equal(copy[i], data[i] ^ seq[i]);
    ulk_tc_randomize(copy, sizeof copy);
    assert_memory_equal(copy, data, sizeof data);
}

/* ---- BCH(63,56) ---- */

static void test_bch_generator_divides_x63_minus_1(void **state)
{
    (void)state;
    /* The library's constant is the standard's g(x) (generator_coeffs above). */
    uint8_t g[8];
    generator_coeffs(g);
    for (int k = 0; k < 8; k++)
        if ((ULK_BCH_GENERATOR >> k & 1) != g[k])
            fail_msg("ULK_BCH_GENERATOR 0x%02x differs from g(x) = x^7+x^6+x^2+1 at x^%d", ULK_BCH_GENERATOR, k);
    /* x^63 - 1 = x^63 + 1 over GF(2) is a multiple of g: the code is cyclic of length 63 ... */
    uint8_t a[64];
    memset(a, 0, sizeof a);
    a[63] = a[0] = 1;
    poly_rem(a, 64, g, 7);
    assert_true(poly_is_zero(a, 7));
    /* ... and of no shorter length. */
    for (int n = 8; n < 63; n++) {
        memset(a, 0, sizeof a);
        a[n] = a[0] = 1;
        poly_rem(a, n + 1, g, 7);
        assert_false(poly_is_zero(a, 7));
    }
}

/* The obvious encoder: c(x) = i(x) x^7 + (i(x) x^7 mod g(x)), parity complemented, filler 0. */
static void slow_bch_encode(const uint8_t info[7], uint8_t cb[8])
{
    uint8_t g[8], a[63];
    generator_coeffs(g);
    memset(a, 0, sizeof a);
    for (int i = 0; i < 56; i++) a[62 - i] = (uint8_t)(info[i / 8] >> (7 - i % 8) & 1);
    poly_rem(a, 63, g, 7);
    bitw w = {.n = 0};
    for (int i = 0; i < 56; i++) bw_put(&w, 1, (uint64_t)(info[i / 8] >> (7 - i % 8) & 1));
    for (int d = 6; d >= 0; d--) bw_put(&w, 1, (uint64_t)!a[d]);
    bw_put(&w, 1, 0);
    bw_octets(&w, cb);
}

static void test_bch_encode_matches_slow_encoder(void **state)
{
    (void)state;
    uint8_t g[8];
    generator_coeffs(g);
    for (int t = 0; t < 500; t++) {
        uint8_t info[7], cb[8], slow[8];
        rnd_fill(info, 7);
        if (t == 0) memset(info, 0, 7);
        if (t == 1) memset(info, 0xFF, 7);
        ulk_bch_encode(info, cb);
        slow_bch_encode(info, slow);
        assert_memory_equal(cb, slow, 8);
        assert_memory_equal(cb, info, 7);
        assert_int_equal(cb[7] & 1, 0); /* filler bit */
        /* With the parity complement removed the 63 bits are a multiple of g. */
        uint8_t a[63];
        for (int i = 0; i < 63; i++) a[62 - i] = (uint8_t)((cb[i / 8] >> (7 - i % 8) & 1) ^ (i >= 56));
        poly_rem(a, 63, g, 7);
        assert_true(poly_is_zero(a, 7));
        assert_int_equal(ulk_bch_syndrome(cb), 0);
    }
    /* All-zero information: parity 0000000 sent complemented (CCSDS 231.0-B-4 section 3,
     * from memory; CCSDS 201.0-B-3 page 3-1, verified). */
    uint8_t z[7] = {0}, cb[8];
    ulk_bch_encode(z, cb);
    assert_int_equal(cb[7], 0xFE);
}

/* A few information words for the exhaustive error tests. */
static void info_word(int t, uint8_t info[7])
{
    if (t == 0) memset(info, 0, 7);
    else if (t == 1) memset(info, 0xFF, 7);
    else rnd_fill(info, 7);
}

static void test_bch_sec_corrects_every_single_error(void **state)
{
    (void)state;
    for (int t = 0; t < 6; t++) {
        uint8_t info[7], cb[8], out[7];
        info_word(t, info);
        ulk_bch_encode(info, cb);
        int bit = 99;
        assert_int_equal(ulk_bch_decode(ULK_BCH_SEC, cb, out, &bit), ULK_CB_CLEAN);
        assert_int_equal(bit, -1);
        assert_memory_equal(out, info, 7);
        for (int p = 0; p < 64; p++) {
            uint8_t e[8];
            memcpy(e, cb, 8);
            flip(e, p);
            memset(out, 0xA5, 7);
            ulk_cb_verdict v = ulk_bch_decode(ULK_BCH_SEC, e, out, &bit);
            if (p < 63) {
                assert_int_equal(v, ULK_CB_CORRECTED);
                assert_int_equal(bit, p);
            } else { /* the filler bit is outside the code: ignored */
                assert_int_equal(v, ULK_CB_CLEAN);
                assert_int_equal(bit, -1);
            }
            assert_memory_equal(out, info, 7);
        }
    }
}

static void test_bch_sec_detects_every_double_error(void **state)
{
    (void)state;
    for (int t = 0; t < 4; t++) {
        uint8_t info[7], cb[8], out[7];
        info_word(t, info);
        ulk_bch_encode(info, cb);
        for (int p = 0; p < 63; p++)
            for (int q = p + 1; q < 64; q++) {
                uint8_t e[8];
                memcpy(e, cb, 8);
                flip(e, p);
                flip(e, q);
                int bit;
                ulk_cb_verdict v = ulk_bch_decode(ULK_BCH_SEC, e, out, &bit);
                if (q == 63) { /* one coded error plus the ignored filler */
                    assert_int_equal(v, ULK_CB_CORRECTED);
                    assert_int_equal(bit, p);
                    assert_memory_equal(out, info, 7);
                } else {
                    assert_int_equal(v, ULK_CB_REJECTED);
                }
            }
    }
}

static void test_bch_ted_detects_every_one_two_three_bit_error(void **state)
{
    (void)state;
    for (int t = 0; t < 3; t++) {
        uint8_t info[7], cb[8], out[7];
        info_word(t, info);
        ulk_bch_encode(info, cb);
        assert_int_equal(ulk_bch_decode(ULK_BCH_TED, cb, out, NULL), ULK_CB_CLEAN);
        assert_memory_equal(out, info, 7);
        long n_checked = 0;
        for (int p = 0; p < 63; p++) {
            uint8_t e1[8];
            memcpy(e1, cb, 8);
            flip(e1, p);
            assert_int_equal(ulk_bch_decode(ULK_BCH_TED, e1, out, NULL), ULK_CB_REJECTED);
            n_checked++;
            for (int q = p + 1; q < 63; q++) {
                uint8_t e2[8];
                memcpy(e2, e1, 8);
                flip(e2, q);
                assert_int_equal(ulk_bch_decode(ULK_BCH_TED, e2, out, NULL), ULK_CB_REJECTED);
                n_checked++;
                for (int r = q + 1; r < 63; r++) {
                    uint8_t e3[8];
                    memcpy(e3, e2, 8);
                    flip(e3, r);
                    assert_int_equal(ulk_bch_decode(ULK_BCH_TED, e3, out, NULL), ULK_CB_REJECTED);
                    n_checked++;
                }
            }
        }
        assert_int_equal(n_checked, 63 + 1953 + 39711); /* C(63,1) + C(63,2) + C(63,3) */
        /* The filler alone is no error in TED either. */
        uint8_t f[8];
        memcpy(f, cb, 8);
        flip(f, 63);
        assert_int_equal(ulk_bch_decode(ULK_BCH_TED, f, out, NULL), ULK_CB_CLEAN);
        assert_memory_equal(out, info, 7);
    }
}

static void test_tail_sequence_is_not_correctable(void **state)
{
    (void)state;
    /* CCSDS 231.0-B-4 section 5 (from memory): tail sequence C5C5C5C5C5C5C579. */
    const uint8_t tail[8] = {0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0x79};
    uint8_t out[7];
    assert_int_equal(ulk_bch_decode(ULK_BCH_SEC, tail, out, NULL), ULK_CB_REJECTED);
    assert_int_equal(ulk_bch_decode(ULK_BCH_TED, tail, out, NULL), ULK_CB_REJECTED);
    /* Derived here: even with any one bit wrong the tail is not taken for a codeblock in
     * SEC mode (its syndrome is the one odd-weight syndrome no single error produces). */
    for (int p = 0; p < 64; p++) {
        uint8_t e[8];
        memcpy(e, tail, 8);
        flip(e, p);
        assert_int_equal(ulk_bch_decode(ULK_BCH_SEC, e, out, NULL), ULK_CB_REJECTED);
    }
}

/* ---- FECF ---- */

static void test_fecf_check_value(void **state)
{
    (void)state;
    /* Published CRC catalogue: CRC-16/IBM-3740 check ("123456789") = 0x29B1. */
    assert_int_equal(ulk_tcf_crc16((const uint8_t *)"123456789", 9), 0x29B1);
    /* Empty input leaves the initial value 0xFFFF (catalogue parameter init). */
    assert_int_equal(ulk_tcf_crc16(NULL, 0), 0xFFFF);
}

/* ---- headers, field by field ---- */

typedef struct {
    const char *name;
    ulk_spp_hdr h;
} spp_row;

static void test_spp_header_layout(void **state)
{
    (void)state;
    /* CCSDS 133.0-B-2 section 4.1.3 (from memory): version 3, type 1, secondary header flag 1, APID 11, sequence flags 2,
     * sequence count 14, data length 16 bits. */
    static const spp_row rows[] = {
        {"typical", {0, 1, 0, 0x155, 3, 0x002A, 0x0001}},
        {"all_zero", {0, 0, 0, 0, 0, 0, 0}},
        {"all_max", {7, 1, 1, 0x7FF, 3, 0x3FFF, 0xFFFF}},
        {"alternating", {5, 0, 1, 0x2AA, 2, 0x1555, 0xA5A5}},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        const ulk_spp_hdr *h = &rows[i].h;
        bitw w = {.n = 0};
        bw_put(&w, 3, h->version);
        bw_put(&w, 1, h->type);
        bw_put(&w, 1, h->sec_hdr_flag);
        bw_put(&w, 11, h->apid);
        bw_put(&w, 2, h->seq_flags);
        bw_put(&w, 14, h->seq_count);
        bw_put(&w, 16, h->data_length);
        uint8_t slow[6], got[6];
        bw_octets(&w, slow);
        assert_int_equal(ulk_spp_hdr_pack(h, got), ULK_OK);
        if (memcmp(slow, got, 6) != 0) fail_msg("row %s", rows[i].name);
        ulk_spp_hdr back;
        ulk_spp_hdr_unpack(got, &back);
        if (back.version != h->version || back.type != h->type || back.sec_hdr_flag != h->sec_hdr_flag ||
            back.apid != h->apid || back.seq_flags != h->seq_flags || back.seq_count != h->seq_count ||
            back.data_length != h->data_length)
            fail_msg("row %s unpack", rows[i].name);
    }
    /* Fields wider than their width are refused, not truncated. */
    ulk_spp_hdr bad[] = {{8, 1, 0, 1, 3, 0, 0}, {0, 2, 0, 1, 3, 0, 0}, {0, 1, 2, 1, 3, 0, 0},
                         {0, 1, 0, 0x800, 3, 0, 0}, {0, 1, 0, 1, 4, 0, 0}, {0, 1, 0, 1, 3, 0x4000, 0}};
    uint8_t o[6];
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) assert_int_equal(ulk_spp_hdr_pack(&bad[i], o), ULK_EINVAL);
}

typedef struct {
    const char *name;
    ulk_tcf_hdr h;
} tcf_row;

static void test_tcf_header_layout(void **state)
{
    (void)state;
    /* CCSDS 232.0-B-4 section 4.1.2 (from memory): version 2, bypass 1, control command 1, spare 2, SCID 10, VCID 6,
     * frame length 10, frame sequence number 8 bits. */
    static const tcf_row rows[] = {
        {"typical", {0, 1, 0, 0, 0x2A7, 0x15, 0x01F, 0x00}},
        {"all_zero", {0, 0, 0, 0, 0, 0, 0, 0}},
        {"all_max", {3, 1, 1, 3, 0x3FF, 0x3F, 0x3FF, 0xFF}},
        {"alternating", {2, 0, 1, 1, 0x155, 0x2A, 0x2AA, 0x5A}},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        const ulk_tcf_hdr *h = &rows[i].h;
        bitw w = {.n = 0};
        bw_put(&w, 2, h->version);
        bw_put(&w, 1, h->bypass);
        bw_put(&w, 1, h->ctrl_cmd);
        bw_put(&w, 2, h->spare);
        bw_put(&w, 10, h->scid);
        bw_put(&w, 6, h->vcid);
        bw_put(&w, 10, h->frame_length);
        bw_put(&w, 8, h->seq_num);
        uint8_t slow[5], got[5];
        bw_octets(&w, slow);
        assert_int_equal(ulk_tcf_hdr_pack(h, got), ULK_OK);
        if (memcmp(slow, got, 5) != 0) fail_msg("row %s", rows[i].name);
        ulk_tcf_hdr back;
        ulk_tcf_hdr_unpack(got, &back);
        if (back.version != h->version || back.bypass != h->bypass || back.ctrl_cmd != h->ctrl_cmd ||
            back.spare != h->spare || back.scid != h->scid || back.vcid != h->vcid ||
            back.frame_length != h->frame_length || back.seq_num != h->seq_num)
            fail_msg("row %s unpack", rows[i].name);
    }
    ulk_tcf_hdr bad[] = {{4, 0, 0, 0, 0, 0, 0, 0}, {0, 2, 0, 0, 0, 0, 0, 0}, {0, 0, 2, 0, 0, 0, 0, 0},
                         {0, 0, 0, 4, 0, 0, 0, 0}, {0, 0, 0, 0, 0x400, 0, 0, 0}, {0, 0, 0, 0, 0, 0x40, 0, 0},
                         {0, 0, 0, 0, 0, 0, 0x400, 0}};
    uint8_t o[5];
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) assert_int_equal(ulk_tcf_hdr_pack(&bad[i], o), ULK_EINVAL);
}

/* A whole frame as the profile builds it, rebuilt bit by bit. */
static void test_frame_build_layout(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    tc.spacecraft_id = 0x2A7;
    tc.virtual_channel = 0x15;
    tc.service = ULK_TC_SEQUENCE_CONTROLLED;
    tc.segment_header = 1;
    tc.map_id = 0x2D;
    const uint8_t cmd_bits[12] = {1, 0, 1, 1, 0, 0, 1, 1, 1, 1, 0, 1};
    uint8_t data[8], pkt[32], frame[64];
    size_t n_data, n_pkt, n_frame;
    assert_int_equal(ulk_ccsds_command_data(0x12, cmd_bits, 12, data, sizeof data, &n_data), ULK_OK);
    assert_int_equal(n_data, 3);
    assert_int_equal(ulk_spp_build(0x155, 0x2A, data, n_data, pkt, sizeof pkt, &n_pkt), ULK_OK);
    assert_int_equal(ulk_tcf_build(&tc, 0x9C, pkt, n_pkt, frame, sizeof frame, &n_frame), ULK_OK);

    bitw w = {.n = 0};
    /* frame primary header: version 00, bypass 0 (Type-A), control command 0, spare 00 */
    bw_put(&w, 2, 0);
    bw_put(&w, 1, 0);
    bw_put(&w, 1, 0);
    bw_put(&w, 2, 0);
    bw_put(&w, 10, 0x2A7);
    bw_put(&w, 6, 0x15);
    bw_put(&w, 10, 5 + 1 + 6 + 3 + 2 - 1); /* frame octets - 1 */
    bw_put(&w, 8, 0x9C);
    /* segment header: sequence flags 11, MAP ID */
    bw_put(&w, 2, 3);
    bw_put(&w, 6, 0x2D);
    /* packet primary header: 000, type 1, no secondary header, APID, 11, count, length */
    bw_put(&w, 3, 0);
    bw_put(&w, 1, 1);
    bw_put(&w, 1, 0);
    bw_put(&w, 11, 0x155);
    bw_put(&w, 2, 3);
    bw_put(&w, 14, 0x2A);
    bw_put(&w, 16, 3 - 1);
    /* data field: opcode, 12 argument bits, 4 zero bits */
    bw_put(&w, 8, 0x12);
    for (int i = 0; i < 12; i++) bw_put(&w, 1, cmd_bits[i]);
    bw_put(&w, 4, 0);
    uint8_t slow[64];
    bw_octets(&w, slow);
    assert_int_equal(n_frame, w.n / 8 + 2);
    assert_memory_equal(frame, slow, w.n / 8);
    uint16_t fecf = ulk_tcf_crc16(frame, n_frame - 2);
    assert_int_equal(frame[n_frame - 2], fecf >> 8);
    assert_int_equal(frame[n_frame - 1], fecf & 0xFF);

    /* Expedited: bypass 1 and N(S) 0 whatever is asked. */
    tc.service = ULK_TC_EXPEDITED;
    assert_int_equal(ulk_tcf_build(&tc, 0x9C, pkt, n_pkt, frame, sizeof frame, &n_frame), ULK_OK);
    assert_int_equal(frame[0] & 0x20, 0x20);
    assert_int_equal(frame[4], 0);
}

static void test_command_data_field(void **state)
{
    (void)state;
    uint8_t out[8];
    size_t n;
    const uint8_t b3[3] = {1, 0, 1};
    assert_int_equal(ulk_ccsds_command_data(0xA5, b3, 3, out, sizeof out, &n), ULK_OK);
    assert_int_equal(n, 2);
    assert_int_equal(out[0], 0xA5);
    assert_int_equal(out[1], 0xA0);
    assert_int_equal(ulk_ccsds_command_data(7, NULL, 0, out, sizeof out, &n), ULK_OK);
    assert_int_equal(n, 1);
    assert_int_equal(out[0], 7);
    uint8_t b9[9] = {1, 1, 1, 1, 1, 1, 1, 1, 1};
    assert_int_equal(ulk_ccsds_command_data(0, b9, 8, out, sizeof out, &n), ULK_OK);
    assert_int_equal(n, 2);
    assert_int_equal(out[1], 0xFF);
    assert_int_equal(ulk_ccsds_command_data(0, b9, 9, out, sizeof out, &n), ULK_OK);
    assert_int_equal(n, 3);
    assert_int_equal(out[2], 0x80);
    assert_int_equal(ulk_ccsds_command_data(256, NULL, 0, out, sizeof out, &n), ULK_EINVAL);
    assert_int_equal(ulk_ccsds_command_data(1, b9, 9, out, 2, &n), ULK_ELIMIT);
    assert_int_equal(ulk_ccsds_command_data(1, NULL, 3, out, sizeof out, &n), ULK_EINVAL);
}

/* ---- packet and frame parsing, hostile inputs as literal octets ---- */

typedef struct {
    const char *name;
    uint8_t p[10];
    size_t n;
    ulk_spp_verdict verdict;
} spp_parse_row;

static void test_spp_parse_verdicts(void **state)
{
    (void)state;
    static const spp_parse_row rows[] = {
        {"ok", {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_OK},
        {"too_short_header_only", {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x00}, 6, ULK_SPP_TOO_SHORT},
        {"too_short_3", {0x11, 0x55, 0xC0}, 3, ULK_SPP_TOO_SHORT},
        {"version_1", {0x31, 0x55, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_VERSION},
        {"telemetry_type", {0x01, 0x55, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_TYPE},
        {"secondary_header", {0x19, 0x55, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_SEC_HDR},
        {"idle_apid", {0x17, 0xFF, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_IDLE_APID},
        {"first_segment", {0x11, 0x55, 0x40, 0x2A, 0x00, 0x01, 0xAB, 0xCD}, 8, ULK_SPP_SEQ_FLAGS},
        {"length_long", {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x02, 0xAB, 0xCD}, 8, ULK_SPP_LENGTH},
        {"length_short", {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x00, 0xAB, 0xCD}, 8, ULK_SPP_LENGTH},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        ulk_spp_packet pk;
        assert_int_equal(ulk_spp_parse(rows[i].p, rows[i].n, &pk), ULK_OK);
        if (pk.verdict != rows[i].verdict)
            fail_msg("row %s: verdict %s", rows[i].name, ulk_spp_verdict_str(pk.verdict));
        if (pk.verdict == ULK_SPP_OK) {
            assert_int_equal(pk.hdr.apid, 0x155);
            assert_int_equal(pk.hdr.seq_count, 0x2A);
            assert_int_equal(pk.n_data, 2);
            assert_ptr_equal(pk.data, rows[i].p + 6);
        } else {
            assert_null(pk.data);
        }
    }
    uint8_t d[2] = {1, 2}, o[16];
    size_t n;
    /* 0x7FF is the idle packets' APID (CCSDS 133.0-B-2 section 4.1.3.3.4, from memory). */
    assert_int_equal(ulk_spp_build(0x7FF, 0, d, 2, o, sizeof o, &n), ULK_EINVAL);
    assert_int_equal(ulk_spp_build(0x7FE, 0x3FFF, d, 2, o, sizeof o, &n), ULK_OK);
    assert_int_equal(ulk_spp_build(1, 0x4000, d, 2, o, sizeof o, &n), ULK_EINVAL);
    assert_int_equal(ulk_spp_build(1, 0, d, 0, o, sizeof o, &n), ULK_EINVAL);
    assert_int_equal(ulk_spp_build(1, 0, d, 2, o, 7, &n), ULK_ELIMIT);
    assert_int_equal(ulk_spp_parse(NULL, 0, NULL), ULK_EINVAL);
}

static void test_tcf_parse_verdicts(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    tc.spacecraft_id = 0x123;
    tc.virtual_channel = 7;
    tc.segment_header = 1;
    tc.map_id = 9;
    uint8_t pkt[] = {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x01, 0xAB, 0xCD};
    uint8_t f[64];
    size_t n;
    assert_int_equal(ulk_tcf_build(&tc, 0, pkt, sizeof pkt, f, sizeof f, &n), ULK_OK);
    ulk_tcf_frame fr;
    assert_int_equal(ulk_tcf_parse(&tc, f, n, &fr), ULK_OK);
    assert_int_equal(fr.verdict, ULK_TCF_OK);
    assert_int_equal(fr.n_data, sizeof pkt);
    assert_memory_equal(fr.data, pkt, sizeof pkt);
    assert_int_equal(fr.map_id, 9);

    uint8_t c[64];
    /* too short */
    assert_int_equal(ulk_tcf_parse(&tc, f, 4, &fr), ULK_OK);
    assert_int_equal(fr.verdict, ULK_TCF_TOO_SHORT);
    /* version 01: checked before the FECF */
    memcpy(c, f, n);
    c[0] |= 0x40;
    ulk_tcf_parse(&tc, c, n, &fr);
    assert_int_equal(fr.verdict, ULK_TCF_VERSION);
    /* length mismatch: one octet fewer or more than the field says */
    ulk_tcf_parse(&tc, f, n - 1, &fr);
    assert_int_equal(fr.verdict, ULK_TCF_LENGTH);
    memcpy(c, f, n);
    c[n] = 0;
    ulk_tcf_parse(&tc, c, n + 1, &fr);
    assert_int_equal(fr.verdict, ULK_TCF_LENGTH);
    /* FECF: every single-bit error of the frame is caught */
    for (size_t b = 0; b < 8 * n; b++) {
        memcpy(c, f, n);
        flip(c, (int)b);
        ulk_tcf_parse(&tc, c, n, &fr);
        if (b < 2 && fr.verdict == ULK_TCF_VERSION) continue; /* version bits checked first */
        if (b >= 22 && b < 32 && fr.verdict == ULK_TCF_LENGTH) continue; /* length field */
        if (fr.verdict != ULK_TCF_FECF) fail_msg("bit %zu: %s", b, ulk_tcf_verdict_str(fr.verdict));
    }
    /* Header fields, with the FECF made right again, so only the field is wrong. */
    struct {
        const char *name;
        int octet;
        uint8_t xor_mask;
        ulk_tcf_verdict verdict;
    } rows[] = {
        {"control_command", 0, 0x10, ULK_TCF_CTRL_CMD},
        {"scid", 1, 0x01, ULK_TCF_SCID},
        {"vcid", 2, 0x04, ULK_TCF_VCID},
        {"map_id", 5, 0x01, ULK_TCF_SEGMENT},
        {"segment_flags", 5, 0x40, ULK_TCF_SEGMENT},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        memcpy(c, f, n);
        c[rows[i].octet] ^= rows[i].xor_mask;
        uint16_t crc = ulk_tcf_crc16(c, n - 2);
        c[n - 2] = (uint8_t)(crc >> 8);
        c[n - 1] = (uint8_t)crc;
        ulk_tcf_parse(&tc, c, n, &fr);
        if (fr.verdict != rows[i].verdict) fail_msg("row %s: %s", rows[i].name, ulk_tcf_verdict_str(fr.verdict));
    }
    /* Size limit: 1024 octets at most (CCSDS 232.0-B-4 section 4.1.2, from memory; CCSDS
     * 202.0-B-2 section 4.2.1, verified). */
    static uint8_t big[1100], out[1100];
    size_t max_data = 1024 - 5 - 1 - 2;
    assert_int_equal(ulk_tcf_build(&tc, 0, big, max_data, out, sizeof out, &n), ULK_OK);
    assert_int_equal(n, 1024);
    ulk_tcf_parse(&tc, out, n, &fr);
    assert_int_equal(fr.verdict, ULK_TCF_OK);
    assert_int_equal(ulk_tcf_build(&tc, 0, big, max_data + 1, out, sizeof out, &n), ULK_ELIMIT);
    assert_int_equal(ulk_tcf_build(&tc, 0, big, 10, out, 10, &n), ULK_ELIMIT);
}

static void test_tc_check_names_the_field(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    char err[128];
    ulk_ccsds_tc_default(&tc);
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_OK);
    tc.spacecraft_id = 1024;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "spacecraft_id"));
    ulk_ccsds_tc_default(&tc);
    tc.virtual_channel = 64;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "virtual_channel"));
    ulk_ccsds_tc_default(&tc);
    tc.map_id = 64;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "map_id"));
    ulk_ccsds_tc_default(&tc);
    tc.start_errors = 2;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "start_errors"));
    ulk_ccsds_tc_default(&tc);
    tc.correction = (ulk_bch_mode)7;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "correction"));
    ulk_ccsds_tc_default(&tc);
    tc.service = (ulk_tc_service)5;
    assert_int_equal(ulk_ccsds_tc_check(&tc, err, sizeof err), ULK_EINVAL);
    assert_non_null(strstr(err, "service"));
    assert_int_equal(ulk_ccsds_tc_check(NULL, err, sizeof err), ULK_EINVAL);
}

/* ---- CLTU ---- */

static void test_cltu_layout(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    for (size_t n_frame = 1; n_frame <= 30; n_frame++) {
        uint8_t frame[32], cltu[64], seq[32];
        rnd_fill(frame, n_frame);
        size_t n;
        assert_int_equal(ulk_cltu_build(&tc, frame, n_frame, cltu, sizeof cltu, &n), ULK_OK);
        size_t n_cb = (n_frame + 6) / 7;
        assert_int_equal(n, 2 + 8 * n_cb + 8);
        assert_int_equal(n, ulk_cltu_octets(n_frame));
        /* CCSDS 231.0-B-4 section 5 (from memory): start sequence EB90, tail sequence C5C5C5C5C5C5C579. */
        const uint8_t start[2] = {0xEB, 0x90};
        const uint8_t tail[8] = {0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0x79};
        assert_memory_equal(cltu, start, 2);
        assert_memory_equal(cltu + n - 8, tail, 8);
        /* Codeblock data: the randomized frame, then 0x55 fill that is not randomized. */
        ulk_tc_random_sequence(seq, n_frame);
        for (size_t i = 0; i < n_cb * 7; i++) {
            uint8_t got = cltu[2 + 8 * (i / 7) + i % 7];
            uint8_t want = i < n_frame ? (uint8_t)(frame[i] ^ seq[i]) : 0x55;
            assert_int_equal(got, want);
        }
        for (size_t k = 0; k < n_cb; k++) {
            uint8_t enc[8];
            ulk_bch_encode(cltu + 2 + 8 * k, enc);
            assert_memory_equal(enc, cltu + 2 + 8 * k, 8);
        }
    }
    uint8_t f[1], c[8];
    size_t n;
    assert_int_equal(ulk_cltu_build(&tc, f, 1, c, sizeof c, &n), ULK_ELIMIT);
    assert_int_equal(ulk_cltu_build(&tc, f, 0, c, sizeof c, &n), ULK_EINVAL);
}

static void test_idle_and_start_sequence(void **state)
{
    (void)state;
    /* Acquisition and idle: alternating bits starting with 0, i.e. 0x55 octets. */
    uint8_t bits[64 + 128];
    ulk_cltu_idle_bits(bits, 16);
    for (int i = 0; i < 16; i++) assert_int_equal(bits[i], i & 1);
    const uint8_t o55 = 0x55;
    uint8_t ob[8];
    ulk_octets_to_bits(&o55, 1, ob);
    assert_memory_equal(ob, bits, 8);
    /* No window starting in the tail or the idle after it is within one bit of EB90, so a
     * decoder resuming after a CLTU does not find a false start there (derived here). */
    const uint8_t tail[8] = {0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0x79};
    ulk_octets_to_bits(tail, 8, bits);
    ulk_cltu_idle_bits(bits + 64, 128);
    for (int i = 0; i + 16 <= 64 + 128; i++) {
        unsigned w = 0;
        for (int b = 0; b < 16; b++) w = w << 1 | bits[i + b];
        assert_true(__builtin_popcount(w ^ 0xEB90u) >= 2);
    }
}

/* Builds acquisition + CLTU(s) + idle as channel bits. */
typedef struct {
    uint8_t bits[8 * (ULK_CLTU_MAX_OCTETS + 64) * 3];
    size_t n;
} stream;

static void st_idle(stream *s, size_t n_bits)
{
    ulk_cltu_idle_bits(s->bits + s->n, n_bits);
    s->n += n_bits;
}

static void st_octets(stream *s, const uint8_t *p, size_t n)
{
    ulk_octets_to_bits(p, n, s->bits + s->n);
    s->n += 8 * n;
}

static stream g_st;
static ulk_cltu_result g_res;

typedef struct {
    int randomize, fecf, segment;
    ulk_bch_mode mode;
    ulk_tc_service service;
} cfg_row;

static void test_cltu_round_trip_every_option(void **state)
{
    (void)state;
    static const size_t lengths[] = {1, 2, 5, 6, 7, 8, 13, 20, 101, 0 /* = max */};
    int n_cases = 0;
    for (int opt = 0; opt < 32; opt++) {
        cfg_row r = {opt & 1, opt >> 1 & 1, opt >> 2 & 1, (ulk_bch_mode)(opt >> 3 & 1),
                     (ulk_tc_service)(opt >> 4 & 1)};
        ulk_ccsds_tc tc;
        ulk_ccsds_tc_default(&tc);
        tc.spacecraft_id = 0x3C1;
        tc.virtual_channel = 0x22;
        tc.randomize = r.randomize;
        tc.fecf = r.fecf;
        tc.segment_header = r.segment;
        tc.map_id = 0x11;
        tc.correction = r.mode;
        tc.service = r.service;
        for (size_t li = 0; li < sizeof lengths / sizeof lengths[0]; li++) {
            size_t n_data = lengths[li] ? lengths[li] : ulk_ccsds_max_data_octets(&tc);
            static uint8_t args[1024];
            uint8_t arg_bits[8 * 1024];
            rnd_fill(args, n_data - 1);
            ulk_octets_to_bits(args, n_data - 1, arg_bits);
            ulk_tc_command c = {.apid = (uint16_t)(0x100 + li), .seq_count = (uint16_t)((16380 + li) % 16384),
                                .frame_seq = (uint8_t)(250 + li), .opcode = 0xC3,
                                .arg_bits = arg_bits, .n_arg_bits = 8 * (n_data - 1)};
            static uint8_t cltu[ULK_CLTU_MAX_OCTETS];
            size_t n_cltu;
            assert_int_equal(ulk_ccsds_command_cltu(&tc, &c, cltu, sizeof cltu, &n_cltu), ULK_OK);
            g_st.n = 0;
            st_idle(&g_st, 8 * 16);
            size_t cltu_at = g_st.n;
            st_octets(&g_st, cltu, n_cltu);
            st_idle(&g_st, 8);
            assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res), ULK_OK);
            if (g_res.verdict != ULK_CLTU_ACCEPTED)
                fail_msg("opt %d len %zu: %s (%s)", opt, n_data, ulk_cltu_verdict_str(g_res.verdict), g_res.reason);
            assert_int_equal(g_res.start_bit, cltu_at);
            assert_int_equal(g_res.end_bit, cltu_at + 8 * n_cltu);
            assert_int_equal(g_res.tail_exact, 1);
            assert_int_equal(g_res.n_corrected, 0);
            assert_int_equal(g_res.packet_hdr.apid, c.apid);
            assert_int_equal(g_res.packet_hdr.seq_count, c.seq_count);
            assert_int_equal(g_res.frame_hdr.bypass, r.service == ULK_TC_EXPEDITED);
            assert_int_equal(g_res.frame_hdr.seq_num, r.service == ULK_TC_EXPEDITED ? 0 : c.frame_seq);
            assert_int_equal(g_res.frame_hdr.scid, 0x3C1);
            assert_int_equal(g_res.frame_hdr.vcid, 0x22);
            if (r.segment) assert_int_equal(g_res.map_id, 0x11);
            assert_int_equal(g_res.n_data, n_data);
            assert_int_equal(g_res.data[0], 0xC3);
            assert_memory_equal(g_res.data + 1, args, n_data - 1);
            /* Nothing more in the stream. */
            assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, g_st.n, g_res.end_bit, &g_res), ULK_OK);
            assert_int_equal(g_res.verdict, ULK_CLTU_NO_START);
            n_cases++;
        }
        /* One data octet more than the largest does not fit a frame. */
        ulk_tc_command big = {.apid = 1, .opcode = 1, .arg_bits = NULL, .n_arg_bits = 0};
        static uint8_t zeros[8 * 1024];
        big.arg_bits = zeros;
        big.n_arg_bits = 8 * ulk_ccsds_max_data_octets(&tc) - 7;
        static uint8_t cl[ULK_CLTU_MAX_OCTETS];
        size_t nc;
        assert_int_equal(ulk_ccsds_command_cltu(&tc, &big, cl, sizeof cl, &nc), ULK_ELIMIT);
    }
    assert_int_equal(n_cases, 320);
}

/* A CLTU of a command with n_data data octets in g_st (acquisition, CLTU, 8 idle bits). */
static size_t make_stream(const ulk_ccsds_tc *tc, size_t n_data, uint8_t *cltu, size_t *n_cltu)
{
    uint8_t args[64], arg_bits[512];
    rnd_fill(args, n_data - 1);
    ulk_octets_to_bits(args, n_data - 1, arg_bits);
    ulk_tc_command c = {.apid = 0x2B, .seq_count = 7, .frame_seq = 3, .opcode = 0x40,
                        .arg_bits = arg_bits, .n_arg_bits = 8 * (n_data - 1)};
    assert_int_equal(ulk_ccsds_command_cltu(tc, &c, cltu, ULK_CLTU_MAX_OCTETS, n_cltu), ULK_OK);
    g_st.n = 0;
    st_idle(&g_st, 8 * 16);
    size_t at = g_st.n;
    st_octets(&g_st, cltu, *n_cltu);
    st_idle(&g_st, 8);
    return at;
}

static void test_cltu_sec_corrects_one_error_per_codeblock(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    static uint8_t cltu[ULK_CLTU_MAX_OCTETS];
    size_t n_cltu;
    for (int trial = 0; trial < 50; trial++) {
        size_t at = make_stream(&tc, 40, cltu, &n_cltu);
        int n_cb = (int)(n_cltu - 10) / 8, n_coded_errors = 0;
        for (int k = 0; k < n_cb; k++) {
            int p = (int)(rnd() % 64);
            g_st.bits[at + 16 + 64 * (size_t)k + (size_t)p] ^= 1;
            n_coded_errors += p < 63;
        }
        assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res), ULK_OK);
        if (g_res.verdict != ULK_CLTU_ACCEPTED) fail_msg("trial %d: %s", trial, g_res.reason);
        assert_int_equal(g_res.n_corrected, n_coded_errors);
        assert_int_equal(g_res.n_codeblocks, n_cb);
    }
}

/* P(X <= k) for X ~ binomial(n, p), summed with log-gamma terms. */
static double binom_cdf(int k, int n, double p)
{
    double c = 0;
    for (int i = 0; i <= k && i <= n; i++)
        c += exp(lgamma(n + 1.0) - lgamma(i + 1.0) - lgamma(n - i + 1.0) + i * log(p) + (n - i) * log1p(-p));
    return c;
}

/* Smallest k with P(X <= k) >= conf. */
static int binom_quantile(int n, double p, double conf)
{
    double c = 0;
    for (int k = 0; k <= n; k++) {
        c += exp(lgamma(n + 1.0) - lgamma(k + 1.0) - lgamma(n - k + 1.0) + k * log(p) + (n - k) * log1p(-p));
        if (c >= conf) return k;
    }
    return n;
}

/* CLTU acceptance on a binary symmetric channel against the binomial model. Bits of the start
 * sequence and of the codeblocks are flipped independently with probability q (fixed seed;
 * acquisition, tail and idle left clean so that only the model's terms act). A CLTU is
 * accepted exactly when the start sequence has at most start_errors errors (binomial over 16
 * bits) and every codeblock decodes: SEC, at most one error among its 63 code bits; TED, none
 * (the filler bit is outside the code; CCSDS 231.0-B-4 section 3, from memory). A codeblock
 * with more errors is rejected or miscorrected, and a miscorrected one fails the FECF (a wrong
 * frame passes with probability about 2^-16, below what 3000 trials can see). So
 *     P(accept) = B(start_errors; 16, q) * [ (1-q)^63 + (SEC ? 63 q (1-q)^62 : 0) ]^n_cb
 * and the number accepted in N trials lies within the 0.05 % and 99.95 % binomial quantiles
 * of that P (99.9 % two-sided). Every accepted CLTU carries the frame that was sent. */
static void cltu_bsc_case(ulk_bch_mode mode, int start_errors, double q, int trials)
{
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    tc.correction = mode;
    tc.start_errors = start_errors;
    static uint8_t cltu[ULK_CLTU_MAX_OCTETS], sent[ULK_TCF_MAX_OCTETS];
    size_t n_cltu, n_sent;
    size_t at = make_stream(&tc, 20, cltu, &n_cltu);
    const int n_cb = (int)(n_cltu - 10) / 8;
    assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res), ULK_OK);
    if (g_res.verdict != ULK_CLTU_ACCEPTED) fail_msg("the clean CLTU is not accepted: %s", g_res.reason);
    n_sent = g_res.n_frame;
    memcpy(sent, g_res.frame, n_sent);
    static uint8_t clean[8 * (16 * 8 + ULK_CLTU_MAX_OCTETS + 8)];
    const size_t n_bits = g_st.n;
    memcpy(clean, g_st.bits, n_bits);
    const uint32_t thr = (uint32_t)(q * 2147483648.0); /* rnd() gives 31 bits */
    int accepted = 0;
    for (int t = 0; t < trials; t++) {
        memcpy(g_st.bits, clean, n_bits);
        for (size_t b = at; b < at + 16 + 64 * (size_t)n_cb; b++)
            if (rnd() < thr) g_st.bits[b] ^= 1;
        assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, n_bits, 0, &g_res), ULK_OK);
        if (g_res.verdict == ULK_CLTU_ACCEPTED) {
            if (g_res.n_frame != n_sent || memcmp(g_res.frame, sent, n_sent))
                fail_msg("trial %d: an accepted CLTU carries a frame that was not sent", t);
            accepted++;
        }
    }
    double q_eff = (double)thr / 2147483648.0;
    double pc = pow(1 - q_eff, 63) + (mode == ULK_BCH_SEC ? 63 * q_eff * pow(1 - q_eff, 62) : 0);
    double p = binom_cdf(start_errors, 16, q_eff) * pow(pc, n_cb);
    int lo = binom_quantile(trials, p, 0.0005), hi = binom_quantile(trials, p, 0.9995);
    fprintf(stderr, "CLTU on a BSC, %s, start_errors %d, q %g, %d codeblocks: %d of %d accepted, model %.1f, bounds [%d, %d]\n",
            mode == ULK_BCH_SEC ? "sec" : "ted", start_errors, q, n_cb, accepted, trials, p * trials, lo, hi);
    if (accepted < lo || accepted > hi)
        fail_msg("%s, q %g: %d of %d CLTUs accepted, outside the binomial bounds [%d, %d] of P = %.4f",
                 mode == ULK_BCH_SEC ? "sec" : "ted", q, accepted, trials, lo, hi, p);
}

static void test_cltu_acceptance_binomial(void **state)
{
    (void)state;
    cltu_bsc_case(ULK_BCH_SEC, 1, 0.01, 3000);
    cltu_bsc_case(ULK_BCH_SEC, 0, 0.004, 3000);
    cltu_bsc_case(ULK_BCH_TED, 0, 0.003, 3000);
}

static void test_cltu_rejections(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    static uint8_t cltu[ULK_CLTU_MAX_OCTETS];
    size_t n_cltu, at;

    /* TED: one error in codeblock 2 rejects the CLTU there. */
    tc.correction = ULK_BCH_TED;
    at = make_stream(&tc, 40, cltu, &n_cltu);
    g_st.bits[at + 16 + 64 * 2 + 10] ^= 1;
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_CODEBLOCK);
    assert_int_equal(g_res.rejected_codeblock, 2);
    assert_int_equal(g_res.tail_exact, 0);
    assert_non_null(strstr(g_res.reason, "codeblock 2"));
    assert_int_equal(g_res.end_bit, at + 16 + 64 * 3);

    /* SEC: two errors in codeblock 1. */
    tc.correction = ULK_BCH_SEC;
    at = make_stream(&tc, 40, cltu, &n_cltu);
    g_st.bits[at + 16 + 64 + 3] ^= 1;
    g_st.bits[at + 16 + 64 + 40] ^= 1;
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_CODEBLOCK);
    assert_int_equal(g_res.rejected_codeblock, 1);
    assert_int_equal(g_res.cb_verdict[0], ULK_CB_CLEAN);
    assert_int_equal(g_res.cb_verdict[1], ULK_CB_REJECTED);

    /* Start sequence with one error: refused with start_errors 0, found with 1; two
     * errors are refused with 1. */
    at = make_stream(&tc, 10, cltu, &n_cltu);
    g_st.bits[at + 5] ^= 1;
    tc.start_errors = 0;
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_NO_START);
    tc.start_errors = 1;
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
    assert_int_equal(g_res.start_bit, at);
    assert_int_equal(g_res.start_errors, 1);
    g_st.bits[at + 12] ^= 1;
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_NO_START);
    tc.start_errors = 0;

    /* A damaged tail, or none at all (idle follows), still ends a complete frame. */
    for (int p = 0; p < 64; p++) {
        at = make_stream(&tc, 20, cltu, &n_cltu);
        g_st.bits[at + 8 * n_cltu - 64 + (size_t)p] ^= 1;
        ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
        assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
        assert_int_equal(g_res.tail_exact, 0);
        assert_int_equal(g_res.end_bit, at + 8 * n_cltu);
    }
    at = make_stream(&tc, 20, cltu, &n_cltu);
    ulk_cltu_idle_bits(g_st.bits + at + 8 * n_cltu - 64, 64);
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
    /* A tail damaged into a valid codeblock: the decoder runs on past the frame, ignores
     * the extra data, and the next search starts where the tail belonged. */
    at = make_stream(&tc, 20, cltu, &n_cltu);
    {
        uint8_t info[7] = {1, 2, 3, 4, 5, 6, 7}, cb[8];
        ulk_bch_encode(info, cb);
        ulk_octets_to_bits(cb, 8, g_st.bits + at + 8 * n_cltu - 64);
        st_idle(&g_st, 64);
    }
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
    assert_int_equal(g_res.n_codeblocks, (int)(n_cltu - 10) / 8 + 1);
    assert_int_equal(g_res.end_bit, at + 8 * n_cltu);
    /* ... also when the bits end right after it (end of a recording). */
    ulk_cltu_decode(&tc, g_st.bits, at + 8 * n_cltu, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
    assert_int_equal(g_res.end_bit, at + 8 * n_cltu);

    /* The bits end where the tail begins: the frame is complete, so no loss. */
    at = make_stream(&tc, 20, cltu, &n_cltu);
    ulk_cltu_decode(&tc, g_st.bits, at + 8 * n_cltu - 64, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
    assert_int_equal(g_res.end_bit, at + 8 * n_cltu - 64);
    /* Truncated: the bits end inside the frame's last codeblock; end_bit says where to retry. */
    ulk_cltu_decode(&tc, g_st.bits, at + 8 * n_cltu - 65, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_TRUNCATED);
    assert_int_equal(g_res.end_bit, at);
    ulk_cltu_decode(&tc, g_st.bits, at + 100, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_TRUNCATED);

    /* Wrong spacecraft: frame header. */
    make_stream(&tc, 20, cltu, &n_cltu);
    ulk_ccsds_tc other = tc;
    other.spacecraft_id = 5;
    ulk_cltu_decode(&other, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_FRAME_HEADER);
    assert_int_equal(g_res.frame_verdict, ULK_TCF_SCID);
    assert_non_null(strstr(g_res.reason, "spacecraft id"));
    /* Decoder expects no FECF where there is one: the packet does not fill the frame. */
    other = tc;
    other.fecf = 0;
    ulk_cltu_decode(&other, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_PACKET);
    assert_int_equal(g_res.packet_verdict, ULK_SPP_LENGTH);
    /* Decoder not derandomizing: the header is noise. */
    other = tc;
    other.randomize = 0;
    ulk_cltu_decode(&other, g_st.bits, g_st.n, 0, &g_res);
    assert_int_not_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
}

/* Frames that are valid codeblock data but wrong inside, coded by hand. */
static void test_cltu_bad_frames(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    uint8_t pkt[] = {0x11, 0x55, 0xC0, 0x2A, 0x00, 0x02, 0x01, 0x02, 0x03};
    uint8_t f[64], c[64];
    static uint8_t cltu[ULK_CLTU_MAX_OCTETS];
    size_t n_f, n_c;
    assert_int_equal(ulk_tcf_build(&tc, 0, pkt, sizeof pkt, f, sizeof f, &n_f), ULK_OK);

    /* FECF: a data bit changed after the FECF was computed. */
    memcpy(c, f, n_f);
    c[8] ^= 0x04;
    assert_int_equal(ulk_cltu_build(&tc, c, n_f, cltu, sizeof cltu, &n_c), ULK_OK);
    g_st.n = 0;
    st_idle(&g_st, 64);
    st_octets(&g_st, cltu, n_c);
    st_idle(&g_st, 8);
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_FECF);
    assert_non_null(strstr(g_res.reason, "FECF"));

    /* Frame length field larger than the CLTU holds (FECF left out so it is the length). */
    ulk_ccsds_tc nofecf = tc;
    nofecf.fecf = 0;
    assert_int_equal(ulk_tcf_build(&nofecf, 0, pkt, sizeof pkt, f, sizeof f, &n_f), ULK_OK);
    memcpy(c, f, n_f);
    c[3] = (uint8_t)(c[3] + 20);
    assert_int_equal(ulk_cltu_build(&nofecf, c, n_f, cltu, sizeof cltu, &n_c), ULK_OK);
    g_st.n = 0;
    st_octets(&g_st, cltu, n_c);
    st_idle(&g_st, 8);
    ulk_cltu_decode(&nofecf, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_FRAME_HEADER);
    assert_int_equal(g_res.frame_verdict, ULK_TCF_LENGTH);

    /* A packet with the idle APID inside a valid frame. */
    uint8_t idle_pkt[] = {0x17, 0xFF, 0xC0, 0x00, 0x00, 0x00, 0x00};
    assert_int_equal(ulk_tcf_build(&tc, 0, idle_pkt, sizeof idle_pkt, f, sizeof f, &n_f), ULK_OK);
    assert_int_equal(ulk_cltu_build(&tc, f, n_f, cltu, sizeof cltu, &n_c), ULK_OK);
    g_st.n = 0;
    st_octets(&g_st, cltu, n_c);
    st_idle(&g_st, 8);
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_PACKET);
    assert_int_equal(g_res.packet_verdict, ULK_SPP_IDLE_APID);

    /* An empty CLTU: start sequence straight into the tail. */
    const uint8_t empty[10] = {0xEB, 0x90, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0xC5, 0x79};
    g_st.n = 0;
    st_octets(&g_st, empty, 10);
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, 0, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_FRAME_HEADER);
    assert_int_equal(g_res.frame_verdict, ULK_TCF_TOO_SHORT);
    assert_int_equal(g_res.tail_exact, 1);
    assert_int_equal(g_res.end_bit, 80);
}

static void stream_of_three(int damage_tail)
{
    size_t first_tail = 0;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    tc.service = ULK_TC_SEQUENCE_CONTROLLED;
    tc.start_errors = 1;
    g_st.n = 0;
    st_idle(&g_st, 8 * 16);
    for (int i = 0; i < 3; i++) {
        uint8_t bits[5] = {1, 0, 0, 1, (uint8_t)(i & 1)};
        ulk_tc_command c = {.apid = 0x300, .seq_count = (uint16_t)i, .frame_seq = (uint8_t)(254 + i),
                            .opcode = (uint32_t)(0x10 + i), .arg_bits = bits, .n_arg_bits = 5};
        static uint8_t cltu[ULK_CLTU_MAX_OCTETS];
        size_t n;
        assert_int_equal(ulk_ccsds_command_cltu(&tc, &c, cltu, sizeof cltu, &n), ULK_OK);
        st_octets(&g_st, cltu, n);
        if (i == 0) first_tail = g_st.n - 64;
        st_idle(&g_st, 8);
    }
    st_idle(&g_st, 64);
    size_t from = 0;
    if (damage_tail) {
        /* The first CLTU's tail turned into a valid codeblock: the decoder runs on into the
         * one idle octet and the next CLTU, but must still find that CLTU's start. */
        uint8_t info[7] = {9, 8, 7, 6, 5, 4, 3}, cb[8];
        ulk_bch_encode(info, cb);
        ulk_octets_to_bits(cb, 8, g_st.bits + first_tail);
    }
    for (int i = 0; i < 3; i++) {
        ulk_cltu_decode(&tc, g_st.bits, g_st.n, from, &g_res);
        assert_int_equal(g_res.verdict, ULK_CLTU_ACCEPTED);
        assert_int_equal(g_res.packet_hdr.seq_count, i);
        assert_int_equal(g_res.frame_hdr.seq_num, (uint8_t)(254 + i));
        assert_int_equal(g_res.data[0], 0x10 + i);
        assert_int_equal(g_res.data[1], 0x90 | (i & 1) << 3);
        if (damage_tail && i == 0) { /* it did run on past the frame's 3 codeblocks */
            assert_int_equal(g_res.tail_exact, 0);
            assert_true(g_res.n_codeblocks >= 4);
        }
        assert_true(g_res.end_bit > from);
        from = g_res.end_bit;
    }
    ulk_cltu_decode(&tc, g_st.bits, g_st.n, from, &g_res);
    assert_int_equal(g_res.verdict, ULK_CLTU_NO_START);
    assert_int_equal(g_res.end_bit, g_st.n - 15);
}

static void test_cltu_stream_of_three(void **state)
{
    (void)state;
    stream_of_three(0);
}

static void test_cltu_stream_damaged_tail_keeps_next(void **state)
{
    (void)state;
    stream_of_three(1);
}

/* Random and half-valid bit streams: the decoder ends, never reads out of bounds, and
 * always makes progress. */
static void test_cltu_decode_hostile_streams(void **state)
{
    (void)state;
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    tc.start_errors = 1;
    for (int t = 0; t < 300; t++) {
        size_t n = rnd() % 4000;
        for (size_t i = 0; i < n; i++) g_st.bits[i] = (uint8_t)(rnd() & 1);
        /* plant start sequences so that codeblock decoding runs */
        for (int k = 0; k < 4 && n > 16; k++) {
            size_t at = rnd() % (n - 15);
            for (int b = 0; b < 16; b++) g_st.bits[at + (size_t)b] = (uint8_t)(0xEB90u >> (15 - b) & 1);
        }
        tc.correction = (ulk_bch_mode)(t & 1);
        size_t from = 0;
        for (int guard = 0; guard < 10000; guard++) {
            assert_int_equal(ulk_cltu_decode(&tc, g_st.bits, n, from, &g_res), ULK_OK);
            assert_true(g_res.verdict <= ULK_CLTU_PACKET);
            assert_true(g_res.end_bit <= n || n < 16);
            if (g_res.verdict == ULK_CLTU_NO_START || g_res.verdict == ULK_CLTU_TRUNCATED) break;
            assert_true(g_res.end_bit > from);
            from = g_res.end_bit;
        }
    }
    assert_int_equal(ulk_cltu_decode(&tc, NULL, 0, 0, &g_res), ULK_EINVAL);
    assert_int_equal(ulk_cltu_decode(NULL, g_st.bits, 10, 0, &g_res), ULK_EINVAL);
}

/* ---- frames for the python3-crcmod cross-check ---- */

/* For tests/py/test_ccsds_bch.py: ULK_PRINT_CODEBLOCKS codeblocks from the library's encoder,
 * "cb <7 information octets> <8 codeblock octets>" in hex: the all-zero and all-one words,
 * each single information bit set (56), then random words. */
#define ULK_PRINT_CODEBLOCKS 200
static int print_codeblocks(void)
{
    for (int i = 0; i < ULK_PRINT_CODEBLOCKS; i++) {
        uint8_t info[ULK_CB_INFO_OCTETS], cb[ULK_CB_OCTETS];
        memset(info, i == 1 ? 0xFF : 0, sizeof info);
        if (i >= 2 && i < 58) flip(info, i - 2);
        if (i >= 58) rnd_fill(info, sizeof info);
        ulk_bch_encode(info, cb);
        printf("cb ");
        for (int k = 0; k < ULK_CB_INFO_OCTETS; k++) printf("%02x", info[k]);
        printf(" ");
        for (int k = 0; k < ULK_CB_OCTETS; k++) printf("%02x", cb[k]);
        printf("\n");
    }
    return 0;
}

static int print_frames(void)
{
    for (int i = 0; i < 40; i++) {
        ulk_ccsds_tc tc;
        ulk_ccsds_tc_default(&tc);
        tc.spacecraft_id = (uint16_t)(rnd() % 1024);
        tc.virtual_channel = (uint8_t)(rnd() % 64);
        tc.service = (ulk_tc_service)(i & 1);
        tc.segment_header = i >> 1 & 1;
        tc.map_id = (uint8_t)(rnd() % 64);
        uint8_t data[1024], frame[1024];
        size_t n_data = i == 39 ? 1024 - 5 - 1 - 2 : 1 + rnd() % 200, n;
        rnd_fill(data, n_data);
        uint8_t ns = (uint8_t)rnd();
        if (ulk_tcf_build(&tc, ns, data, n_data, frame, sizeof frame, &n) < 0) return 1;
        printf("frame scid=%u vcid=%u bypass=%d ns=%u seg=%d map=%u ",
               (unsigned)tc.spacecraft_id, (unsigned)tc.virtual_channel,
               tc.service == ULK_TC_EXPEDITED, tc.service == ULK_TC_EXPEDITED ? 0u : (unsigned)ns,
               tc.segment_header, (unsigned)tc.map_id);
        for (size_t k = 0; k < n; k++) printf("%02x", frame[k]);
        printf("\n");
    }
    for (int i = 0; i < 40; i++) {
        uint8_t d[300];
        size_t n = rnd() % 300;
        rnd_fill(d, n);
        printf("crc %04x ", ulk_tcf_crc16(d, n));
        for (size_t k = 0; k < n; k++) printf("%02x", d[k]);
        printf("\n");
    }
    return 0;
}

int main(int argc, char **argv)
{
    if (argc > 1 && strcmp(argv[1], "--print-frames") == 0) return print_frames();
    if (argc > 1 && strcmp(argv[1], "--print-codeblocks") == 0) return print_codeblocks();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_randomizer_first_40_bits),
        cmocka_unit_test(test_randomizer_polynomial),
        cmocka_unit_test(test_randomize_is_its_inverse),
        cmocka_unit_test(test_bch_generator_divides_x63_minus_1),
        cmocka_unit_test(test_bch_encode_matches_slow_encoder),
        cmocka_unit_test(test_bch_sec_corrects_every_single_error),
        cmocka_unit_test(test_bch_sec_detects_every_double_error),
        cmocka_unit_test(test_bch_ted_detects_every_one_two_three_bit_error),
        cmocka_unit_test(test_tail_sequence_is_not_correctable),
        cmocka_unit_test(test_fecf_check_value),
        cmocka_unit_test(test_spp_header_layout),
        cmocka_unit_test(test_tcf_header_layout),
        cmocka_unit_test(test_frame_build_layout),
        cmocka_unit_test(test_command_data_field),
        cmocka_unit_test(test_spp_parse_verdicts),
        cmocka_unit_test(test_tcf_parse_verdicts),
        cmocka_unit_test(test_tc_check_names_the_field),
        cmocka_unit_test(test_cltu_layout),
        cmocka_unit_test(test_idle_and_start_sequence),
        cmocka_unit_test(test_cltu_round_trip_every_option),
        cmocka_unit_test(test_cltu_sec_corrects_one_error_per_codeblock),
        cmocka_unit_test(test_cltu_acceptance_binomial),
        cmocka_unit_test(test_cltu_rejections),
        cmocka_unit_test(test_cltu_bad_frames),
        cmocka_unit_test(test_cltu_stream_of_three),
        cmocka_unit_test(test_cltu_stream_damaged_tail_keeps_next),
        cmocka_unit_test(test_cltu_decode_hostile_streams),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
