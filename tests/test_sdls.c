/* tests/test_sdls.c - Space Data Link Security on TC frames (ulk/sdls.h).
 *
 * Outside sources, named beside each check:
 *   - AES-256-GCM: test cases 13-18 of D. McGrew and J. Viega, "The Galois/Counter Mode of
 *     Operation (GCM)" (revised submission to NIST, 2005), Appendix B, the AES-256 cases; the
 *     mode is standardised as NIST SP 800-38D. The values below were taken from several
 *     independent public test suites quoting that appendix, which agree with each other (the
 *     document itself was not at hand); tests/py/test_sdls_frames.py checks the same six with
 *     python3-cryptography, a second implementation.
 *   - frame layout: CCSDS 355.0-B-1 sections 3.2 and 3.3 (security header after the primary and segment headers,
 *     trailer before the FECF; section numbers from memory) and CCSDS 232.0-B-4 section 4.1.4 (FECF, from memory).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cmocka.h>

#include "ulk/ccsds.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/sdls.h"
#include "ulk/tc_decode.h"
#include "ulk/upload.h"

static size_t unhex(const char *s, uint8_t *out)
{
    size_t n = strlen(s) / 2;
    for (size_t i = 0; i < n; i++) {
        unsigned v;
        sscanf(s + 2 * i, "%2x", &v);
        out[i] = (uint8_t)v;
    }
    return n;
}

/* ---- GCM test vectors (McGrew & Viega, Appendix B, test cases 13-18) ---- */

#define K_ZERO "0000000000000000000000000000000000000000000000000000000000000000"
#define K_FEFF "feffe9928665731c6d6a8f9467308308feffe9928665731c6d6a8f9467308308"
#define P_64                                                                                                        \
    "d9313225f88406e5a55909c5aff5269a86a7a9531534f7da2e4c303d8a318a721c3c0c95956809532fcf0e2449a6b525b16aedf5aa0de657" \
    "ba637b391aafd255"
#define P_60                                                                                                        \
    "d9313225f88406e5a55909c5aff5269a86a7a9531534f7da2e4c303d8a318a721c3c0c95956809532fcf0e2449a6b525b16aedf5aa0de657" \
    "ba637b39"
#define A_20 "feedfacedeadbeeffeedfacedeadbeefabaddad2"

typedef struct {
    const char *name, *key, *iv, *pt, *aad, *ct, *tag;
} gcm_case;

static const gcm_case g_gcm[] = {
    {"test case 13", K_ZERO, "000000000000000000000000", "", "", "", "530f8afbc74536b9a963b4f1c4cb738b"},
    {"test case 14", K_ZERO, "000000000000000000000000", "00000000000000000000000000000000", "",
     "cea7403d4d606b6e074ec5d3baf39d18", "d0d1c8a799996bf0265b98b5d48ab919"},
    {"test case 15", K_FEFF, "cafebabefacedbaddecaf888", P_64, "",
     "522dc1f099567d07f47f37a32a84427d643a8cdcbfe5c0c97598a2bd2555d1aa8cb08e48590dbb3da7b08b1056828838c5f61e6393ba7a0a"
     "bcc9f662898015ad",
     "b094dac5d93471bdec1a502270e3cc6c"},
    {"test case 16", K_FEFF, "cafebabefacedbaddecaf888", P_60, A_20,
     "522dc1f099567d07f47f37a32a84427d643a8cdcbfe5c0c97598a2bd2555d1aa8cb08e48590dbb3da7b08b1056828838c5f61e6393ba7a0a"
     "bcc9f662",
     "76fc6ece0f4e1768cddf8853bb2d551b"},
    {"test case 17", K_FEFF, "cafebabefacedbad", P_60, A_20,
     "c3762df1ca787d32ae47c13bf19844cbaf1ae14d0b976afac52ff7d79bba9de0feb582d33934a4f0954cc2363bc73f7862ac430e64abe499"
     "f47c9b1f",
     "3a337dbf46a792c45e454913fe2ea8f2"},
    {"test case 18", K_FEFF,
     "9313225df88406e555909c5aff5269aa6a7a9538534f7da1e4c303d2a318a728c3c0c95156809539fcf0e2429a6b525416aedbf5a0de6a57"
     "a637b39b",
     P_60, A_20,
     "5a8def2f0c9e53f1f75d7853659e2a20eeb2b22aafde6419a058ab4f6f746bf40fc0c3b780f244452da3ebf1c5d82cdea2418997200ef82e"
     "44ae7e3f",
     "a44a8266ee1c8eb0c8b5d4cf5ae9f19a"},
};

static void test_gcm_vectors(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof g_gcm / sizeof g_gcm[0]; i++) {
        const gcm_case *g = &g_gcm[i];
        uint8_t key[32], iv[64], pt[64], aad[20], ct[64], tag[16], want_ct[64], want_tag[16], back[64];
        unhex(g->key, key);
        size_t n_iv = unhex(g->iv, iv), n_pt = unhex(g->pt, pt), n_aad = unhex(g->aad, aad);
        unhex(g->ct, want_ct);
        unhex(g->tag, want_tag);
        int rc = ulk_aes256_gcm_seal(key, iv, n_iv, aad, n_aad, pt, n_pt, ct, tag, 16);
        if (rc) fail_msg("%s: seal failed (%d)", g->name, rc);
        if (memcmp(ct, want_ct, n_pt)) fail_msg("%s: ciphertext differs from the published one", g->name);
        if (memcmp(tag, want_tag, 16)) fail_msg("%s: tag differs from the published one", g->name);
        if (ulk_aes256_gcm_open(key, iv, n_iv, aad, n_aad, want_ct, n_pt, want_tag, 16, back) != 1)
            fail_msg("%s: the published tag does not verify", g->name);
        if (memcmp(back, pt, n_pt)) fail_msg("%s: decryption does not give the plaintext back", g->name);
        /* a shorter tag is the leading octets of the full one */
        if (ulk_aes256_gcm_open(key, iv, n_iv, aad, n_aad, want_ct, n_pt, want_tag, 12, back) != 1)
            fail_msg("%s: the 96-bit truncated tag does not verify", g->name);
        uint8_t bad[16];
        memcpy(bad, want_tag, 16);
        bad[i % 16] ^= 0x01;
        if (ulk_aes256_gcm_open(key, iv, n_iv, aad, n_aad, want_ct, n_pt, bad, 16, back) != 0)
            fail_msg("%s: a tag with one bit changed verifies", g->name);
        if (n_pt) {
            uint8_t ct2[64];
            memcpy(ct2, want_ct, n_pt);
            ct2[n_pt - 1] ^= 0x80;
            if (ulk_aes256_gcm_open(key, iv, n_iv, aad, n_aad, ct2, n_pt, want_tag, 16, back) != 0)
                fail_msg("%s: a ciphertext with one bit changed verifies", g->name);
        }
    }
}

/* ---- key file ---- */

#define KEY_A "00112233445566778899aabbccddeeff00112233445566778899aabbccddeeff"
#define KEY_B "ffeeddccbbaa99887766554433221100ffeeddccbbaa99887766554433221100"

typedef struct {
    const char *name, *text;
    int line, col;
    const char *fragment; /* in the message */
} key_row;

static const key_row g_key_rows[] = {
    {"short key", "# demo\nops 0011\n", 2, 5, "expected 64 hex digits (AES-256), found 4"},
    {"not hex", "ops 0011223344556677889Xaabbccddeeff00112233445566778899aabbccddeeff\n", 1, 24, "is not a hex digit"},
    {"twice", "ops " KEY_A "\nops " KEY_B "\n", 2, 1, "appears twice"},
    {"trailing text", "ops " KEY_A " spare\n", 1, 70, "unexpected text after the key"},
    {"bad name", "o/ps " KEY_A "\n", 1, 1, "a key name is letters"},
    {"no key", "# nothing\n\n", 0, 0, "no key in the key file"},
};

static void test_key_file_rows(void **state)
{
    (void)state;
    for (size_t i = 0; i < sizeof g_key_rows / sizeof g_key_rows[0]; i++) {
        const key_row *r = &g_key_rows[i];
        ulk_diag *d = ulk_diag_create();
        ulk_sdls_keys *k = NULL;
        int rc = ulk_sdls_keys_load_mem(r->text, strlen(r->text), "ops.keys", &k, d);
        const ulk_finding *f = ulk_diag_first_error(d);
        if (rc != ULK_EPARSE || k || !f) fail_msg("%s: expected a parse error, got %d", r->name, rc);
        if (f->line != r->line || f->col != r->col)
            fail_msg("%s: error at %d:%d, expected %d:%d (%s)", r->name, f->line, f->col, r->line, r->col, f->msg);
        if (!strstr(f->msg, r->fragment)) fail_msg("%s: message '%s' lacks '%s'", r->name, f->msg, r->fragment);
        /* never key material in a message: no run of 8 hex digits of either key */
        if (strstr(f->msg, "00112233") || strstr(f->msg, "ffeeddcc") || strstr(f->msg, "0011223344"))
            fail_msg("%s: the message quotes key material: %s", r->name, f->msg);
        ulk_diag_destroy(d);
    }
    ulk_diag *d = ulk_diag_create();
    ulk_sdls_keys *k = NULL;
    const char *good = "# two keys\n  ops " KEY_A "\nspare-2 " KEY_B "  \n\n";
    assert_int_equal(ulk_sdls_keys_load_mem(good, strlen(good), "ops.keys", &k, d), 0);
    if (ulk_sdls_keys_count(k) != 2 || !ulk_sdls_keys_has(k, "ops") || !ulk_sdls_keys_has(k, "spare-2") ||
        ulk_sdls_keys_has(k, "other"))
        fail_msg("a good key file: expected keys ops and spare-2");
    ulk_sdls_keys_destroy(k);
    ulk_sdls_keys_destroy(NULL);
    ulk_diag_destroy(d);
}

static void test_key_file_mode(void **state)
{
    (void)state;
    char path[] = "/tmp/ulk_test_keys_XXXXXX";
    int fd = mkstemp(path);
    assert_true(fd >= 0);
    const char *text = "ops " KEY_A "\n";
    assert_int_equal(write(fd, text, strlen(text)), (int)strlen(text));
    close(fd);
    static const struct { unsigned mode; int ok; } rows[] = {{0600, 1}, {0400, 1}, {0644, 0}, {0640, 0}, {0604, 0}, {0620, 0}};
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        chmod(path, rows[i].mode);
        ulk_diag *d = ulk_diag_create();
        ulk_sdls_keys *k = NULL;
        int rc = ulk_sdls_keys_load(path, &k, d);
        if (rows[i].ok) {
            if (rc || !k) fail_msg("mode %04o: a private key file is refused (%d)", rows[i].mode, rc);
        } else {
            char want[32];
            snprintf(want, sizeof want, "mode %04o", rows[i].mode);
            const ulk_finding *f = ulk_diag_first_error(d);
            if (rc != ULK_EIO || k || !f || !strstr(f->msg, want) || !strstr(f->msg, "group or others"))
                fail_msg("mode %04o: expected a refusal naming the mode, got %d (%s)", rows[i].mode, rc, f ? f->msg : "");
        }
        ulk_sdls_keys_destroy(k);
        ulk_diag_destroy(d);
    }
    unlink(path);
}

/* ---- frames ---- */

static ulk_sdls_keys *keys_of(const char *text)
{
    ulk_sdls_keys *k = NULL;
    if (ulk_sdls_keys_load_mem(text, strlen(text), "mem", &k, NULL)) fail_msg("keys_of: bad key text");
    return k;
}

static void sa_make(ulk_sdls_sa *sa, ulk_sdls_service sv)
{
    ulk_sdls_sa_default(sa);
    sa->enabled = 1;
    sa->spi = 0x0107;
    snprintf(sa->key, sizeof sa->key, "ops");
    sa->service = sv;
    sa->window = 4;
}

/* A 5 + 1 + 14 + 9 + 16 + 2 = 47-octet frame: header, segment header, SPI + IV, a 9-octet
 * packet, MAC, FECF. */
static size_t frame_make(const ulk_ccsds_tc *tc, uint8_t *f)
{
    static const uint8_t pkt[9] = {0x18, 0x42, 0xC0, 0x05, 0x00, 0x02, 0x11, 0xAB, 0xC0};
    size_t n = 0;
    if (ulk_tcf_build(tc, 0, pkt, sizeof pkt, f, ULK_TCF_MAX_OCTETS, &n)) fail_msg("frame_make: build failed");
    return n;
}

static void tc_make(ulk_ccsds_tc *tc, const ulk_sdls_sa *sa)
{
    ulk_ccsds_tc_default(tc);
    tc->spacecraft_id = 0x2A5;
    tc->virtual_channel = 3;
    tc->segment_header = 1;
    tc->map_id = 2;
    ulk_sdls_layout(sa, tc);
}

static void test_frame_layout_and_verdicts(void **state)
{
    (void)state;
    for (int svc = 0; svc < 2; svc++) {
        ulk_sdls_sa sa;
        sa_make(&sa, (ulk_sdls_service)svc);
        ulk_ccsds_tc tc;
        tc_make(&tc, &sa);
        ulk_sdls_keys *k = keys_of("ops " KEY_A "\n"), *other = keys_of("ops " KEY_B "\n");
        uint8_t f[ULK_TCF_MAX_OCTETS], plain[ULK_TCF_MAX_OCTETS];
        size_t n = frame_make(&tc, f);
        assert_int_equal(n, 47);
        memcpy(plain, f, n);
        char why[160];
        if (ulk_sdls_protect(&tc, &sa, k, 5, f, n, why, sizeof why)) fail_msg("protect: %s", why);
        /* layout (CCSDS 355.0-B-1 section 3.2, from memory): SPI after the segment header, IV = 4 zero octets + counter */
        static const uint8_t hdr[14] = {0x01, 0x07, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 0, 5};
        if (memcmp(f + 6, hdr, 14)) fail_msg("service %d: security header is not SPI 0x0107, IV counter 5", svc);
        if (memcmp(f, plain, 6)) fail_msg("service %d: the primary and segment headers changed", svc);
        int same = !memcmp(f + 20, plain + 20, 9);
        if (svc == 0 && !same) fail_msg("authentication: the data field must stay in clear");
        if (svc == 1 && same) fail_msg("authenticated-encryption: the data field must be encrypted");
        /* FECF (CCSDS 232.0-B-4 section 4.1.4, from memory) over the whole secured frame */
        assert_int_equal(ulk_tcf_crc16(f, n - 2), (uint16_t)(f[n - 2] << 8 | f[n - 1]));
        ulk_tcf_frame pf;
        ulk_tcf_parse(&tc, f, n, &pf);
        if (pf.verdict != ULK_TCF_OK || pf.n_data != 9 || pf.data != f + 20)
            fail_msg("service %d: the parser does not find the 9-octet data field at octet 20", svc);

        ulk_sdls_rx *rx = NULL;
        assert_int_equal(ulk_sdls_rx_create(&sa, k, NULL, &rx, NULL), 0);
        ulk_sdls_rx_result *res = malloc(sizeof *res);
        assert_int_equal(ulk_sdls_rx_frame(rx, &tc, f, n, res), 0);
        if (res->verdict != ULK_SEC_ACCEPTED || res->n_data != 9 || memcmp(res->data, plain + 20, 9) ||
            res->spi != 0x0107 || res->counter != 5)
            fail_msg("service %d: a good frame is not accepted with its data (%s)", svc, res->reason);
        ulk_sdls_rx_frame(rx, &tc, f, n, res);
        if (res->verdict != ULK_SEC_REPLAYED) fail_msg("service %d: the same frame again is not 'replayed' (%s)", svc, res->reason);
        /* window 4 above the last accepted 5: counter 11 is outside, 9 inside */
        memcpy(f, plain, n);
        ulk_sdls_protect(&tc, &sa, k, 11, f, n, why, sizeof why);
        ulk_sdls_rx_frame(rx, &tc, f, n, res);
        if (res->verdict != ULK_SEC_OUTSIDE_WINDOW) fail_msg("service %d: counter 11 after 5 (window 4) is not outside (%s)", svc, res->reason);
        memcpy(f, plain, n);
        ulk_sdls_protect(&tc, &sa, k, 9, f, n, why, sizeof why);
        ulk_sdls_rx_frame(rx, &tc, f, n, res);
        if (res->verdict != ULK_SEC_ACCEPTED) fail_msg("service %d: counter 9 after 5 (window 4) is refused (%s)", svc, res->reason);
        /* every single-bit change of the protected octets fails authentication */
        for (size_t bit = 0; bit < 8 * (n - 2); bit++) {
            uint8_t g[ULK_TCF_MAX_OCTETS];
            memcpy(g, plain, n);
            ulk_sdls_protect(&tc, &sa, k, 20, g, n, why, sizeof why);
            g[bit / 8] ^= (uint8_t)(0x80u >> (bit % 8));
            ulk_sdls_rx_frame(rx, &tc, g, n, res);
            int spi_bit = bit / 8 == 6 || bit / 8 == 7;
            ulk_security_verdict want = spi_bit ? ULK_SEC_UNKNOWN_SPI : ULK_SEC_AUTH_FAILED;
            if (res->verdict != want)
                fail_msg("service %d: bit %zu changed gives '%s', expected '%s'", svc, bit, ulk_sdls_verdict_str(res->verdict),
                         ulk_sdls_verdict_str(want));
        }
        /* another key: authentication failed */
        memcpy(f, plain, n);
        ulk_sdls_protect(&tc, &sa, other, 10, f, n, why, sizeof why);
        ulk_sdls_rx_frame(rx, &tc, f, n, res);
        if (res->verdict != ULK_SEC_AUTH_FAILED || res->n_data != 0)
            fail_msg("service %d: a frame of another key is not 'authentication failed'", svc);
        /* without keys: secured, not authenticated; the data only when it travels in clear */
        ulk_sdls_frame_read(&tc, &sa, f, n, res);
        if (res->verdict != ULK_SEC_UNCHECKED || res->counter != 10 || res->n_data != (svc == 0 ? 9u : 0u))
            fail_msg("service %d: reading without a key", svc);
        /* a key that is not in the ring */
        ulk_sdls_sa sb = sa;
        snprintf(sb.key, sizeof sb.key, "absent");
        if (ulk_sdls_protect(&tc, &sb, k, 12, f, n, why, sizeof why) != ULK_EINVAL || !strstr(why, "absent"))
            fail_msg("an absent key is not reported by name");
        if (ulk_sdls_protect(&tc, &sa, k, 0, f, n, why, sizeof why) != ULK_EINVAL) fail_msg("counter 0 is accepted");
        free(res);
        ulk_sdls_rx_destroy(rx);
        ulk_sdls_keys_destroy(k);
        ulk_sdls_keys_destroy(other);
    }
}

static void test_sa_check_rows(void **state)
{
    (void)state;
    static const struct { const char *name; int field, value; const char *frag; } rows[] = {
        {"spi 0", 0, 0, "spi"},      {"spi 65535", 0, 65535, "spi"}, {"iv 11", 1, 11, "iv_octets"},
        {"iv 17", 1, 17, "iv_octets"}, {"mac 11", 2, 11, "mac_octets"}, {"mac 17", 2, 17, "mac_octets"},
        {"window 0", 3, 0, "window"},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        ulk_sdls_sa sa;
        sa_make(&sa, ULK_SDLS_AUTHENTICATION);
        if (rows[i].field == 0) sa.spi = (uint16_t)rows[i].value;
        if (rows[i].field == 0 && rows[i].value > 65534) sa.spi = 65535;
        if (rows[i].field == 1) sa.iv_octets = rows[i].value;
        if (rows[i].field == 2) sa.mac_octets = rows[i].value;
        if (rows[i].field == 3) sa.window = (uint32_t)rows[i].value;
        char why[160];
        if (ulk_sdls_sa_check(&sa, why, sizeof why) != ULK_EINVAL || !strstr(why, rows[i].frag))
            fail_msg("%s: not refused naming %s (%s)", rows[i].name, rows[i].frag, why);
    }
}

/* ---- state file ---- */

static void test_state_file(void **state)
{
    (void)state;
    char dir[] = "/tmp/ulk_test_state_XXXXXX";
    assert_non_null(mkdtemp(dir));
    char path[128];
    snprintf(path, sizeof path, "%s/ops.state", dir);
    ulk_sdls_state *s = NULL;
    int created = 0;
    assert_int_equal(ulk_sdls_state_load(path, ULK_SDLS_SEND, &s, &created, NULL), 0);
    if (!created || ulk_sdls_state_value(s, 7) != 1) fail_msg("an absent send state starts at counter 1");
    assert_int_equal(ulk_sdls_state_reserve(s, 7, 2, 5, "x.ulk"), ULK_EINVAL); /* not the next counter */
    assert_int_equal(ulk_sdls_state_reserve(s, 7, 1, 18, "up load.ulk"), 0);
    assert_int_equal(ulk_sdls_state_save(s, path, NULL), 0);
    ulk_sdls_state_destroy(s);
    struct stat st;
    assert_int_equal(stat(path, &st), 0);
    if ((st.st_mode & 0777) != 0600) fail_msg("the state file is mode %o, expected 0600", (unsigned)(st.st_mode & 0777));
    s = NULL;
    assert_int_equal(ulk_sdls_state_load(path, ULK_SDLS_SEND, &s, &created, NULL), 0);
    uint64_t a = 0, b = 0;
    const char *p = NULL;
    if (created || ulk_sdls_state_value(s, 7) != 19 || !ulk_sdls_state_reservation(s, 7, &a, &b, &p) || a != 1 ||
        b != 18 || strcmp(p, "up load.ulk"))
        fail_msg("the state read back is not next 19 with the reservation 1..18 of 'up load.ulk'");
    ulk_sdls_state_destroy(s);
    /* the receive side refuses a send state */
    ulk_diag *d = ulk_diag_create();
    s = NULL;
    assert_int_equal(ulk_sdls_state_load(path, ULK_SDLS_RECEIVE, &s, &created, d), ULK_EMISMATCH);
    assert_null(s);
    const ulk_finding *f = ulk_diag_first_error(d);
    if (!f || !strstr(f->msg, "send-side")) fail_msg("a send state given to the receiving side is not named as such");
    ulk_diag_destroy(d);
    /* broken lines: file:line */
    static const struct { const char *text; int line; } bad[] = {
        {"ulk-sdls-state 1 send\nspi 7 next 0\n", 2},
        {"ulk-sdls-state 1 send\nspi 7 next 3\nspi 7 next 4\n", 3},
        {"ulk-sdls-state 2 send\n", 1},
        {"ulk-sdls-state 1 send\nspi 7 nxt 3\n", 2},
        {"ulk-sdls-state 1 send\nspi 7 next 3\nreserved 7 1 9 x.ulk\n", 3},
        {"", 1},
    };
    for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
        FILE *fp = fopen(path, "w");
        fputs(bad[i].text, fp);
        fclose(fp);
        d = ulk_diag_create();
        s = NULL;
        int rc = ulk_sdls_state_load(path, ULK_SDLS_SEND, &s, &created, d);
        f = ulk_diag_first_error(d);
        if (rc != ULK_EPARSE || s || !f || f->line != bad[i].line)
            fail_msg("bad state %zu: expected a parse error at line %d, got %d at %d", i, bad[i].line, rc, f ? f->line : -1);
        ulk_diag_destroy(d);
    }
    unlink(path);
    rmdir(dir);
}

/* ---- the decoder hook: the secured demo compiled, secured, its CLTUs fed as channel symbols ---- */

typedef struct {
    int n, accepted;
    int verdicts[8]; /* per ulk_security_verdict */
    uint64_t counters[32];
} unit_log;

static void on_unit(const ulk_tc_unit *u, void *user)
{
    unit_log *g = user;
    if (!u->secured) fail_msg("a unit of a secured link is not marked secured (%s)", u->reason);
    if (g->n < 32) g->counters[g->n] = u->iv_counter;
    g->n++;
    g->accepted += u->status == ULK_TC_ACCEPTED;
    g->verdicts[u->sec_verdict]++;
}

/* Feeds the upload's CLTUs with 64 idle bits around each as +-1 symbols. */
static void feed(const ulk_dict *d, const ulk_upload *u, ulk_sdls_rx *rx, unit_log *g)
{
    ulk_tc_decoder *t = NULL;
    assert_int_equal(ulk_tc_decoder_create(d, on_unit, g, &t, NULL), 0);
    if (rx) assert_int_equal(ulk_tc_decoder_set_security(t, rx), 0);
    static double ts[1 << 16];
    static float sv[1 << 16];
    size_t n = 0;
    for (size_t i = 0; i < u->n_cmds; i++) {
        for (int k = 0; k < 64; k++, n++) sv[n] = (k & 1) ? 1.0f : -1.0f;
        const ulk_upload_cmd *c = &u->cmds[i];
        for (size_t b = 0; b < 8 * c->n_cltu; b++, n++) sv[n] = (c->cltu[b / 8] >> (7 - b % 8) & 1) ? 1.0f : -1.0f;
    }
    for (int k = 0; k < 64; k++, n++) sv[n] = (k & 1) ? 1.0f : -1.0f;
    for (size_t i = 0; i < n; i++) ts[i] = (double)i / 2000.0;
    assert_int_equal(ulk_tc_decoder_push(t, ts, sv, n), 0);
    assert_int_equal(ulk_tc_decoder_finish(t), 0);
    ulk_tc_decoder_destroy(t);
}

static void test_decoder_hook(void **state)
{
    (void)state;
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    if (ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-ccsds-sec.yaml", &d, dg)) {
        ulk_diag_print(dg, stderr);
        fail_msg("the secured demo does not load");
    }
    static const char list[] = "OBC_PING\nOBC_PING\nOBC_SET_MODE mode=RELAY\nRELAY_STOP\n";
    ulk_cmdlist *l = NULL;
    ulk_upload *u = NULL;
    assert_int_equal(ulk_cmdlist_parse("t.cmd", list, sizeof list - 1, &l, dg), 0);
    assert_int_equal(ulk_compile(d, l, &u, dg), 0);
    ulk_sdls_keys *k = keys_of("harrowick3-uplink " KEY_A "\n"), *other = keys_of("harrowick3-uplink " KEY_B "\n");
    assert_int_equal(ulk_sdls_secure_upload(u, k, 40, dg), 0);
    const ulk_sdls_sa *sa = &d->link.tc.security;

    /* the right key, a receive state: 4 accepted, counters 40..43, the state records 43 */
    ulk_sdls_state *st = NULL;
    assert_int_equal(ulk_sdls_state_create(ULK_SDLS_RECEIVE, &st), 0);
    assert_int_equal(ulk_sdls_state_set(st, sa->spi, 39), 0);
    ulk_sdls_rx *rx = NULL;
    assert_int_equal(ulk_sdls_rx_create(sa, k, st, &rx, NULL), 0);
    unit_log g;
    memset(&g, 0, sizeof g);
    feed(d, u, rx, &g);
    if (g.n != 4 || g.accepted != 4 || g.verdicts[ULK_SEC_ACCEPTED] != 4 || g.counters[0] != 40 || g.counters[3] != 43)
        fail_msg("right key: %d units, %d accepted, first counter %llu", g.n, g.accepted, (unsigned long long)g.counters[0]);
    assert_int_equal(ulk_sdls_state_value(st, sa->spi), 43);
    /* the same frames again with that state: all replayed */
    memset(&g, 0, sizeof g);
    feed(d, u, rx, &g);
    if (g.n != 4 || g.accepted != 0 || g.verdicts[ULK_SEC_REPLAYED] != 4) fail_msg("again: %d of 4 replayed", g.verdicts[ULK_SEC_REPLAYED]);
    ulk_sdls_rx_destroy(rx);
    /* another key: all fail authentication */
    rx = NULL;
    assert_int_equal(ulk_sdls_rx_create(sa, other, NULL, &rx, NULL), 0);
    memset(&g, 0, sizeof g);
    feed(d, u, rx, &g);
    if (g.n != 4 || g.accepted != 0 || g.verdicts[ULK_SEC_AUTH_FAILED] != 4) fail_msg("another key: %d of 4 failed", g.verdicts[ULK_SEC_AUTH_FAILED]);
    ulk_sdls_rx_destroy(rx);
    /* a receiver whose window (4 here) above its last accepted counter 0 ends below 40 */
    ulk_sdls_sa narrow = *sa;
    narrow.window = 4;
    assert_int_equal(ulk_sdls_state_set(st, sa->spi, 0), 0);
    rx = NULL;
    assert_int_equal(ulk_sdls_rx_create(&narrow, k, st, &rx, NULL), 0);
    memset(&g, 0, sizeof g);
    feed(d, u, rx, &g);
    if (g.n != 4 || g.accepted != 0 || g.verdicts[ULK_SEC_OUTSIDE_WINDOW] != 4)
        fail_msg("window 4 above 0: %d of 4 outside the window", g.verdicts[ULK_SEC_OUTSIDE_WINDOW]);
    ulk_sdls_rx_destroy(rx);
    ulk_sdls_state_destroy(st);
    /* no verifier: secured, not authenticated, the commands shown (service authentication) */
    memset(&g, 0, sizeof g);
    feed(d, u, NULL, &g);
    if (g.n != 4 || g.accepted != 4 || g.verdicts[ULK_SEC_UNCHECKED] != 4) fail_msg("no keys: %d of 4 unchecked", g.verdicts[ULK_SEC_UNCHECKED]);
    ulk_sdls_keys_destroy(k);
    ulk_sdls_keys_destroy(other);
    ulk_upload_destroy(u);
    ulk_cmdlist_destroy(l);
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_gcm_vectors),
        cmocka_unit_test(test_key_file_rows),
        cmocka_unit_test(test_key_file_mode),
        cmocka_unit_test(test_sa_check_rows),
        cmocka_unit_test(test_frame_layout_and_verdicts),
        cmocka_unit_test(test_state_file),
        cmocka_unit_test(test_decoder_hook),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
