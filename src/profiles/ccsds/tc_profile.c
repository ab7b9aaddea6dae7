/* src/profiles/ccsds/tc_profile.c - the CCSDS telecommand profile behind ulk/profile.h
 * (docs/spec/ccsds-tc.md sections 2-3, on the bit layer of ccsds.c): one CLTU per command,
 * alternating idle bits between.
 */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "ulk/ccsds.h"
#include "ulk/sdls.h"
#include "util.h"

/* ---------------------------------------------------------------- ccsds-tc profile */

static uint64_t tc_gap_units(const ulk_link *l, ulk_gap g)
{
    return 8u * (uint64_t)(g == ULK_GAP_FIRST ? l->tc.acquisition_octets : l->tc.idle_octets);
}

static ulk_ratio tc_filler_rate(const ulk_link *l) { return l->bit_rate; }

/* Acquisition and idle: alternating bits, every run starting with 0 (0x55 octets). */
static int tc_filler_symbol(const ulk_link *l, uint64_t k, int j)
{
    (void)l;
    (void)j;
    return (int)(k & 1u);
}

static size_t tc_max_arg_bits(const ulk_link *l) { return 8 * (ulk_ccsds_max_data_octets(&l->tc.frame) - 1); }

static uint64_t tc_unit_bits(const ulk_link *l, const ulk_upload_cmd *c)
{
    (void)l;
    return 8u * (uint64_t)c->n_cltu;
}

static int tc_unit_bit(const ulk_link *l, const ulk_upload_cmd *c, uint64_t i)
{
    (void)l;
    return (c->cltu[i >> 3] >> (7 - (i & 7))) & 1;
}

/* Packet sequence counts per APID (11 bits: a table of 2048) and the next N(S). */
typedef struct {
    const ulk_link *l;
    uint16_t seq[2048];
    unsigned frames;
} tc_encoder;

static int tc_encoder_create(const ulk_link *l, void **enc)
{
    tc_encoder *e = ulk_calloc(1, sizeof *e);
    if (!e) return ULK_ENOMEM;
    e->l = l;
    *enc = e;
    return 0;
}

static void tc_encoder_destroy(void *enc) { ulk_free(enc); }

/* The CLTU and frame of one command with given counts; allocates out->cltu (and frame). */
static int tc_build(const ulk_link *l, const ulk_unit_request *req, uint16_t seq, uint8_t ns, ulk_upload_cmd *out,
                    char *err, size_t errlen)
{
    const ulk_ccsds_tc *tc = &l->tc.frame;
    if (req->system_addr > ULK_SPP_MAX_APID || req->opcode > 255) {
        snprintf(err, errlen, "APID 0x%X or opcode %u out of range", req->system_addr, req->opcode);
        return ULK_EINVAL;
    }
    size_t n_data = 1 + (req->n_arg_bits + 7) / 8;
    if (n_data > ulk_ccsds_max_data_octets(tc)) {
        snprintf(err, errlen, "its frame of %zu octets exceeds the %d-octet limit of a TC frame",
                 ulk_tcf_octets(tc, ULK_SPP_HDR_OCTETS + n_data), ULK_TCF_MAX_OCTETS);
        return ULK_ELIMIT;
    }
    uint8_t data[ULK_TCF_MAX_OCTETS], pkt[ULK_TCF_MAX_OCTETS];
    size_t nd = 0, np = 0, nf = 0, nc = 0;
    int rc = ulk_ccsds_command_data(req->opcode, req->arg_bits, req->n_arg_bits, data, sizeof data, &nd);
    if (!rc) rc = ulk_spp_build((uint16_t)req->system_addr, seq, data, nd, pkt, sizeof pkt, &np);
    size_t n_frame = ulk_tcf_octets(tc, np);
    size_t n_cltu = ulk_cltu_octets(n_frame);
    uint8_t *buf = rc ? NULL : ulk_malloc(n_cltu + n_frame);
    if (!rc && !buf) return ULK_ENOMEM;
    if (!rc) rc = ulk_tcf_build(tc, ns, pkt, np, buf + n_cltu, n_frame, &nf);
    if (!rc) rc = ulk_cltu_build(tc, buf + n_cltu, nf, buf, n_cltu, &nc);
    if (rc) {
        ulk_free(buf);
        snprintf(err, errlen, "cannot build its CLTU (%s)", ulk_status_str(rc));
        return rc;
    }
    out->seq_count = seq;
    out->frame_seq = ns;
    out->cltu = buf;
    out->n_cltu = nc;
    out->frame = buf + n_cltu;
    out->n_frame = nf;
    return 0;
}

/* N(S) of the k-th frame (0-based) of an upload: first_sequence + k mod 256, or 0. */
static uint8_t tc_frame_seq(const ulk_link *l, unsigned k)
{
    if (l->tc.frame.service != ULK_TC_SEQUENCE_CONTROLLED) return 0;
    return (uint8_t)((l->tc.first_sequence + k) & 0xFFu);
}

static int tc_encode(void *enc, const ulk_unit_request *req, ulk_upload_cmd *out, char *err, size_t errlen)
{
    tc_encoder *e = enc;
    if (req->system_addr > ULK_SPP_MAX_APID) {
        snprintf(err, errlen, "APID 0x%X out of range", req->system_addr);
        return ULK_EINVAL;
    }
    uint16_t seq = e->seq[req->system_addr];
    int rc = tc_build(e->l, req, seq, tc_frame_seq(e->l, e->frames), out, err, errlen);
    if (rc) return rc;
    e->seq[req->system_addr] = (uint16_t)((seq + 1u) & ULK_SPP_MAX_SEQ_COUNT);
    e->frames++;
    return 0;
}

static void tc_arg_room(const ulk_link *l, char *buf, size_t n)
{
    snprintf(buf, n, "a %d-octet TC frame (%zu argument bits at most)", ULK_TCF_MAX_OCTETS, tc_max_arg_bits(l));
}

/* one channel symbol per bit: R_s = R (docs/spec/ccsds-tc.md section 3) */
static ulk_ratio tc_symbol_rate(const ulk_link *l) { return l->bit_rate; }

static size_t tc_unit_octets(const ulk_link *l, const ulk_upload_cmd *c)
{
    (void)l;
    return c->n_cltu;
}

static const ulk_sdls_sa *tc_security(const ulk_link *l) { return l->tc.security.enabled ? &l->tc.security : NULL; }

/* ---- unit checks (upload reader) */

static size_t pack_args(const ulk_upload_cmd *c, uint8_t *bits, size_t cap)
{
    size_t pos = 0;
    for (int k = 0; k < c->n_args; k++) {
        int w = c->args[k].bits;
        if (w < 1 || w > 64 || pos + (size_t)w > cap) return (size_t)-1;
        for (int b = 0; b < w; b++) bits[pos + (size_t)b] = (uint8_t)((c->args[k].raw >> (w - 1 - b)) & 1u);
        pos += (size_t)w;
    }
    return pos;
}

/* Rebuilds what command c's unit must be from its fields (APID, opcode, argument raw values,
 * counts) and compares: 0, or ULK_EPARSE with the first difference in err (ULK_ENOMEM). */
int ulk_tc_unit_check(const ulk_link *l, const ulk_upload_cmd *c, char *err, size_t errlen)
{
    uint8_t bits[8 * ULK_TCF_MAX_OCTETS];
    size_t n = pack_args(c, bits, sizeof bits);
    if (n == (size_t)-1) {
        snprintf(err, errlen, "the arguments do not fit a TC frame");
        return ULK_EPARSE;
    }
    ulk_unit_request req = {c->system_addr, c->opcode, bits, n};
    ulk_upload_cmd want;
    memset(&want, 0, sizeof want);
    int rc = tc_build(l, &req, c->seq_count, c->frame_seq, &want, err, errlen);
    if (rc == ULK_ENOMEM) return rc;
    if (rc) return ULK_EPARSE;
    rc = 0;
    if (l->tc.security.enabled) {
        /* A secured frame: what its fields make, except the IV, the MAC (and an encrypted data
         * field), which only the key can check; the CLTU must be the coding of the frame. */
        uint8_t cl[ULK_CLTU_MAX_OCTETS];
        size_t ncl = 0;
        if (want.n_frame != c->n_frame) {
            snprintf(err, errlen, "the frame is not the one its fields (APID, opcode, arguments, counts) make");
            rc = ULK_EPARSE;
        } else if (ulk_sdls_check_frame(&l->tc.frame, &l->tc.security, want.frame, c->frame, c->n_frame, err, errlen)) {
            rc = ULK_EPARSE;
        } else if (ulk_cltu_build(&l->tc.frame, c->frame, c->n_frame, cl, sizeof cl, &ncl) || ncl != c->n_cltu ||
                   memcmp(cl, c->cltu, ncl)) {
            snprintf(err, errlen, "the CLTU is not the coding of its frame");
            rc = ULK_EPARSE;
        }
    } else if (want.n_frame != c->n_frame || memcmp(want.frame, c->frame, c->n_frame)) {
        snprintf(err, errlen, "the frame is not the one its fields (APID, opcode, arguments, counts) make");
        rc = ULK_EPARSE;
    } else if (want.n_cltu != c->n_cltu || memcmp(want.cltu, c->cltu, c->n_cltu)) {
        snprintf(err, errlen, "the CLTU is not the coding of its frame");
        rc = ULK_EPARSE;
    }
    ulk_free(want.cltu);
    return rc;
}

/* the packet data field, read from the frame: after the frame header, segment header and
 * packet header, before the FECF */
_Static_assert(2 * ULK_TCF_MAX_OCTETS + 1 <= ULK_UNIT_HEX_CHARS, "a frame's data field in hex fits unit_hex's room");

static void tc_unit_hex(const ulk_link *l, const ulk_upload_cmd *c, char *buf, size_t len)
{
    const ulk_ccsds_tc *tc = &l->tc.frame;
    size_t a = ULK_TCF_HDR_OCTETS + (tc->segment_header ? 1 : 0) + ULK_SPP_HDR_OCTETS;
    size_t b = c->n_frame - (tc->fecf ? 2 : 0);
    size_t k = 0;
    for (size_t i = a; i < b && k + 3 <= len; i++, k += 2) snprintf(buf + k, 3, "%02X", c->frame[i]);
    buf[k < len ? k : len - 1] = 0;
}

static void tc_unit_comment(const ulk_link *l, const ulk_upload_cmd *c, size_t k, char *buf, size_t len)
{
    (void)l;
    snprintf(buf, len, "CLTU %zu, line %d, APID 0x%03X count %u N(S) %u", k + 1, c->line, c->system_addr,
             c->seq_count, c->frame_seq);
}

static int tc_print_units(FILE *out, const ulk_upload *up, uint64_t n_bits)
{
    size_t oct = 0;
    for (size_t i = 0; i < up->n_cmds; i++) oct += up->cmds[i].n_cltu;
    int a = fprintf(out, "  CLTUs     %zu (%zu octets; one packet per frame per CLTU)\n", up->n_cmds, oct);
    int b = fprintf(out, "  channel   %llu bits (acquisition, CLTUs, idle)\n", (unsigned long long)n_bits);
    return a < 0 || b < 0 ? -1 : a + b;
}

static void *tc_summary_json(const ulk_dict *d) { return ulk_tc_summary_json(d); }

const ulk_profile_ops ulk_profile_ccsds_tc = {
    .name = "ccsds-tc",
    .id = ULK_PROFILE_CCSDS_TC,
    .link_parse = ulk_tc_link_parse,
    .system_address = ulk_tc_system_address,
    .address_noun = "address (APID)",
    .address_unprotected = 0,
    .opcode_fits = ulk_tc_opcode_fits,
    .command_check = ulk_tc_command_check,
    .link_canonical = ulk_tc_link_canonical,
    .info_bit_rate = ulk_tc_info_bit_rate,
    .gap_units = tc_gap_units,
    .filler_rate = tc_filler_rate,
    .filler_symbol = tc_filler_symbol,
    .max_arg_bits = tc_max_arg_bits,
    .unit_bits = tc_unit_bits,
    .unit_bit = tc_unit_bit,
    .encoder_create = tc_encoder_create,
    .encode = tc_encode,
    .encoder_destroy = tc_encoder_destroy,
    .unit_noun = "CLTUs",
    .unit_noun_one = "CLTU",
    .symbol_noun = "channel bits",
    .arg_room = tc_arg_room,
    .symbol_rate = tc_symbol_rate,
    .unit_octets = tc_unit_octets,
    .security = tc_security,
    .secure_describe = ulk_tc_secure_describe,
    .secure_begin = ulk_tc_secure_begin,
    .secure_upload = ulk_tc_secure_upload,
    .secure_commit = ulk_tc_secure_commit,
    .secure_summary = ulk_tc_secure_summary,
    .secure_abandoned = ulk_tc_secure_abandoned,
    .secure_end = ulk_tc_secure_end,
    .unit_hex = tc_unit_hex,
    .unit_comment = tc_unit_comment,
    .inspect_text = ulk_tc_inspect_text,
    .inspect_json = ulk_tc_inspect_json,
    .summary_text = ulk_tc_summary_text,
    .summary_json = tc_summary_json,
    .upload_write_link = ulk_tc_upload_write_link,
    .upload_write_unit = ulk_tc_upload_write_unit,
    .print_units = tc_print_units,
    .unit_start_times = NULL,
    .upload_read_link = ulk_tc_upload_read_link,
    .upload_link_members = ulk_tc_upload_link_members,
    .n_upload_link_members = 5,
    .upload_cmd_members = ulk_tc_upload_cmd_members,
    .n_upload_cmd_members = 13,
    .upload_max_address = ulk_tc_upload_max_address,
    .upload_max_opcode = ulk_tc_upload_max_opcode,
    .gap_names = {"acquisition sequence", "idle sequence", "idle sequence"},
    .upload_read_unit = ulk_tc_upload_read_unit,
    .upload_check_arg = ulk_tc_upload_check_arg,
    .upload_check_unit = ulk_tc_upload_check_unit,
    .upload_counts_create = ulk_tc_upload_counts_create,
    .upload_counts_check = ulk_tc_upload_counts_check,
    .upload_counts_destroy = ulk_tc_upload_counts_destroy,
    .unit_stride = ulk_tc_unit_stride,
    .unit_pack = ulk_tc_unit_pack,
    .rx_create = ulk_tc_rx_create,
    .rx_push = ulk_tc_rx_push,
    .rx_finish = ulk_tc_rx_finish,
    .rx_commit = ulk_tc_rx_commit,
    .rx_destroy = ulk_tc_rx_destroy,
};
