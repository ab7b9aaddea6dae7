/* src/profiles/ccsds/tc_dict.c - the CCSDS telecommand profile's dictionary section
 * (ulk_profile_ops "dictionary section"; docs/spec/ccsds-tc.md section 1): the link section
 * (rates, subcarrier, the tc map and its security association), APIDs as system addresses,
 * one-octet opcodes, the frame limit on a command's arguments, and the canonical form. Read
 * through the loader's helpers (src/dict/dict_build.h), so every finding carries the
 * loader's file:line:col and wording.
 */
#include <stdio.h>
#include <string.h>

#include "dict_build.h"
#include "profiles.h"
#include "ulk/ccsds.h"
#include "ulk/sdls.h"

/* What link_parse learns as it goes. */
typedef struct {
    int rb_ok, fsc_ok;
} tcx;

/* What the command checks need, in the loader's state room (zeroed: not known). */
typedef struct {
    int tc_ok; /* the tc section is complete and valid: the frame limit can be checked */
} tc_state;
_Static_assert(sizeof(tc_state) <= ULK_DB_STATE_OCTETS, "the ccsds-tc dictionary state fits the loader's room");

/* r == 4000 / 2^n for some n in 0..9 (4000 down to 7.8125 bit/s). */
static int is_usual_tc_rate(ulk_ratio r)
{
    for (int n = 0; n <= 9; n++) {
        ulk_ratio u = ulk_ratio_make(4000, (int64_t)1 << n);
        if (u.num == r.num && u.den == r.den) return 1;
    }
    return 0;
}

/* link.tc.security: the Space Data Link Security association (ulk/sdls.h). Key names only:
 * key material lives in the key file given to compile and decode, never in a dictionary.
 * When the map is valid the frame layout gets room for the security header and trailer, so
 * the frame-size rules below count them. */
static void build_security(ulk_dict_build *c, ulk_node *sn, ulk_tc_params *T)
{
    if (!ulk_db_want_map(c, sn, "link.tc.security")) return;
    static const char *const sk[] = {"spi", "key", "service", "algorithm", "iv_octets", "mac_octets", "window", NULL};
    static const char *const sr[] = {"spi", "key", "service", NULL};
    size_t errs = ulk_db_errors(c);
    ulk_db_check_keys(c, sn, "link.tc.security", sk, sr);
    ulk_sdls_sa sa;
    ulk_sdls_sa_default(&sa);
    sa.enabled = 1;
    int64_t v;
    ulk_node *n;
    /* SPI 0 and 65535 are reserved (CCSDS 355.0-B-1 section 3.2.2, from memory). */
    if ((n = ulk_node_get(sn, "spi")) && ulk_db_int(c, n, 1, 65534, &v, "spi (Security Parameter Index, 1..65534)"))
        sa.spi = (uint16_t)v;
    const char *kn = NULL;
    if ((n = ulk_node_get(sn, "key")) && ulk_db_str(c, n, &kn)) {
        if (!ulk_sdls_key_name_ok(kn))
            ulk_db_err(c, n, "key must be the name of a key in the key file (1..47 letters, digits, '_', '.' or '-'), never key material");
        else snprintf(sa.key, sizeof sa.key, "%s", kn);
    }
    if ((n = ulk_node_get(sn, "service"))) {
        static const char *const sv[] = {"authentication", "authenticated-encryption"};
        int k = ulk_db_choice(c, n, sv, 2, "security service");
        if (k >= 0) sa.service = (ulk_sdls_service)k;
    }
    if ((n = ulk_node_get(sn, "algorithm"))) {
        static const char *const al[] = {"aes-256-gcm"};
        int k = ulk_db_choice(c, n, al, 1, "security algorithm");
        if (k >= 0) sa.algorithm = (ulk_sdls_algorithm)k;
    }
    if ((n = ulk_node_get(sn, "iv_octets")) &&
        ulk_db_int(c, n, ULK_SDLS_MIN_IV_OCTETS, ULK_SDLS_MAX_IV_OCTETS, &v, "iv_octets (the IV holds the 8-octet counter; 12..16)"))
        sa.iv_octets = (int)v;
    if ((n = ulk_node_get(sn, "mac_octets")) &&
        ulk_db_int(c, n, ULK_SDLS_MIN_MAC_OCTETS, ULK_SDLS_MAX_MAC_OCTETS, &v, "mac_octets (GCM tag of 96..128 bits; 12..16)"))
        sa.mac_octets = (int)v;
    if ((n = ulk_node_get(sn, "window")) && ulk_db_int(c, n, 1, ULK_SDLS_MAX_WINDOW, &v, "window (anti-replay window, 1..1048576)"))
        sa.window = (uint32_t)v;
    if (ulk_db_errors(c) != errs || !ulk_node_get(sn, "spi") || !ulk_node_get(sn, "key") ||
        !ulk_node_get(sn, "service"))
        return;
    char why[160];
    if (ulk_sdls_sa_check(&sa, why, sizeof why)) {
        ulk_db_err(c, sn, "security: %s", why);
        return;
    }
    T->security = sa;
    ulk_sdls_layout(&sa, &T->frame);
}

/* The link section of `profile: ccsds-tc` (docs/spec/ccsds-tc.md section 1): channel bit rate
 * R, line code, subcarrier (f_sc / R whole >= 1) and the tc section. Values outside the
 * usual telecommand practice warn; the practice figures are from memory of CCSDS 401.0-B (Issue 25, section 2.2),
 * so they never refuse a dictionary. */
void ulk_tc_link_parse(ulk_dict_build *c, ulk_node *ln)
{
    ulk_link *L = ulk_db_link(c);
    ulk_tc_params *T = &L->tc;
    static const char *const keys[] = {"profile", "bit_rate", "line_code", "subcarrier", "tc", NULL};
    static const char *const req[] = {"profile", "bit_rate", "subcarrier", "tc", NULL};
    tcx x = {0};
    /* One channel symbol per bit: R_s = R (section 3). */
    L->n_subbits = 1;
    L->zero[0] = 0;
    L->one[0] = 1;
    ulk_db_check_keys(c, ln, "link (profile ccsds-tc)", keys, req);

    ulk_node *rn = ulk_node_get(ln, "bit_rate");
    x.rb_ok = ulk_db_positive_ratio(c, rn, &L->bit_rate, "bit_rate");
    if (x.rb_ok && !is_usual_tc_rate(L->bit_rate))
        ulk_db_warn(c, rn,
             "bit rate %s bit/s is not one of the usual telecommand rates 4000/2^n bit/s (n = 0..9: 4000 ... 7.8125; from memory of CCSDS 401.0-B: a warning, not a rule)",
             rn->text);
    ulk_node *lc = ulk_node_get(ln, "line_code");
    if (lc) {
        static const char *const codes[] = {"nrz-l", "nrz-m"};
        int k = ulk_db_choice(c, lc, codes, 2, "line code");
        if (k >= 0) L->line_code = (ulk_line_code)k;
    }
    ulk_node *sc = ulk_node_get(ln, "subcarrier");
    int amp_ok;
    ulk_ratio amp_exact;
    ulk_node *fsc_node = ulk_db_subcarrier(c, sc, &x.fsc_ok, &amp_ok, &amp_exact);
    if (x.fsc_ok) {
        ulk_ratio f8 = ulk_ratio_make(8000, 1), f16 = ulk_ratio_make(16000, 1);
        int usual = (L->fsc.num == f8.num && L->fsc.den == f8.den) || (L->fsc.num == f16.num && L->fsc.den == f16.den);
        if (L->waveform != ULK_WAVE_SINE)
            ulk_db_warn(c, ulk_node_get(sc, "waveform"),
                 "a square subcarrier is outside the usual telecommand practice of a sine subcarrier (from memory of CCSDS 401.0-B: a warning, not a rule)");
        if (!usual)
            ulk_db_warn(c, fsc_node,
                 "subcarrier frequency %s Hz is outside the usual telecommand practice of 8 kHz or 16 kHz (from memory of CCSDS 401.0-B: a warning, not a rule)",
                 fsc_node->text);
    }
    if (x.rb_ok && x.fsc_ok) {
        ulk_ratio k;
        char bf[64], br[64], bk[64];
        if (ulk_ratio_div(L->fsc, L->bit_rate, &k)) {
            ulk_db_err(c, fsc_node, "subcarrier frequency and bit rate are too large to relate exactly");
        } else {
            ulk_ratio_format(L->fsc, bf, sizeof bf);
            ulk_ratio_format(L->bit_rate, br, sizeof br);
            ulk_ratio_format(k, bk, sizeof bk);
            if (k.den != 1 || k.num < 1)
                ulk_db_err(c, fsc_node, "subcarrier frequency %s Hz is not a whole multiple of the bit rate R = %s bit/s (f_sc / R = %s; it must be a whole number >= 1)",
                    bf, br, bk);
            else if (k.num < 2)
                ulk_db_warn(c, fsc_node, "subcarrier frequency %s Hz is below 2 * R = 2 * %s Hz: the data sidebands overlap the carrier", bf, br);
        }
    }

    ulk_node *tn = ulk_node_get(ln, "tc");
    if (!tn || !ulk_db_want_map(c, tn, "link.tc")) return;
    static const char *const tk[] = {"spacecraft_id", "virtual_channel", "service", "first_sequence",
                                     "segment_header", "fecf", "randomize", "acquisition_octets",
                                     "idle_octets", "start_errors", "correction", "security", NULL};
    static const char *const tr[] = {"spacecraft_id", "virtual_channel", "service", NULL};
    ulk_db_check_keys(c, tn, "link.tc", tk, tr);
    ulk_ccsds_tc_default(&T->frame);
    T->acquisition_octets = 16;
    T->idle_octets = 1;
    size_t errs = ulk_db_errors(c);
    int complete = ulk_node_get(tn, "spacecraft_id") && ulk_node_get(tn, "virtual_channel") && ulk_node_get(tn, "service");
    int64_t v;
    ulk_node *n;
    if ((n = ulk_node_get(tn, "spacecraft_id")) && ulk_db_int(c, n, 0, ULK_TCF_MAX_SCID, &v, "spacecraft_id (SCID, 10 bits)"))
        T->frame.spacecraft_id = (uint16_t)v;
    if ((n = ulk_node_get(tn, "virtual_channel")) && ulk_db_int(c, n, 0, ULK_TCF_MAX_VCID, &v, "virtual_channel (VCID, 6 bits)"))
        T->frame.virtual_channel = (uint8_t)v;
    if ((n = ulk_node_get(tn, "service"))) {
        static const char *const sv[] = {"expedited", "sequence-controlled"};
        int k = ulk_db_choice(c, n, sv, 2, "service");
        if (k >= 0) T->frame.service = (ulk_tc_service)k;
    }
    if ((n = ulk_node_get(tn, "first_sequence")) && ulk_db_int(c, n, 0, 255, &v, "first_sequence (N(S), 8 bits)")) {
        T->first_sequence = (uint8_t)v;
        if (v != 0 && T->frame.service == ULK_TC_EXPEDITED)
            ulk_db_warn(c, n, "first_sequence %lld has no effect with service expedited (N(S) is 0 in Type-BD frames)",
                 (long long)v);
    }
    if ((n = ulk_node_get(tn, "segment_header")) && ulk_db_want_map(c, n, "link.tc.segment_header")) {
        static const char *const mk[] = {"map_id", NULL};
        ulk_db_check_keys(c, n, "link.tc.segment_header", mk, mk);
        ulk_node *mn = ulk_node_get(n, "map_id");
        if (mn && ulk_db_int(c, mn, 0, ULK_TCF_MAX_MAP_ID, &v, "map_id (MAP ID, 6 bits)")) {
            T->frame.segment_header = 1;
            T->frame.map_id = (uint8_t)v;
        }
    }
    if ((n = ulk_node_get(tn, "fecf"))) ulk_db_bool(c, n, &T->frame.fecf);
    if ((n = ulk_node_get(tn, "randomize"))) ulk_db_bool(c, n, &T->frame.randomize);
    /* 10^8 octets is over two days at 4 kbit/s: beyond it is a typing error. */
    if ((n = ulk_node_get(tn, "acquisition_octets")) && ulk_db_int(c, n, 0, 100000000, &v, "acquisition_octets")) {
        T->acquisition_octets = (uint32_t)v;
        if (v < 16)
            ulk_db_warn(c, n, "acquisition sequence of %lld octets is short (< 16): the decoder may not acquire the signal before the first CLTU",
                 (long long)v);
    }
    if ((n = ulk_node_get(tn, "idle_octets")) && ulk_db_int(c, n, 0, 100000000, &v, "idle_octets"))
        T->idle_octets = (uint32_t)v;
    if ((n = ulk_node_get(tn, "start_errors")) && ulk_db_int(c, n, 0, 1, &v, "start_errors (start-sequence bit errors tolerated)"))
        T->frame.start_errors = (int)v;
    if ((n = ulk_node_get(tn, "correction"))) {
        static const char *const cm[] = {"sec", "ted"};
        int k = ulk_db_choice(c, n, cm, 2, "correction mode");
        if (k >= 0) T->frame.correction = (ulk_bch_mode)k;
    }
    if ((n = ulk_node_get(tn, "security"))) build_security(c, n, T);
    char why[160];
    if (complete && ulk_db_errors(c) == errs) {
        if (ulk_ccsds_tc_check(&T->frame, why, sizeof why) == 0) ((tc_state *)ulk_db_state(c))->tc_ok = 1;
        else ulk_db_err(c, tn, "tc section: %s", why);
    }
}

/* The address is the APID: 11 bits, 0x7FF being the idle packets'
 * (CCSDS 133.0-B-2 section 4.1.3.3.4, from memory). */
int ulk_tc_system_address(ulk_dict_build *c, ulk_node *an, uint32_t *out)
{
    int64_t v;
    if (!ulk_db_int(c, an, 0, INT64_MAX, &v, "system address (APID)")) return 0;
    if (v == ULK_SPP_APID_IDLE)
        ulk_db_err(c, an, "APID 0x7FF is reserved for idle packets: a system cannot have it");
    else if (v > ULK_SPP_MAX_APID)
        ulk_db_err(c, an, "APID %lld does not fit in 11 bits (0..0x7FE)", (long long)v);
    else {
        *out = (uint32_t)v;
        return 1;
    }
    return 0;
}

int ulk_tc_opcode_fits(ulk_dict_build *c, ulk_node *n, int64_t v)
{
    if (v > 255) {
        ulk_db_err(c, n, "opcode %lld does not fit in the one octet of a ccsds-tc packet (0..255)", (long long)v);
        return 0;
    }
    return 1;
}

/* One packet in one frame: opcode octet + arguments to whole octets. */
void ulk_tc_command_check(ulk_dict_build *c, const ulk_command *k, ulk_node *args)
{
    if (!((const tc_state *)ulk_db_state(c))->tc_ok) return;
    const ulk_ccsds_tc *tc = &ulk_db_link(c)->tc.frame;
    size_t data = 1 + ((size_t)k->packed_bits + 7) / 8;
    if (data > ulk_ccsds_max_data_octets(tc))
        ulk_db_err(c, args,
                   "arguments take %d bits: the packet data field would be %zu octets and the TC frame %zu octets%s, over the %d-octet limit of a frame (at most %zu data octets here)",
                   k->packed_bits, data, ulk_tcf_octets(tc, ULK_SPP_HDR_OCTETS + data),
                   tc->sec_header_octets ? " with its security header and trailer" : "", ULK_TCF_MAX_OCTETS,
                   ulk_ccsds_max_data_octets(tc));
}

/* The link object of the canonical form (docs/dictionary.md section 6), keys in byte order. */
void ulk_tc_link_canonical(ulk_dict_text *b, const ulk_link *L)
{
    const ulk_tc_params *T = &L->tc;
    ulk_text_puts(b, "{\"bit_rate\":");
    ulk_dt_ratio(b, L->bit_rate);
    ulk_text_puts(b, ",\"line_code\":");
    ulk_text_json_str(b, ulk_line_code_name(L->line_code));
    ulk_text_puts(b, ",\"profile\":\"ccsds-tc\",\"subcarrier\":{\"amplitude\":");
    ulk_dt_double(b, L->amplitude);
    ulk_text_puts(b, ",\"frequency\":");
    ulk_dt_ratio(b, L->fsc);
    ulk_text_puts(b, ",\"waveform\":");
    ulk_text_json_str(b, ulk_waveform_name(L->waveform));
    ulk_text_printf(b, "},\"tc\":{\"acquisition_octets\":%u,\"correction\":\"%s\",\"fecf\":%s,\"first_sequence\":%u",
              T->acquisition_octets, T->frame.correction == ULK_BCH_TED ? "ted" : "sec",
              T->frame.fecf ? "true" : "false", T->first_sequence);
    ulk_text_printf(b, ",\"idle_octets\":%u,\"randomize\":%s", T->idle_octets, T->frame.randomize ? "true" : "false");
    if (T->frame.segment_header) ulk_text_printf(b, ",\"segment_header\":{\"map_id\":%u}", T->frame.map_id);
    if (T->security.enabled) {
        const ulk_sdls_sa *sa = &T->security;
        ulk_text_printf(b, ",\"security\":{\"algorithm\":\"aes-256-gcm\",\"iv_octets\":%d,\"key\":", sa->iv_octets);
        ulk_text_json_str(b, sa->key);
        ulk_text_printf(b, ",\"mac_octets\":%d,\"service\":\"%s\",\"spi\":%u,\"window\":%u}", sa->mac_octets,
                  ulk_sdls_service_name(sa->service), (unsigned)sa->spi, (unsigned)sa->window);
    }
    ulk_text_printf(b, ",\"service\":\"%s\",\"spacecraft_id\":%u,\"start_errors\":%d,\"virtual_channel\":%u}}",
              T->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled" : "expedited",
              T->frame.spacecraft_id, T->frame.start_errors, T->frame.virtual_channel);
}

/* R_b = 56/64 of the channel rate: a BCH codeblock carries 56 information bits in 64
 * (CCSDS 231.0-B-4 section 3, from memory); start sequence, tail and idle are left out. */
ulk_ratio ulk_tc_info_bit_rate(const ulk_link *l)
{
    ulk_ratio rb;
    if (ulk_ratio_mul_int(l->bit_rate, 7, &rb) || ulk_ratio_div(rb, ulk_ratio_make(8, 1), &rb)) return l->bit_rate;
    return rb;
}
