/* src/ccsds.c - the bit layer of the CCSDS telecommand profile: Space Packets (CCSDS
 * 133.0-B-2 section 4.1.3), TC Transfer Frames (CCSDS 232.0-B-4 sections 4.1.2 to 4.1.4), and the TC
 * synchronization and channel coding of CCSDS 231.0-B-4 (pseudo-randomizer section 6, BCH(63,56)
 * codeblocks section 3, CLTUs section 5); section numbers from memory (docs/spec/ccsds-tc.md section 5).
 *
 * Bit order everywhere: the first bit sent is the most significant bit of the first octet.
 * For the BCH code a 63-bit word is held in a uint64_t with the first bit sent at bit 62,
 * i.e. bit d is the coefficient of x^d of the code polynomial.
 *
 * Nothing here allocates. The only shared state is the SEC syndrome table, derived once
 * from the generator polynomial (pthread_once), so that a wrong table cannot be typed in.
 */
#include "ulk/ccsds.h"

#include <pthread.h>
#include <stdarg.h>
#include <stdio.h>
#include <string.h>

#include "ulk/error.h"

/* ---- configuration ---- */

void ulk_ccsds_tc_default(ulk_ccsds_tc *tc)
{
    if (!tc) return;
    memset(tc, 0, sizeof *tc);
    tc->service = ULK_TC_EXPEDITED;
    tc->fecf = 1;
    tc->randomize = 1;
    tc->start_errors = 0;
    tc->correction = ULK_BCH_SEC;
}

static int tc_fail(char *err, size_t errlen, const char *msg)
{
    if (err && errlen) snprintf(err, errlen, "%s", msg);
    return ULK_EINVAL;
}

int ulk_ccsds_tc_check(const ulk_ccsds_tc *tc, char *err, size_t errlen)
{
    if (err && errlen) err[0] = 0;
    if (!tc) return tc_fail(err, errlen, "no tc configuration");
    if (tc->spacecraft_id > ULK_TCF_MAX_SCID)
        return tc_fail(err, errlen, "spacecraft_id must be 0..1023");
    if (tc->virtual_channel > ULK_TCF_MAX_VCID)
        return tc_fail(err, errlen, "virtual_channel must be 0..63");
    if (tc->service != ULK_TC_EXPEDITED && tc->service != ULK_TC_SEQUENCE_CONTROLLED)
        return tc_fail(err, errlen, "service must be expedited or sequence-controlled");
    if (tc->segment_header != 0 && tc->segment_header != 1)
        return tc_fail(err, errlen, "segment_header must be 0 or 1");
    if (tc->map_id > ULK_TCF_MAX_MAP_ID) return tc_fail(err, errlen, "map_id must be 0..63");
    if (tc->fecf != 0 && tc->fecf != 1) return tc_fail(err, errlen, "fecf must be 0 or 1");
    if (tc->randomize != 0 && tc->randomize != 1)
        return tc_fail(err, errlen, "randomize must be 0 or 1");
    if (tc->start_errors != 0 && tc->start_errors != 1)
        return tc_fail(err, errlen, "start_errors must be 0 or 1");
    if (tc->correction != ULK_BCH_SEC && tc->correction != ULK_BCH_TED)
        return tc_fail(err, errlen, "correction must be sec or ted");
    if (tc->sec_header_octets > 64 || tc->sec_trailer_octets > 64 ||
        (tc->sec_header_octets > 0 && tc->sec_header_octets < 3) ||
        (tc->sec_header_octets == 0 && tc->sec_trailer_octets > 0))
        return tc_fail(err, errlen, "security header must be 0 or 3..64 octets, trailer 0..64 (0 without header)");
    return ULK_OK;
}

static size_t frame_overhead(const ulk_ccsds_tc *tc)
{
    return ULK_TCF_HDR_OCTETS + (tc->segment_header ? ULK_TCF_SEG_OCTETS : 0) + tc->sec_header_octets +
           tc->sec_trailer_octets + (tc->fecf ? ULK_TCF_FECF_OCTETS : 0);
}

size_t ulk_ccsds_max_data_octets(const ulk_ccsds_tc *tc)
{
    return ULK_TCF_MAX_OCTETS - frame_overhead(tc) - ULK_SPP_HDR_OCTETS;
}

/* ---- Space Packet ---- */

int ulk_spp_hdr_pack(const ulk_spp_hdr *h, uint8_t out[ULK_SPP_HDR_OCTETS])
{
    if (!h || !out) return ULK_EINVAL;
    if (h->version > 7 || h->type > 1 || h->sec_hdr_flag > 1 || h->apid > 0x7FF ||
        h->seq_flags > 3 || h->seq_count > ULK_SPP_MAX_SEQ_COUNT)
        return ULK_EINVAL;
    uint16_t w0 = (uint16_t)(h->version << 13 | h->type << 12 | h->sec_hdr_flag << 11 | h->apid);
    uint16_t w1 = (uint16_t)(h->seq_flags << 14 | h->seq_count);
    out[0] = (uint8_t)(w0 >> 8);
    out[1] = (uint8_t)w0;
    out[2] = (uint8_t)(w1 >> 8);
    out[3] = (uint8_t)w1;
    out[4] = (uint8_t)(h->data_length >> 8);
    out[5] = (uint8_t)h->data_length;
    return ULK_OK;
}

void ulk_spp_hdr_unpack(const uint8_t in[ULK_SPP_HDR_OCTETS], ulk_spp_hdr *h)
{
    uint16_t w0 = (uint16_t)(in[0] << 8 | in[1]), w1 = (uint16_t)(in[2] << 8 | in[3]);
    h->version = (uint8_t)(w0 >> 13);
    h->type = (uint8_t)(w0 >> 12 & 1);
    h->sec_hdr_flag = (uint8_t)(w0 >> 11 & 1);
    h->apid = (uint16_t)(w0 & 0x7FF);
    h->seq_flags = (uint8_t)(w1 >> 14);
    h->seq_count = (uint16_t)(w1 & 0x3FFF);
    h->data_length = (uint16_t)(in[4] << 8 | in[5]);
}

int ulk_spp_build(uint16_t apid, uint16_t seq_count, const uint8_t *data, size_t n_data,
                  uint8_t *out, size_t cap, size_t *n_out)
{
    if (!data || !out || !n_out) return ULK_EINVAL;
    if (apid > ULK_SPP_MAX_APID || seq_count > ULK_SPP_MAX_SEQ_COUNT) return ULK_EINVAL;
    if (n_data == 0 || n_data > 65536) return ULK_EINVAL;
    if (cap < ULK_SPP_HDR_OCTETS + n_data) return ULK_ELIMIT;
    ulk_spp_hdr h = {.version = 0, .type = ULK_SPP_TYPE_TC, .sec_hdr_flag = 0, .apid = apid,
                     .seq_flags = ULK_SPP_SEQ_UNSEGMENTED, .seq_count = seq_count,
                     .data_length = (uint16_t)(n_data - 1)};
    ulk_spp_hdr_pack(&h, out);
    memcpy(out + ULK_SPP_HDR_OCTETS, data, n_data);
    *n_out = ULK_SPP_HDR_OCTETS + n_data;
    return ULK_OK;
}

int ulk_spp_parse(const uint8_t *p, size_t n, ulk_spp_packet *out)
{
    if (!p || !out) return ULK_EINVAL;
    memset(out, 0, sizeof *out);
    if (n >= ULK_SPP_HDR_OCTETS) ulk_spp_hdr_unpack(p, &out->hdr);
    const ulk_spp_hdr *h = &out->hdr;
    if (n < ULK_SPP_HDR_OCTETS + 1) out->verdict = ULK_SPP_TOO_SHORT;
    else if (h->version != 0) out->verdict = ULK_SPP_VERSION;
    else if (h->type != ULK_SPP_TYPE_TC) out->verdict = ULK_SPP_TYPE;
    else if (h->sec_hdr_flag) out->verdict = ULK_SPP_SEC_HDR;
    else if (h->apid == ULK_SPP_APID_IDLE) out->verdict = ULK_SPP_IDLE_APID;
    else if (h->seq_flags != ULK_SPP_SEQ_UNSEGMENTED) out->verdict = ULK_SPP_SEQ_FLAGS;
    else if ((size_t)h->data_length + 1 + ULK_SPP_HDR_OCTETS != n) out->verdict = ULK_SPP_LENGTH;
    else {
        out->verdict = ULK_SPP_OK;
        out->data = p + ULK_SPP_HDR_OCTETS;
        out->n_data = n - ULK_SPP_HDR_OCTETS;
    }
    return ULK_OK;
}

const char *ulk_spp_verdict_str(ulk_spp_verdict v)
{
    switch (v) {
    case ULK_SPP_OK: return "ok";
    case ULK_SPP_TOO_SHORT: return "packet too short";
    case ULK_SPP_VERSION: return "packet version not 000";
    case ULK_SPP_TYPE: return "packet is not a telecommand";
    case ULK_SPP_SEC_HDR: return "packet has a secondary header";
    case ULK_SPP_IDLE_APID: return "idle APID 0x7FF";
    case ULK_SPP_SEQ_FLAGS: return "packet sequence flags not 11";
    case ULK_SPP_LENGTH: return "packet data length mismatch";
    }
    return "unknown packet verdict";
}

int ulk_ccsds_command_data(uint32_t opcode, const uint8_t *arg_bits, size_t n_arg_bits,
                           uint8_t *out, size_t cap, size_t *n_out)
{
    if (!out || !n_out || (n_arg_bits && !arg_bits)) return ULK_EINVAL;
    if (opcode > 255) return ULK_EINVAL;
    size_t n = 1 + (n_arg_bits + 7) / 8;
    if (cap < n) return ULK_ELIMIT;
    memset(out, 0, n);
    out[0] = (uint8_t)opcode;
    for (size_t i = 0; i < n_arg_bits; i++)
        if (arg_bits[i]) out[1 + i / 8] |= (uint8_t)(0x80u >> (i % 8));
    *n_out = n;
    return ULK_OK;
}

/* ---- TC Transfer Frame ---- */

int ulk_tcf_hdr_pack(const ulk_tcf_hdr *h, uint8_t out[ULK_TCF_HDR_OCTETS])
{
    if (!h || !out) return ULK_EINVAL;
    if (h->version > 3 || h->bypass > 1 || h->ctrl_cmd > 1 || h->spare > 3 ||
        h->scid > ULK_TCF_MAX_SCID || h->vcid > ULK_TCF_MAX_VCID || h->frame_length > 1023)
        return ULK_EINVAL;
    uint16_t w0 = (uint16_t)(h->version << 14 | h->bypass << 13 | h->ctrl_cmd << 12 |
                             h->spare << 10 | h->scid);
    uint16_t w1 = (uint16_t)(h->vcid << 10 | h->frame_length);
    out[0] = (uint8_t)(w0 >> 8);
    out[1] = (uint8_t)w0;
    out[2] = (uint8_t)(w1 >> 8);
    out[3] = (uint8_t)w1;
    out[4] = h->seq_num;
    return ULK_OK;
}

void ulk_tcf_hdr_unpack(const uint8_t in[ULK_TCF_HDR_OCTETS], ulk_tcf_hdr *h)
{
    uint16_t w0 = (uint16_t)(in[0] << 8 | in[1]), w1 = (uint16_t)(in[2] << 8 | in[3]);
    h->version = (uint8_t)(w0 >> 14);
    h->bypass = (uint8_t)(w0 >> 13 & 1);
    h->ctrl_cmd = (uint8_t)(w0 >> 12 & 1);
    h->spare = (uint8_t)(w0 >> 10 & 3);
    h->scid = (uint16_t)(w0 & 0x3FF);
    h->vcid = (uint8_t)(w1 >> 10);
    h->frame_length = (uint16_t)(w1 & 0x3FF);
    h->seq_num = in[4];
}

uint16_t ulk_tcf_crc16(const uint8_t *p, size_t n)
{
    uint16_t crc = 0xFFFF;
    for (size_t i = 0; i < n; i++) {
        crc ^= (uint16_t)(p[i] << 8);
        for (int b = 0; b < 8; b++)
            crc = (uint16_t)(crc & 0x8000 ? (crc << 1) ^ 0x1021 : crc << 1);
    }
    return crc;
}

size_t ulk_tcf_octets(const ulk_ccsds_tc *tc, size_t n_data) { return frame_overhead(tc) + n_data; }

int ulk_tcf_build(const ulk_ccsds_tc *tc, uint8_t seq_num, const uint8_t *data, size_t n_data,
                  uint8_t *out, size_t cap, size_t *n_out)
{
    if (!data || !out || !n_out || n_data == 0) return ULK_EINVAL;
    if (ulk_ccsds_tc_check(tc, NULL, 0) < 0) return ULK_EINVAL;
    size_t n = ulk_tcf_octets(tc, n_data);
    if (n > ULK_TCF_MAX_OCTETS || n > cap) return ULK_ELIMIT;
    int expedited = tc->service == ULK_TC_EXPEDITED;
    ulk_tcf_hdr h = {.version = 0, .bypass = (uint8_t)expedited, .ctrl_cmd = 0, .spare = 0,
                     .scid = tc->spacecraft_id, .vcid = tc->virtual_channel,
                     .frame_length = (uint16_t)(n - 1), .seq_num = expedited ? 0 : seq_num};
    ulk_tcf_hdr_pack(&h, out);
    size_t pos = ULK_TCF_HDR_OCTETS;
    if (tc->segment_header) out[pos++] = (uint8_t)(3u << 6 | tc->map_id);
    /* security header and trailer: zero here, filled by ulk_sdls_protect (which redoes the FECF) */
    memset(out + pos, 0, tc->sec_header_octets);
    pos += tc->sec_header_octets;
    memcpy(out + pos, data, n_data);
    pos += n_data;
    memset(out + pos, 0, tc->sec_trailer_octets);
    pos += tc->sec_trailer_octets;
    if (tc->fecf) {
        uint16_t c = ulk_tcf_crc16(out, pos);
        out[pos++] = (uint8_t)(c >> 8);
        out[pos++] = (uint8_t)c;
    }
    *n_out = pos;
    return ULK_OK;
}

int ulk_tcf_parse(const ulk_ccsds_tc *tc, const uint8_t *f, size_t n, ulk_tcf_frame *out)
{
    if (!f || !out) return ULK_EINVAL;
    if (ulk_ccsds_tc_check(tc, NULL, 0) < 0) return ULK_EINVAL;
    memset(out, 0, sizeof *out);
    if (n < ULK_TCF_HDR_OCTETS) { out->verdict = ULK_TCF_TOO_SHORT; return ULK_OK; }
    ulk_tcf_hdr_unpack(f, &out->hdr);
    const ulk_tcf_hdr *h = &out->hdr;
    size_t seg = tc->segment_header ? ULK_TCF_SEG_OCTETS : 0;
    size_t fecf = tc->fecf ? ULK_TCF_FECF_OCTETS : 0;
    if (h->version != 0) { out->verdict = ULK_TCF_VERSION; return ULK_OK; }
    if ((size_t)h->frame_length + 1 != n) { out->verdict = ULK_TCF_LENGTH; return ULK_OK; }
    size_t sech = tc->sec_header_octets, sect = tc->sec_trailer_octets;
    if (n < ULK_TCF_HDR_OCTETS + seg + sech + sect + fecf + 1) { out->verdict = ULK_TCF_TOO_SHORT; return ULK_OK; }
    if (fecf) {
        out->fecf_received = (uint16_t)(f[n - 2] << 8 | f[n - 1]);
        out->fecf_computed = ulk_tcf_crc16(f, n - 2);
        if (out->fecf_received != out->fecf_computed) { out->verdict = ULK_TCF_FECF; return ULK_OK; }
    }
    if (seg) {
        out->seg_flags = (uint8_t)(f[ULK_TCF_HDR_OCTETS] >> 6);
        out->map_id = (uint8_t)(f[ULK_TCF_HDR_OCTETS] & 0x3F);
    }
    if (h->ctrl_cmd) out->verdict = ULK_TCF_CTRL_CMD;
    else if (h->scid != tc->spacecraft_id) out->verdict = ULK_TCF_SCID;
    else if (h->vcid != tc->virtual_channel) out->verdict = ULK_TCF_VCID;
    else if (seg && (out->seg_flags != 3 || out->map_id != tc->map_id)) out->verdict = ULK_TCF_SEGMENT;
    else {
        out->verdict = ULK_TCF_OK;
        out->data = f + ULK_TCF_HDR_OCTETS + seg + sech;
        out->n_data = n - ULK_TCF_HDR_OCTETS - seg - sech - sect - fecf;
    }
    return ULK_OK;
}

const char *ulk_tcf_verdict_str(ulk_tcf_verdict v)
{
    switch (v) {
    case ULK_TCF_OK: return "ok";
    case ULK_TCF_TOO_SHORT: return "frame too short";
    case ULK_TCF_VERSION: return "frame version not 00";
    case ULK_TCF_LENGTH: return "frame length mismatch";
    case ULK_TCF_FECF: return "FECF mismatch";
    case ULK_TCF_CTRL_CMD: return "control command frame";
    case ULK_TCF_SCID: return "spacecraft id mismatch";
    case ULK_TCF_VCID: return "virtual channel mismatch";
    case ULK_TCF_SEGMENT: return "segment header mismatch";
    }
    return "unknown frame verdict";
}

/* ---- pseudo-randomizer ---- */

/* Fibonacci register: bit k holds s(n+k); output s(n); s(n+8) = XOR of s(n+k) over the
 * terms x^k (k < 8) of h(x), which is the recurrence whose characteristic polynomial is h. */
static void random_apply(uint8_t *p, size_t n, int xor_into)
{
    unsigned r = 0xFF;
    const unsigned taps = ULK_TC_RANDOMIZER_POLY & 0xFF;
    for (size_t i = 0; i < n; i++) {
        unsigned octet = 0;
        for (int b = 0; b < 8; b++) {
            octet = octet << 1 | (r & 1);
            unsigned fb = (unsigned)__builtin_parity(r & taps);
            r = r >> 1 | fb << 7;
        }
        p[i] = (uint8_t)(xor_into ? p[i] ^ octet : octet);
    }
}

void ulk_tc_random_sequence(uint8_t *out, size_t n) { random_apply(out, n, 0); }
void ulk_tc_randomize(uint8_t *p, size_t n) { random_apply(p, n, 1); }

/* ---- BCH(63,56) ---- */

/* Remainder by g(x) of a polynomial of degree <= 62. */
static unsigned mod_g(uint64_t v)
{
    for (int d = 62; d >= 7; d--)
        if (v >> d & 1) v ^= (uint64_t)ULK_BCH_GENERATOR << (d - 7);
    return (unsigned)(v & 0x7F);
}

/* syndrome -> degree of the single error that produces it, -1 for none. */
static int8_t g_sec_table[128];
static pthread_once_t g_sec_once = PTHREAD_ONCE_INIT;

static void sec_table_init(void)
{
    memset(g_sec_table, -1, sizeof g_sec_table);
    for (int d = 0; d < 63; d++) g_sec_table[mod_g(1ull << d)] = (int8_t)d;
}

static uint64_t load_be(const uint8_t *p, int n)
{
    uint64_t v = 0;
    for (int i = 0; i < n; i++) v = v << 8 | p[i];
    return v;
}

void ulk_bch_encode(const uint8_t info[ULK_CB_INFO_OCTETS], uint8_t cb[ULK_CB_OCTETS])
{
    uint64_t i = load_be(info, ULK_CB_INFO_OCTETS);
    unsigned parity = mod_g(i << 7);
    memmove(cb, info, ULK_CB_INFO_OCTETS);
    cb[7] = (uint8_t)((~parity & 0x7F) << 1); /* complemented parity, filler bit 0 */
}

/* The 63 coded bits with the parity complement undone. */
static uint64_t received_word(const uint8_t cb[ULK_CB_OCTETS])
{
    return (load_be(cb, ULK_CB_OCTETS) >> 1) ^ 0x7F;
}

unsigned ulk_bch_syndrome(const uint8_t cb[ULK_CB_OCTETS]) { return mod_g(received_word(cb)); }

ulk_cb_verdict ulk_bch_decode(ulk_bch_mode mode, const uint8_t cb[ULK_CB_OCTETS],
                              uint8_t info[ULK_CB_INFO_OCTETS], int *bit)
{
    pthread_once(&g_sec_once, sec_table_init);
    uint64_t r = received_word(cb);
    unsigned s = mod_g(r);
    ulk_cb_verdict v = ULK_CB_CLEAN;
    if (bit) *bit = -1;
    if (s) {
        int d = mode == ULK_BCH_SEC ? g_sec_table[s] : -1;
        if (d < 0) return ULK_CB_REJECTED;
        r ^= 1ull << d;
        if (bit) *bit = 62 - d;
        v = ULK_CB_CORRECTED;
    }
    if (info) {
        uint64_t i = r >> 7;
        for (int k = ULK_CB_INFO_OCTETS - 1; k >= 0; k--, i >>= 8) info[k] = (uint8_t)i;
    }
    return v;
}

/* ---- CLTU ---- */

size_t ulk_cltu_octets(size_t n_frame)
{
    return 2 + ULK_CB_OCTETS * ((n_frame + ULK_CB_INFO_OCTETS - 1) / ULK_CB_INFO_OCTETS) + 8;
}

int ulk_cltu_build(const ulk_ccsds_tc *tc, const uint8_t *frame, size_t n_frame, uint8_t *out,
                   size_t cap, size_t *n_out)
{
    if (!frame || !out || !n_out || n_frame == 0) return ULK_EINVAL;
    if (ulk_ccsds_tc_check(tc, NULL, 0) < 0) return ULK_EINVAL;
    if (n_frame > ULK_TCF_MAX_OCTETS) return ULK_ELIMIT;
    size_t n = ulk_cltu_octets(n_frame);
    if (cap < n) return ULK_ELIMIT;
    /* Randomize a copy: the fill of the last codeblock stays 0x55 (profile section 2.4). */
    uint8_t data[ULK_CLTU_MAX_CODEBLOCKS * ULK_CB_INFO_OCTETS];
    size_t n_cb = (n_frame + ULK_CB_INFO_OCTETS - 1) / ULK_CB_INFO_OCTETS;
    memcpy(data, frame, n_frame);
    if (tc->randomize) ulk_tc_randomize(data, n_frame);
    memset(data + n_frame, ULK_CLTU_FILL_OCTET, n_cb * ULK_CB_INFO_OCTETS - n_frame);
    size_t pos = 0;
    out[pos++] = (uint8_t)(ULK_CLTU_START_SEQ >> 8);
    out[pos++] = (uint8_t)ULK_CLTU_START_SEQ;
    for (size_t k = 0; k < n_cb; k++, pos += ULK_CB_OCTETS)
        ulk_bch_encode(data + k * ULK_CB_INFO_OCTETS, out + pos);
    for (int i = 7; i >= 0; i--) out[pos++] = (uint8_t)(ULK_CLTU_TAIL_SEQ >> (8 * i));
    *n_out = pos;
    return ULK_OK;
}

void ulk_octets_to_bits(const uint8_t *p, size_t n, uint8_t *bits)
{
    for (size_t i = 0; i < n; i++)
        for (int b = 0; b < 8; b++) bits[8 * i + (size_t)b] = (uint8_t)(p[i] >> (7 - b) & 1);
}

void ulk_cltu_idle_bits(uint8_t *bits, size_t n_bits)
{
    for (size_t i = 0; i < n_bits; i++) bits[i] = (uint8_t)(i & 1);
}

int ulk_ccsds_command_cltu(const ulk_ccsds_tc *tc, const ulk_tc_command *c, uint8_t *out,
                           size_t cap, size_t *n_out)
{
    if (!c || !out || !n_out) return ULK_EINVAL;
    if (ulk_ccsds_tc_check(tc, NULL, 0) < 0) return ULK_EINVAL;
    uint8_t data[ULK_TCF_MAX_OCTETS], packet[ULK_TCF_MAX_OCTETS], frame[ULK_TCF_MAX_OCTETS];
    size_t n_data, n_packet, n_frame;
    /* A data field that cannot fit a frame is a limit, not a bad argument. */
    if (1 + (c->n_arg_bits + 7) / 8 > ulk_ccsds_max_data_octets(tc)) return ULK_ELIMIT;
    int rc = ulk_ccsds_command_data(c->opcode, c->arg_bits, c->n_arg_bits, data, sizeof data, &n_data);
    if (rc < 0) return rc;
    rc = ulk_spp_build(c->apid, c->seq_count, data, n_data, packet, sizeof packet, &n_packet);
    if (rc < 0) return rc;
    rc = ulk_tcf_build(tc, c->frame_seq, packet, n_packet, frame, sizeof frame, &n_frame);
    if (rc < 0) return rc;
    return ulk_cltu_build(tc, frame, n_frame, out, cap, n_out);
}

/* ---- CLTU decoding ---- */

const char *ulk_cltu_verdict_str(ulk_cltu_verdict v)
{
    switch (v) {
    case ULK_CLTU_ACCEPTED: return "accepted";
    case ULK_CLTU_NO_START: return "start";
    case ULK_CLTU_TRUNCATED: return "truncated";
    case ULK_CLTU_CODEBLOCK: return "codeblock";
    case ULK_CLTU_FRAME_HEADER: return "frame header";
    case ULK_CLTU_FECF: return "FECF";
    case ULK_CLTU_PACKET: return "packet";
    case ULK_CLTU_SECURED: return "secured";
    }
    return "unknown CLTU verdict";
}

static void set_reason(ulk_cltu_result *res, ulk_cltu_verdict v, const char *fmt, ...)
    __attribute__((format(printf, 3, 4)));
static void set_reason(ulk_cltu_result *res, ulk_cltu_verdict v, const char *fmt, ...)
{
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(res->reason, sizeof res->reason, fmt, ap);
    va_end(ap);
    res->verdict = v;
}

int ulk_cltu_decode(const ulk_ccsds_tc *tc, const uint8_t *bits, size_t n_bits, size_t from_bit,
                    ulk_cltu_result *res)
{
    if (!bits || !res) return ULK_EINVAL;
    if (ulk_ccsds_tc_check(tc, NULL, 0) < 0) return ULK_EINVAL;
    memset(res, 0, sizeof *res);
    res->rejected_codeblock = -1;

    /* 1. Start sequence: a 16-bit window within start_errors of EB90. */
    uint32_t w = 0;
    size_t start = (size_t)-1;
    for (size_t j = from_bit; j < n_bits; j++) {
        w = (w << 1 | (bits[j] != 0)) & 0xFFFF;
        if (j + 1 - from_bit < ULK_CLTU_START_BITS) continue;
        int e = __builtin_popcount(w ^ ULK_CLTU_START_SEQ);
        if (e <= tc->start_errors) {
            start = j + 1 - ULK_CLTU_START_BITS;
            res->start_errors = e;
            break;
        }
    }
    if (start == (size_t)-1) {
        res->end_bit = n_bits >= from_bit + (ULK_CLTU_START_BITS - 1)
                           ? n_bits - (ULK_CLTU_START_BITS - 1) : from_bit;
        set_reason(res, ULK_CLTU_NO_START, "no start sequence within %d bit error%s",
                   tc->start_errors, tc->start_errors == 1 ? "" : "s");
        return ULK_OK;
    }
    res->start_bit = start;

    /* 2. Codeblocks until one is rejected (the tail always is), the bits run out, or the
     * largest frame's worth has been decoded. */
    uint8_t data[(ULK_CLTU_MAX_CODEBLOCKS + 1) * ULK_CB_INFO_OCTETS];
    enum { STOP_REJECT, STOP_END_OF_BITS, STOP_LIMIT } stop;
    size_t cb0 = start + ULK_CLTU_START_BITS;
    int k = 0;
    for (;; k++) {
        size_t at = cb0 + (size_t)k * ULK_CB_BITS;
        if (n_bits < ULK_CB_BITS || at > n_bits - ULK_CB_BITS) { stop = STOP_END_OF_BITS; break; }
        uint8_t cb[ULK_CB_OCTETS] = {0};
        for (int b = 0; b < ULK_CB_BITS; b++)
            cb[b / 8] |= (uint8_t)((bits[at + (size_t)b] != 0) << (7 - b % 8));
        ulk_cb_verdict v = ulk_bch_decode(tc->correction, cb, data + (size_t)k * ULK_CB_INFO_OCTETS, NULL);
        res->cb_verdict[k] = (uint8_t)v;
        if (v == ULK_CB_REJECTED) {
            stop = STOP_REJECT;
            res->rejected_codeblock = k;
            res->tail_exact = load_be(cb, ULK_CB_OCTETS) == ULK_CLTU_TAIL_SEQ;
            break;
        }
        if (v == ULK_CB_CORRECTED) res->n_corrected++;
        if (k == ULK_CLTU_MAX_CODEBLOCKS) { stop = STOP_LIMIT; break; }
    }
    res->n_codeblocks = stop == STOP_LIMIT ? k + 1 : k;
    size_t stop_end = cb0 + (size_t)(k + 1) * ULK_CB_BITS; /* end of the block that ended it */
    size_t n_oct = (size_t)res->n_codeblocks * ULK_CB_INFO_OCTETS;
    if (tc->randomize) ulk_tc_randomize(data, n_oct);

    /* 3. The frame: its length field says how much of the decoded data is frame. */
    size_t L = 0;
    if (n_oct >= ULK_TCF_HDR_OCTETS) {
        ulk_tcf_hdr_unpack(data, &res->frame_hdr);
        L = (size_t)res->frame_hdr.frame_length + 1;
    }
    /* Bits that end after a complete frame are no loss: a tail damaged into a valid
     * codeblock lets the decoder run on to the end of a recording. */
    if (stop == STOP_END_OF_BITS && (n_oct < ULK_TCF_HDR_OCTETS || L > n_oct)) {
        res->end_bit = start;
        set_reason(res, ULK_CLTU_TRUNCATED, "bits end inside the CLTU after %d codeblock%s",
                   res->n_codeblocks, res->n_codeblocks == 1 ? "" : "s");
        return ULK_OK;
    }
    res->end_bit = stop_end < n_bits ? stop_end : n_bits;
    if ((n_oct < ULK_TCF_HDR_OCTETS || L > n_oct) && stop == STOP_REJECT && !res->tail_exact) {
        set_reason(res, ULK_CLTU_CODEBLOCK, "codeblock %d uncorrectable (%s)", k,
                   tc->correction == ULK_BCH_SEC ? "sec" : "ted");
        return ULK_OK;
    }
    if (n_oct < ULK_TCF_HDR_OCTETS) {
        res->frame_verdict = ULK_TCF_TOO_SHORT;
        set_reason(res, ULK_CLTU_FRAME_HEADER, "CLTU holds %zu octets, fewer than a frame header", n_oct);
        return ULK_OK;
    }
    size_t n_frame = L <= n_oct ? L : n_oct;
    ulk_tcf_frame fr;
    ulk_tcf_parse(tc, data, n_frame, &fr);
    res->frame_verdict = fr.verdict;
    res->map_id = fr.map_id;
    if (fr.verdict == ULK_TCF_FECF) {
        set_reason(res, ULK_CLTU_FECF, "FECF 0x%04X, computed 0x%04X", fr.fecf_received,
                   fr.fecf_computed);
        return ULK_OK;
    }
    if (fr.verdict != ULK_TCF_OK) {
        if (fr.verdict == ULK_TCF_LENGTH)
            set_reason(res, ULK_CLTU_FRAME_HEADER, "frame length field says %zu octets, the CLTU holds %zu", L, n_oct);
        else if (fr.verdict == ULK_TCF_SCID)
            set_reason(res, ULK_CLTU_FRAME_HEADER, "spacecraft id %u, expected %u",
                       (unsigned)fr.hdr.scid, (unsigned)tc->spacecraft_id);
        else if (fr.verdict == ULK_TCF_VCID)
            set_reason(res, ULK_CLTU_FRAME_HEADER, "virtual channel %u, expected %u",
                       (unsigned)fr.hdr.vcid, (unsigned)tc->virtual_channel);
        else
            set_reason(res, ULK_CLTU_FRAME_HEADER, "%s", ulk_tcf_verdict_str(fr.verdict));
        return ULK_OK;
    }

    memcpy(res->frame, data, n_frame);
    res->n_frame = n_frame;
    /* Resume where the tail belongs, even when a damaged tail made the decoder run on. */
    size_t n_cb_frame = (L + ULK_CB_INFO_OCTETS - 1) / ULK_CB_INFO_OCTETS;
    size_t tail_end = cb0 + (n_cb_frame + 1) * ULK_CB_BITS;
    /* A secured frame's data field is read only after its MAC is verified (ulk/sdls.h). */
    if (tc->sec_header_octets) {
        if (tail_end < res->end_bit) res->end_bit = tail_end;
        set_reason(res, ULK_CLTU_SECURED, "secured frame");
        return ULK_OK;
    }

    /* 4. The packet fills the frame data field exactly (one packet per frame). */
    ulk_spp_packet pk;
    ulk_spp_parse(fr.data, fr.n_data, &pk);
    res->packet_verdict = pk.verdict;
    res->packet_hdr = pk.hdr;
    if (pk.verdict != ULK_SPP_OK) {
        set_reason(res, ULK_CLTU_PACKET, "%s", ulk_spp_verdict_str(pk.verdict));
        return ULK_OK;
    }
    memcpy(res->data, pk.data, pk.n_data);
    res->n_data = pk.n_data;
    if (tail_end < res->end_bit) res->end_bit = tail_end;
    res->verdict = ULK_CLTU_ACCEPTED;
    res->reason[0] = 0;
    return ULK_OK;
}
