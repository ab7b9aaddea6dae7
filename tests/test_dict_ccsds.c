/* tests/test_dict_ccsds.c - dictionaries of the CCSDS telecommand profile (`profile:
 * ccsds-tc`, docs/spec/ccsds-tc.md section 1): the tc section in the model, its defaults,
 * the validation rules and warnings with their file:line:col, the frame-size limit at its
 * exact boundary, the canonical form, allocation failures and the demo pair.
 *
 * The broken dictionaries are rows, as in test_dict.c: each takes the small valid
 * dictionary below (YAML or JSON), replaces literal text, and names the finding expected.
 * Field widths come from the standards (CCSDS 232.0-B-4 section 4.1.2, from memory: SCID 10 bits, VCID 6 bits, MAP ID 6
 * bits, N(S) 8 bits, frame at most 1024 octets (also CCSDS 202.0-B-2 section 4.2.1, verified), 5-octet header, 2-octet FECF, 1-octet
 * segment header; CCSDS 133.0-B-2 section 4.1.3, from memory: APID 11 bits, 0x7FF idle, 6-octet primary header), not
 * from the library's constants.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "ulk/dict.h"
#include "ulk/error.h"
#include "util.h"

/* A ccsds-tc dictionary of our own: every rule satisfied, no warning (R = 1000 = 4000/2^2,
 * 8 kHz sine subcarrier, f_sc / R = 8). Line numbers matter to the rows. */
static const char BASE_YAML[] =
    "dictionary: {name: tc-min, version: \"0.1\"}\n"                          /* 1 */
    "link:\n"                                                                 /* 2 */
    "  profile: ccsds-tc\n"                                                   /* 3 */
    "  bit_rate: 1000\n"                                                      /* 4 */
    "  line_code: nrz-m\n"                                                    /* 5 */
    "  subcarrier: {frequency: 8000, waveform: sine, amplitude: 0.8}\n"       /* 6 */
    "  tc:\n"                                                                 /* 7 */
    "    spacecraft_id: 0x3FF\n"                                              /* 8 */
    "    virtual_channel: 63\n"                                               /* 9 */
    "    service: sequence-controlled\n"                                      /* 10 */
    "    first_sequence: 255\n"                                               /* 11 */
    "    segment_header: {map_id: 63}\n"                                      /* 12 */
    "    fecf: false\n"                                                       /* 13 */
    "    randomize: false\n"                                                  /* 14 */
    "    acquisition_octets: 20\n"                                            /* 15 */
    "    idle_octets: 3\n"                                                    /* 16 */
    "    start_errors: 1\n"                                                   /* 17 */
    "    correction: ted\n"                                                   /* 18 */
    "systems:\n"                                                              /* 19 */
    "  - {name: NAV, address: 0x7FE}\n"                                       /* 20 */
    "  - {name: AUX, address: 0}\n"                                           /* 21 */
    "  - {name: ALT, address: 1}\n"                                           /* 22 */
    "commands:\n"                                                             /* 23 */
    "  - mnemonic: NAV_GO\n"                                                  /* 24 */
    "    system: NAV\n"                                                       /* 25 */
    "    opcode: 255\n"                                                       /* 26 */
    "    critical: true\n"                                                    /* 27 */
    "    arguments:\n"                                                        /* 28 */
    "      - {name: speed, type: unsigned, bits: 8, units: m}\n"              /* 29 */
    "      - {name: mode, type: enum, bits: 2, values: {IDLE: 0, RUN: 3}}\n"  /* 30 */
    "  - mnemonic: AUX_PING\n"                                                /* 31 */
    "    system: AUX\n"                                                       /* 32 */
    "    opcode: 0\n";                                                        /* 33 */

/* The same dictionary in JSON. */
static const char BASE_JSON[] =
    "{\n"                                                                     /* 1 */
    "  \"dictionary\": {\"name\": \"tc-min\", \"version\": \"0.1\"},\n"       /* 2 */
    "  \"link\": {\n"                                                         /* 3 */
    "    \"profile\": \"ccsds-tc\",\n"                                        /* 4 */
    "    \"bit_rate\": 1000,\n"                                               /* 5 */
    "    \"line_code\": \"nrz-m\",\n"                                         /* 6 */
    "    \"subcarrier\": {\"frequency\": 8000, \"waveform\": \"sine\", \"amplitude\": 0.8},\n" /* 7 */
    "    \"tc\": {\"spacecraft_id\": \"0x3FF\", \"virtual_channel\": 63, \"service\": \"sequence-controlled\",\n" /* 8 */
    "           \"first_sequence\": 255, \"segment_header\": {\"map_id\": 63}, \"fecf\": false,\n" /* 9 */
    "           \"randomize\": false, \"acquisition_octets\": 20, \"idle_octets\": 3,\n" /* 10 */
    "           \"start_errors\": 1, \"correction\": \"ted\"}\n"              /* 11 */
    "  },\n"                                                                  /* 12 */
    "  \"systems\": [{\"name\": \"NAV\", \"address\": 2046}, {\"name\": \"AUX\", \"address\": 0},\n" /* 13 */
    "              {\"name\": \"ALT\", \"address\": 1}],\n"                   /* 14 */
    "  \"commands\": [\n"                                                     /* 15 */
    "    {\"mnemonic\": \"NAV_GO\", \"system\": \"NAV\", \"opcode\": 255, \"critical\": true,\n" /* 16 */
    "     \"arguments\": [{\"name\": \"speed\", \"type\": \"unsigned\", \"bits\": 8, \"units\": \"m\"},\n" /* 17 */
    "                   {\"name\": \"mode\", \"type\": \"enum\", \"bits\": 2, \"values\": {\"IDLE\": 0, \"RUN\": 3}}]},\n" /* 18 */
    "    {\"mnemonic\": \"AUX_PING\", \"system\": \"AUX\", \"opcode\": 0}\n"  /* 19 */
    "  ]\n"                                                                   /* 20 */
    "}\n";                                                                    /* 21 */

#include "dict_rows.h"

static const row rows[] = {
    /* ---- identifiers in range (CCSDS 232.0-B-4 section 4.1.2 field widths, from memory) */
    {"scid_over_10_bits", 0, "spacecraft_id: 0x3FF", "spacecraft_id: 0x400", 0, 0, E,
     "spacecraft_id (SCID, 10 bits) must be 0..1023, not 0x400", 8, 20, 0},
    {"vcid_over_6_bits", 0, "virtual_channel: 63", "virtual_channel: 64", 0, 0, E,
     "virtual_channel (VCID, 6 bits) must be 0..63, not 64", 9, 22, 0},
    {"map_id_over_6_bits", 0, "map_id: 63", "map_id: 64", 0, 0, E, "map_id (MAP ID, 6 bits) must be 0..63, not 64", 12,
     30, 0},
    {"first_sequence_over_8_bits", 0, "first_sequence: 255", "first_sequence: 256", 0, 0, E,
     "first_sequence (N(S), 8 bits) must be 0..255, not 256", 11, 21, 0},
    {"negative_scid", 0, "spacecraft_id: 0x3FF", "spacecraft_id: -1", 0, 0, E, "must be 0..1023, not -1", 8, 20, 0},
    {"start_errors_two", 0, "start_errors: 1", "start_errors: 2", 0, 0, E, "must be 0..1, not 2", 17, 19, 0},
    {"correction_did_you_mean", 0, "correction: ted", "correction: tedd", 0, 0, E,
     "unknown correction mode 'tedd' (did you mean 'ted'?", 18, 17, 0},
    {"service_did_you_mean", 0, "service: sequence-controlled", "service: expedite", 0, 0, E,
     "unknown service 'expedite' (did you mean 'expedited'?", 10, 14, 0},
    {"fecf_not_boolean", 0, "fecf: false", "fecf: off", 0, 0, E, "'fecf' must be true or false, not a string 'off'", 13,
     11, 0},
    {"segment_header_needs_map_id", 0, "segment_header: {map_id: 63}", "segment_header: {}", 0, 0, E,
     "link.tc.segment_header has no 'map_id' (required)", 12, 21, 0},
    {"tc_missing_spacecraft_id", 0, "    spacecraft_id: 0x3FF\n", "", 0, 0, E, "link.tc has no 'spacecraft_id' (required)",
     8, 5, 0},
    {"tc_unknown_key", 0, "idle_octets: 3", "idle_octet: 3", 0, 0, E,
     "unknown key 'idle_octet' in link.tc (did you mean 'idle_octets'?)", 16, 5, 0},
    {"link_without_tc", 0, "  tc:\n", "  tx:\n", 0, 0, E, "link (profile ccsds-tc) has no 'tc' (required)", 3, 3, 0},
    {"subbit_key_in_ccsds_link", 0, "  line_code: nrz-m\n", "  framing: {preamble: 1, gap: 1, postamble: 1}\n", 0, 0, E,
     "unknown key 'framing' in link (profile ccsds-tc)", 5, 3, 0},
    {"acquisition_limit", 0, "acquisition_octets: 20", "acquisition_octets: 100000001", 0, 0, E,
     "acquisition_octets must be 0..100000000", 15, 25, 0},

    /* ---- APIDs (CCSDS 133.0-B-2 section 4.1.3.3.4, from memory: 11 bits, 0x7FF is the idle
     * packets') */
    {"apid_idle", 0, "address: 0x7FE", "address: 0x7FF", 0, 0, E, "APID 0x7FF is reserved for idle packets", 20, 26, 0},
    {"apid_over_11_bits", 0, "address: 0x7FE", "address: 0x800", 0, 0, E, "APID 2048 does not fit in 11 bits", 20, 26, 0},
    {"apid_duplicate", 0, "{name: ALT, address: 1}", "{name: ALT, address: 0}", 0, 0, E,
     "duplicate system address (APID) 0: 'AUX' has it too (line 21)", 22, 26, 0},
    /* One-bit-apart APIDs (0 and 1 here) load without the sub-bit profile's warning: the
     * APID travels under the FECF and the BCH code. */
    {"apid_one_bit_apart_no_warning", 0, "first_sequence: 255", "first_sequence: 0", 0, 0, W, "", 0, 0, 2},

    /* ---- opcodes: one octet */
    {"opcode_over_one_octet", 0, "opcode: 255", "opcode: 256", 0, 0, E,
     "opcode 256 does not fit in the one octet of a ccsds-tc packet (0..255)", 26, 13, 0},
    {"opcode_duplicate", 0, "system: NAV\n", "system: AUX\n", "opcode: 255", "opcode: 0", E,
     "duplicate opcode 0 in system 'AUX'", 33, 13, 0},

    /* ---- rates: f_sc / R whole >= 1 is a rule; the usual practice only warns */
    {"fsc_not_whole_multiple", 0, "bit_rate: 1000", "bit_rate: 3000", 0, 0, E,
     "subcarrier frequency 8000 Hz is not a whole multiple of the bit rate R = 3000 bit/s (f_sc / R = 8/3", 6, 27, 0},
    {"fsc_below_bit_rate", 0, "frequency: 8000", "frequency: 500", 0, 0, E,
     "not a whole multiple of the bit rate R = 1000 bit/s (f_sc / R = 0.5", 6, 27, 0},
    {"fsc_equal_bit_rate_warns", 0, "bit_rate: 1000", "bit_rate: 4000", "frequency: 8000", "frequency: 4000", W,
     "below 2 * R", 6, 27, 1},
    {"unusual_bit_rate_warns", 0, "bit_rate: 1000", "bit_rate: 1600", 0, 0, W,
     "bit rate 1600 bit/s is not one of the usual telecommand rates 4000/2^n bit/s (n = 0..9: 4000 ... 7.8125; from memory of CCSDS 401.0-B",
     4, 13, 1},
    {"lowest_usual_rate_no_warning", 0, "bit_rate: 1000", "bit_rate: 7.8125", "frequency: 8000", "frequency: 16000", W,
     "", 0, 0, 2},
    {"unusual_subcarrier_warns", 0, "frequency: 8000", "frequency: 10000", 0, 0, W,
     "subcarrier frequency 10000 Hz is outside the usual telecommand practice of 8 kHz or 16 kHz (from memory of CCSDS 401.0-B",
     6, 27, 1},
    {"square_subcarrier_warns", 0, "waveform: sine", "waveform: square", 0, 0, W,
     "a square subcarrier is outside the usual telecommand practice", 6, 43, 1},
    {"short_acquisition_warns", 0, "acquisition_octets: 20", "acquisition_octets: 4", 0, 0, W,
     "acquisition sequence of 4 octets is short (< 16)", 15, 25, 1},
    {"first_sequence_with_expedited_warns", 0, "service: sequence-controlled", "service: expedited", 0, 0, W,
     "first_sequence 255 has no effect with service expedited", 11, 21, 1},

    /* ---- link.tc.security (CCSDS 355.0-B-1 section 3.2.2 SPI 16 bits, 0 and 65535 reserved from memory;
     * AES-256-GCM tags of 96..128 bits, NIST SP 800-38D from memory) */
    {"security_ok", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", 0, 0, W, "", 0, 0, 2},
    {"security_spi_zero", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "spi: 7", "spi: 0", E,
     "spi (Security Parameter Index, 1..65534) must be 1..65534, not 0", 19, 21, 0},
    {"security_spi_reserved", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "spi: 7", "spi: 65535", E, "must be 1..65534, not 65535", 19, 21, 0},
    {"security_service_did_you_mean", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "service: authentication}", "service: authentification}", E,
     "unknown security service 'authentification' (did you mean 'authentication'?", 19, 43, 0},
    {"security_algorithm_unknown", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "authentication}", "authentication, algorithm: aes-128-gcm}", E,
     "unknown security algorithm 'aes-128-gcm'", 19, 70, 0},
    {"security_key_material_refused", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "key: ops",
     "key: 00112233445566778899aabbccddeeff00112233445566778899aabbccddeeff", E,
     "never key material", 19, 29, 0},
    {"security_key_missing", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "key: ops, ", "", E, "link.tc.security has no 'key' (required)", 19, 15, 0},
    {"security_iv_too_short", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "authentication}", "authentication, iv_octets: 8}", E,
     "iv_octets (the IV holds the 8-octet counter; 12..16) must be 12..16, not 8", 19, 70, 0},
    {"security_mac_too_long", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "authentication}", "authentication, mac_octets: 20}", E,
     "mac_octets (GCM tag of 96..128 bits; 12..16) must be 12..16, not 20", 19, 71, 0},
    {"security_window_zero", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "authentication}", "authentication, window: 0}", E,
     "window (anti-replay window, 1..1048576) must be 1..1048576, not 0", 19, 67, 0},
    {"security_unknown_key", 0, "    correction: ted\n", "    correction: ted\n    security: {spi: 7, key: ops, service: authentication}\n", "authentication}", "authentication, windw: 3}", E,
     "unknown key 'windw' in link.tc.security (did you mean 'window'?)", 19, 59, 0},
    {"security_not_a_map", 0, "    correction: ted\n", "    correction: ted\n    security: on\n", 0, 0, E,
     "link.tc.security must be a mapping", 19, 15, 0},
    {"json_security_spi_string", 1, "\"correction\": \"ted\"}",
     "\"correction\": \"ted\", \"security\": {\"spi\": \"7\", \"key\": \"ops\", \"service\": \"authentication\"}}", 0, 0, E,
     "'spi' must be an integer, not a string", 11, 72, 0},
    /* ---- JSON */
    {"json_scid_over_10_bits", 1, "\"spacecraft_id\": \"0x3FF\"", "\"spacecraft_id\": 1024", 0, 0, E,
     "spacecraft_id (SCID, 10 bits) must be 0..1023, not 1024", 8, 29, 0},
    {"json_apid_idle", 1, "\"address\": 2046", "\"address\": 2047", 0, 0, E, "APID 0x7FF is reserved for idle packets", 13,
     42, 0},
    {"json_start_errors_string", 1, "\"start_errors\": 1", "\"start_errors\": \"1\"", 0, 0, E,
     "'start_errors' must be an integer, not a string", 11, 28, 0},
};

static void run_row(void **state) { dict_row_run(*state, BASE_YAML, BASE_JSON, ULK_PROFILE_CCSDS_TC); }

/* ---------------------------------------------------------------- the valid dictionary */

static void check_model(const ulk_dict *d)
{
    const ulk_link *L = &d->link;
    const ulk_tc_params *T = &L->tc;
    assert_int_equal(L->profile, ULK_PROFILE_CCSDS_TC);
    assert_int_equal(L->bit_rate.num, 1000);
    assert_int_equal(L->bit_rate.den, 1);
    assert_int_equal(L->line_code, ULK_LINE_NRZM);
    assert_int_equal(L->fsc.num, 8000);
    assert_true(L->amplitude == 0.8);
    /* One channel symbol per bit: R_s = R. */
    assert_int_equal(L->n_subbits, 1);
    assert_int_equal(ulk_link_subbit_rate(L).num, 1000);
    assert_int_equal(L->word_bits, 0);
    assert_int_equal(T->frame.spacecraft_id, 1023);
    assert_int_equal(T->frame.virtual_channel, 63);
    assert_int_equal(T->frame.service, ULK_TC_SEQUENCE_CONTROLLED);
    assert_int_equal(T->first_sequence, 255);
    assert_int_equal(T->frame.segment_header, 1);
    assert_int_equal(T->frame.map_id, 63);
    assert_int_equal(T->frame.fecf, 0);
    assert_int_equal(T->frame.randomize, 0);
    assert_int_equal(T->acquisition_octets, 20);
    assert_int_equal(T->idle_octets, 3);
    assert_int_equal(T->frame.start_errors, 1);
    assert_int_equal(T->frame.correction, ULK_BCH_TED);
    assert_int_equal(d->n_systems, 3);
    assert_int_equal(d->systems[0].address, 0x7FE);
    const ulk_command *k = ulk_dict_find_opcode(d, 0x7FE, 255);
    assert_non_null(k);
    assert_string_equal(k->mnemonic, "NAV_GO");
    assert_int_equal(k->packed_bits, 10);
}

static void test_model_yaml_json(void **st)
{
    (void)st;
    ulk_dict *y = load_ok("min.yaml", BASE_YAML, 0), *j = load_ok("min.json", BASE_JSON, 1);
    check_model(y);
    check_model(j);
    assert_string_equal(y->sha256, j->sha256);
    assert_memory_equal(&y->link, &j->link, sizeof y->link);
    ulk_dict_destroy(y);
    ulk_dict_destroy(j);
}

/* Omitted keys take docs/spec/ccsds-tc.md section 1's defaults. */
static void test_defaults(void **st)
{
    (void)st;
    static const char txt[] =
        "dictionary: {name: tc-def, version: \"1\"}\n"
        "link:\n"
        "  profile: ccsds-tc\n"
        "  bit_rate: 4000\n"
        "  subcarrier: {frequency: 16000}\n"
        "  tc: {spacecraft_id: 5, virtual_channel: 1, service: expedited}\n"
        "systems: [{name: A, address: 16}]\n"
        "commands: [{mnemonic: A_X, system: A, opcode: 1}]\n";
    ulk_dict *d = load_ok("def.yaml", txt, 0);
    const ulk_tc_params *T = &d->link.tc;
    assert_int_equal(d->link.line_code, ULK_LINE_NRZL);
    assert_int_equal(d->link.waveform, ULK_WAVE_SINE);
    assert_true(d->link.amplitude == 1.0);
    assert_int_equal(T->frame.service, ULK_TC_EXPEDITED);
    assert_int_equal(T->first_sequence, 0);
    assert_int_equal(T->frame.segment_header, 0);
    assert_int_equal(T->frame.fecf, 1);
    assert_int_equal(T->frame.randomize, 1);
    assert_int_equal(T->acquisition_octets, 16);
    assert_int_equal(T->idle_octets, 1);
    assert_int_equal(T->frame.start_errors, 0);
    assert_int_equal(T->frame.correction, ULK_BCH_SEC);
    char *canon;
    assert_int_equal(ulk_dict_canonical(d, &canon, NULL), 0);
    /* docs/dictionary.md section 6, ccsds-tc link object: defaults applied, keys sorted. */
    const char *want_link =
        "\"link\":{\"bit_rate\":\"4000\",\"line_code\":\"nrz-l\",\"profile\":\"ccsds-tc\",\"subcarrier\":{\"amplitude\":1,"
        "\"frequency\":\"16000\",\"waveform\":\"sine\"},\"tc\":{\"acquisition_octets\":16,\"correction\":\"sec\",\"fecf\":true,"
        "\"first_sequence\":0,\"idle_octets\":1,\"randomize\":true,\"service\":\"expedited\",\"spacecraft_id\":5,"
        "\"start_errors\":0,\"virtual_channel\":1}}";
    if (!strstr(canon, want_link)) fail_msg("canonical form %s lacks %s", canon, want_link);
    free(canon);
    ulk_dict_destroy(d);
}

static void test_canonical_segment_header(void **st)
{
    (void)st;
    ulk_dict *d = load_ok("min.yaml", BASE_YAML, 0);
    char *canon;
    assert_int_equal(ulk_dict_canonical(d, &canon, NULL), 0);
    const char *want_tc =
        "\"tc\":{\"acquisition_octets\":20,\"correction\":\"ted\",\"fecf\":false,\"first_sequence\":255,\"idle_octets\":3,"
        "\"randomize\":false,\"segment_header\":{\"map_id\":63},\"service\":\"sequence-controlled\",\"spacecraft_id\":1023,"
        "\"start_errors\":1,\"virtual_channel\":63}";
    if (!strstr(canon, want_tc)) fail_msg("canonical form %s lacks %s", canon, want_tc);
    free(canon);
    /* Every tc field is part of the hash. */
    static const char *const edits[][2] = {
        {"spacecraft_id: 0x3FF", "spacecraft_id: 0x3FE"}, {"virtual_channel: 63", "virtual_channel: 62"},
        {"first_sequence: 255", "first_sequence: 254"},   {"map_id: 63", "map_id: 62"},
        {"fecf: false", "fecf: true"},                     {"randomize: false", "randomize: true"},
        {"acquisition_octets: 20", "acquisition_octets: 21"}, {"idle_octets: 3", "idle_octets: 4"},
        {"start_errors: 1", "start_errors: 0"},           {"correction: ted", "correction: sec"},
        {"    segment_header: {map_id: 63}\n", ""},
    };
    for (size_t i = 0; i < sizeof edits / sizeof edits[0]; i++) {
        char *t = replace(strdup(BASE_YAML), edits[i][0], edits[i][1]);
        ulk_dict *e = load_ok("edit.yaml", t, 0);
        if (!strcmp(e->sha256, d->sha256)) fail_msg("edit '%s' does not change the hash", edits[i][1]);
        ulk_dict_destroy(e);
        free(t);
    }
    ulk_dict_destroy(d);
}

/* The frame limit at its exact boundary. Largest data field (CCSDS 232.0-B-4 section
 * 4.1.2 / 133.0-B-2 section 4.1.3 sizes, from memory):
 * 1024 - 5 (frame header) - seg - 6 (packet header) - fecf octets; the opcode takes one
 * octet of it, the arguments (padded to octets) the rest. */
static char *big_dict(int seg, int fecf, int arg_bits)
{
    size_t cap = 64 * 1024;
    char *t = malloc(cap);
    int n = snprintf(t, cap,
                     "dictionary: {name: big, version: \"1\"}\n"
                     "link:\n"
                     "  profile: ccsds-tc\n"
                     "  bit_rate: 1000\n"
                     "  subcarrier: {frequency: 8000}\n"
                     "  tc: {spacecraft_id: 1, virtual_channel: 0, service: expedited, fecf: %s%s}\n"
                     "systems: [{name: A, address: 16}]\n"
                     "commands:\n"
                     "  - mnemonic: A_BIG\n"
                     "    system: A\n"
                     "    opcode: 7\n"
                     "    arguments:\n",
                     fecf ? "true" : "false", seg ? ", segment_header: {map_id: 1}" : "");
    for (int k = 0; arg_bits > 0; k++) {
        int b = arg_bits > 64 ? 64 : arg_bits;
        n += snprintf(t + n, cap - (size_t)n, "      - {name: a%d, type: unsigned, bits: %d}\n", k, b);
        arg_bits -= b;
    }
    return t;
}

static void test_frame_limit_boundary(void **st)
{
    (void)st;
    for (int seg = 0; seg <= 1; seg++)
        for (int fecf = 0; fecf <= 1; fecf++) {
            int max_data = 1024 - 5 - seg - 6 - 2 * fecf;
            int max_arg_bits = (max_data - 1) * 8;
            /* At the limit: loads. */
            char *t = big_dict(seg, fecf, max_arg_bits);
            ulk_dict *d = load_ok("big.yaml", t, 0);
            ulk_dict_destroy(d);
            free(t);
            /* One bit more needs one more octet: the frame would be 1025 octets. */
            t = big_dict(seg, fecf, max_arg_bits + 1);
            ulk_diag *dg = ulk_diag_create();
            d = NULL;
            assert_int_equal(ulk_dict_load_mem("big.yaml", t, strlen(t), 0, &d, dg), ULK_EPARSE);
            assert_null(d);
            const ulk_finding *f = ulk_diag_first_error(dg);
            assert_non_null(f);
            char want[200];
            snprintf(want, sizeof want, "the packet data field would be %d octets and the TC frame 1025 octets",
                     max_data + 1);
            if (!strstr(f->msg, want)) fail_msg("seg %d fecf %d: '%s' lacks '%s'", seg, fecf, f->msg, want);
            assert_int_equal(f->line, 13);
            assert_string_equal(f->path, "commands[0].arguments");
            ulk_diag_destroy(dg);
            free(t);
        }
}

/* The same boundary with a security header (SPI 2 + IV) and trailer (MAC) inside the frame:
 * max data = 1024 - 5 - 1 - (2 + iv) - 6 - mac - 2 (segment header and FECF on). */
static void test_frame_limit_security(void **st)
{
    (void)st;
    static const int cases[][2] = {{12, 16}, {16, 12}, {12, 12}, {16, 16}};
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        int iv = cases[c][0], mac = cases[c][1];
        int max_data = 1024 - 5 - 1 - (2 + iv) - 6 - mac - 2;
        for (int over = 0; over <= 1; over++) {
            char *t = big_dict(1, 1, (max_data - 1) * 8 + over);
            char sec[160];
            snprintf(sec, sizeof sec, "fecf: true, segment_header: {map_id: 1}, security: {spi: 9, key: k1, service: authentication, iv_octets: %d, mac_octets: %d}}", iv, mac);
            t = replace(t, "fecf: true, segment_header: {map_id: 1}}", sec);
            ulk_diag *dg = ulk_diag_create();
            ulk_dict *d = NULL;
            int rc = ulk_dict_load_mem("bigsec.yaml", t, strlen(t), 0, &d, dg);
            if (!over) {
                if (rc || !d) {
                    ulk_diag_print(dg, stderr);
                    fail_msg("iv %d mac %d: a frame of exactly 1024 octets with security is refused", iv, mac);
                }
                assert_int_equal(d->link.tc.frame.sec_header_octets, 2 + iv);
                assert_int_equal(d->link.tc.frame.sec_trailer_octets, mac);
            } else {
                const ulk_finding *f = ulk_diag_first_error(dg);
                char want[200];
                snprintf(want, sizeof want, "data field would be %d octets and the TC frame 1025 octets with its security header and trailer",
                         max_data + 1);
                if (rc != ULK_EPARSE || d || !f || !strstr(f->msg, want))
                    fail_msg("iv %d mac %d: one octet over is not refused with '%s' (%s)", iv, mac, want, f ? f->msg : "");
            }
            ulk_dict_destroy(d);
            ulk_diag_destroy(dg);
            free(t);
        }
    }
}

/* The security map is in the canonical form (so in the dictionary hash), keys in byte order
 * inside tc: ... segment_header, security, service ... */
static void test_canonical_security(void **st)
{
    (void)st;
    char *t = strdup(BASE_YAML);
    t = replace(t, "    correction: ted\n",
                "    correction: ted\n    security: {spi: 300, key: ops.b, service: authenticated-encryption, window: 9}\n");
    ulk_dict *d = load_ok("sec.yaml", t, 0), *plain = load_ok("min.yaml", BASE_YAML, 0);
    char *canon = NULL, *c2 = NULL;
    assert_int_equal(ulk_dict_canonical(d, &canon, NULL), 0);
    assert_int_equal(ulk_dict_canonical(plain, &c2, NULL), 0);
    const char *want = "\"segment_header\":{\"map_id\":63},\"security\":{\"algorithm\":\"aes-256-gcm\",\"iv_octets\":12,"
                       "\"key\":\"ops.b\",\"mac_octets\":16,\"service\":\"authenticated-encryption\",\"spi\":300,\"window\":9},"
                       "\"service\":";
    if (!strstr(canon, want)) fail_msg("canonical form %s lacks %s", canon, want);
    if (strstr(c2, "security")) fail_msg("an unsecured dictionary's canonical form names security");
    if (!strcmp(d->sha256, plain->sha256)) fail_msg("security does not change the dictionary hash");
    assert_int_equal(d->link.tc.security.spi, 300);
    assert_int_equal(d->link.tc.security.service, ULK_SDLS_AUTHENTICATED_ENCRYPTION);
    free(canon);
    free(c2);
    ulk_dict_destroy(d);
    ulk_dict_destroy(plain);
    free(t);
}

/* Every allocation failure ends in a clean ULK_ENOMEM (and no leak under ASan). */
static void test_allocation_failures(void **st)
{
    (void)st;
    int n;
    for (n = 1; n < 100000; n++) {
        ulk_diag *dg = ulk_diag_create();
        assert_non_null(dg);
        ulk_alloc_fail_at(n);
        ulk_dict *d = NULL;
        int rc = ulk_dict_load_mem("min.yaml", BASE_YAML, sizeof BASE_YAML - 1, 0, &d, dg);
        ulk_alloc_fail_at(0);
        if (rc == 0) {
            assert_non_null(d);
            ulk_dict_destroy(d);
            ulk_diag_destroy(dg);
            break;
        }
        if (rc != ULK_ENOMEM) {
            ulk_diag_print(dg, stderr);
            fail_msg("allocation %d: status %d, want ULK_ENOMEM", n, rc);
        }
        assert_null(d);
        ulk_diag_destroy(dg);
    }
    assert_true(n > 20 && n < 100000);
}

/* The demo pair loads clean (no warning) to the same model and hash. */
static void test_demo_yaml_json_same_model(void **st)
{
    (void)st;
    /* the demo pair and its secured variant's pair (docs/sdls.md) */
    static const char *const pairs[][2] = {
        {ULK_SOURCE_DIR "/dictionaries/demo-ccsds.yaml", ULK_SOURCE_DIR "/dictionaries/demo-ccsds.json"},
        {ULK_SOURCE_DIR "/dictionaries/demo-ccsds-sec.yaml", ULK_SOURCE_DIR "/dictionaries/demo-ccsds-sec.json"},
    };
    char first_sha[65] = "";
    for (int p = 0; p < 2; p++) {
        ulk_diag *dg = ulk_diag_create();
        ulk_dict *dy = NULL, *dj = NULL;
        assert_int_equal(ulk_dict_load(pairs[p][0], &dy, dg), 0);
        assert_int_equal(ulk_dict_load(pairs[p][1], &dj, dg), 0);
        if (ulk_diag_count(dg)) {
            ulk_diag_print(dg, stderr);
            fail_msg("the demo pair %s has findings", pairs[p][0]);
        }
        assert_int_equal(dy->link.profile, ULK_PROFILE_CCSDS_TC);
        assert_string_equal(dy->sha256, dj->sha256);
        assert_memory_equal(&dy->link, &dj->link, sizeof dy->link);
        assert_true(dy->n_commands >= 12);
        assert_int_equal(dy->link.tc.security.enabled, p);
        if (p == 0) snprintf(first_sha, sizeof first_sha, "%s", dy->sha256);
        else if (!strcmp(first_sha, dy->sha256)) fail_msg("the secured demo has the plain demo's hash");
        if (p == 1) {
            assert_int_equal(dy->link.tc.security.spi, 0x0101);
            assert_string_equal(dy->link.tc.security.key, "harrowick3-uplink");
            assert_int_equal(dy->link.tc.frame.sec_header_octets, 14);
            assert_int_equal(dy->link.tc.frame.sec_trailer_octets, 16);
        }
        ulk_dict_destroy(dy);
        ulk_dict_destroy(dj);
        ulk_diag_destroy(dg);
    }
}

int main(void)
{
    size_t nrows = sizeof rows / sizeof rows[0];
    struct CMUnitTest *t = calloc(nrows, sizeof *t);
    for (size_t i = 0; i < nrows; i++) {
        t[i].name = rows[i].name;
        t[i].test_func = run_row;
        t[i].initial_state = (void *)&rows[i];
    }
    int fails = _cmocka_run_group_tests("broken_ccsds_dictionaries", t, nrows, NULL, NULL);
    free(t);
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_model_yaml_json),
        cmocka_unit_test(test_defaults),
        cmocka_unit_test(test_canonical_segment_header),
        cmocka_unit_test(test_frame_limit_boundary),
        cmocka_unit_test(test_frame_limit_security),
        cmocka_unit_test(test_canonical_security),
        cmocka_unit_test(test_allocation_failures),
        cmocka_unit_test(test_demo_yaml_json_same_model),
    };
    fails += cmocka_run_group_tests_name("ccsds_dictionary", tests, NULL, NULL);
    return fails ? 1 : 0;
}
