/* ulk/ccsds.h - the bit layer of the CCSDS telecommand profile (`profile: ccsds-tc`).
 *
 * Why: the second link profile sends each command as one Space Packet (CCSDS 133.0-B-2) in
 * one TC Transfer Frame (CCSDS 232.0-B-4) in one CLTU (CCSDS 231.0-B-4: pseudo-randomizer,
 * BCH(63,56) codeblocks, start and tail sequences). This module builds and parses every
 * one of those layers on octet buffers and decodes CLTUs from a hard bit stream; the
 * choices the standards leave open are fixed by docs/spec/ccsds-tc.md and
 * documented in docs/ccsds-tc.md.
 *
 * Nothing here allocates: every function writes into a buffer the caller provides (its
 * capacity in octets is a parameter) or into a result struct the caller owns. Statuses
 * (did the call work?) and verdicts (did the data pass a check?) are kept apart: a
 * function returns a ulk_status, and a rejected packet, frame, codeblock or CLTU is a
 * verdict in the result, never a status.
 *
 * Usage (one command, one CLTU, and back):
 *     ulk_ccsds_tc tc; ulk_ccsds_tc_default(&tc); tc.spacecraft_id = 0x2A7;
 *     ulk_tc_command c = {.apid = 0x155, .opcode = 0x12, .arg_bits = bits, .n_arg_bits = 12};
 *     uint8_t cltu[ULK_CCSDS_MAX_CLTU_OCTETS]; size_t n;
 *     if (ulk_ccsds_command_cltu(&tc, &c, cltu, sizeof cltu, &n) == 0) { ... send ... }
 *     ulk_cltu_result r;   // large (about 2.3 kB): keep it off small stacks
 *     ulk_cltu_decode(&tc, rx_bits, n_rx_bits, 0, &r);
 *     if (r.verdict == ULK_CLTU_ACCEPTED) use(r.packet_hdr.apid, r.data, r.n_data);
 */
#ifndef ULK_CCSDS_H
#define ULK_CCSDS_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/link.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- sizes and fixed values ---- */

#define ULK_SPP_HDR_OCTETS 6        /* Space Packet primary header (CCSDS 133.0-B-2 section 4.1.3, from memory) */
/* Idle packets' APID, all ones: never a command's (CCSDS 133.0-B-2 section 4.1.3.3.4, from
 * memory). */
#define ULK_SPP_APID_IDLE 0x7FFu
#define ULK_SPP_MAX_APID 0x7FEu
#define ULK_SPP_MAX_SEQ_COUNT 0x3FFFu
#define ULK_SPP_SEQ_UNSEGMENTED 3u  /* sequence flags '11' */
#define ULK_SPP_TYPE_TC 1u

#define ULK_TCF_HDR_OCTETS 5        /* TC Transfer Frame primary header (CCSDS 232.0-B-4 section 4.1.2, from memory) */
#define ULK_TCF_SEG_OCTETS 1        /* optional segment header */
#define ULK_TCF_FECF_OCTETS 2       /* optional frame error control field */
/* Largest TC Transfer Frame, 1024 octets (the 10-bit frame length field holds length - 1):
 * CCSDS 232.0-B-4 section 4.1.2, from memory; CCSDS 202.0-B-2 section 4.2.1, verified. */
#define ULK_TCF_MAX_OCTETS 1024
#define ULK_TCF_MAX_SCID 1023u
#define ULK_TCF_MAX_VCID 63u
#define ULK_TCF_MAX_MAP_ID 63u

/* CCSDS 231.0-B-4 section 3 (from memory) codeblock: 56 information bits, 7 complemented parity bits, 1 filler bit. */
#define ULK_CB_INFO_OCTETS 7
#define ULK_CB_OCTETS 8
#define ULK_CB_BITS 64
/* g(x) = x^7 + x^6 + x^2 + 1, bit k = coefficient of x^k (CCSDS 231.0-B-4 section 3,
 * from memory; verified in CCSDS 201.0-B-3 section 3.3.2). */
#define ULK_BCH_GENERATOR 0xC5u
/* Largest number of codeblocks of one CLTU: a 1024-octet frame needs ceil(1024/7). */
#define ULK_CLTU_MAX_CODEBLOCKS ((ULK_TCF_MAX_OCTETS + ULK_CB_INFO_OCTETS - 1) / ULK_CB_INFO_OCTETS)

#define ULK_CLTU_START_SEQ 0xEB90u                 /* 16 bits, CCSDS 231.0-B-4 section 5, from memory */
#define ULK_CLTU_START_BITS 16
#define ULK_CLTU_TAIL_SEQ 0xC5C5C5C5C5C5C579ull    /* 64 bits, CCSDS 231.0-B-4 section 5, from memory */
#define ULK_CLTU_TAIL_BITS 64
#define ULK_CLTU_FILL_OCTET 0x55u   /* fill of the last codeblock; also acquisition and idle */
#define ULK_CLTU_MAX_OCTETS (2 + ULK_CB_OCTETS * ULK_CLTU_MAX_CODEBLOCKS + 8)

/* TC pseudo-randomizer (CCSDS 231.0-B-4 section 6, from memory): h(x) = x^8 + x^6 + x^4 + x^3 + x^2 + x + 1, bit k =
 * coefficient of x^k, register all ones at the start of each CLTU. Its sequence begins
 * FF 39 9E 5A 68. (x^8 + x^7 + x^5 + x^3 + 1 is the TM randomizer of CCSDS 131.0-B-2 section 9, whose
 * sequence begins FF 48 0E C0 9A: a different thing.) */
#define ULK_TC_RANDOMIZER_POLY 0x15Fu

/* ---- the profile's tc section (docs/spec/ccsds-tc.md section 1) ---- */

/* ulk_bch_mode, ulk_tc_service and ulk_ccsds_tc, the parameter block, are declared in
 * ulk/link.h: the link model carries them, so the link header includes no profile header. */

/* Fills tc with the profile's defaults: SCID 0, VCID 0, expedited, no segment header, FECF
 * on, randomizer on, start_errors 0, SEC. NULL does nothing. */
void ulk_ccsds_tc_default(ulk_ccsds_tc *tc);
/* Checks every field's range. Returns 0, or ULK_EINVAL with a one-line reason in err (when
 * err is not NULL; errlen its size) naming the field. tc NULL is ULK_EINVAL. */
int ulk_ccsds_tc_check(const ulk_ccsds_tc *tc, char *err, size_t errlen);
/* The largest packet data field (octets) that fits a 1024-octet frame under tc:
 * 1024 - 5 - segment header - security header - 6 - security trailer - FECF. tc must be
 * valid. */
size_t ulk_ccsds_max_data_octets(const ulk_ccsds_tc *tc);

/* ---- Space Packet (CCSDS 133.0-B-2 section 4.1.3, from memory) ---- */

/* Every field of the primary header, right-aligned in its width. */
typedef struct {
    uint8_t version;       /* 3 bits, '000' */
    uint8_t type;          /* 1 bit, 1 = telecommand */
    uint8_t sec_hdr_flag;  /* 1 bit, 0: this profile has no secondary header */
    uint16_t apid;         /* 11 bits */
    uint8_t seq_flags;     /* 2 bits, '11' = unsegmented */
    uint16_t seq_count;    /* 14 bits */
    uint16_t data_length;  /* 16 bits: data-field octets - 1 */
} ulk_spp_hdr;

/* Writes h into out[0..5]. Returns 0, ULK_EINVAL when h or out is NULL or a field does not
 * fit its width (nothing is truncated silently). */
int ulk_spp_hdr_pack(const ulk_spp_hdr *h, uint8_t out[ULK_SPP_HDR_OCTETS]);
/* Reads the six octets at in into h (no checks). */
void ulk_spp_hdr_unpack(const uint8_t in[ULK_SPP_HDR_OCTETS], ulk_spp_hdr *h);

/* Builds a telecommand packet: version 0, type 1, no secondary header, sequence flags '11',
 * the given APID and count, data length n_data - 1, then the data field.
 * Returns 0 with *n_out = 6 + n_data; ULK_EINVAL for a NULL pointer, apid > 0x7FE (0x7FF
 * is the idle APID), seq_count > 16383, n_data 0 or above 65536; ULK_ELIMIT when cap is
 * smaller than 6 + n_data. out must not overlap data. */
int ulk_spp_build(uint16_t apid, uint16_t seq_count, const uint8_t *data, size_t n_data,
                  uint8_t *out, size_t cap, size_t *n_out);

typedef enum {
    ULK_SPP_OK = 0,
    ULK_SPP_TOO_SHORT,   /* fewer than 7 octets */
    ULK_SPP_VERSION,     /* version not '000' */
    ULK_SPP_TYPE,        /* not a telecommand */
    ULK_SPP_SEC_HDR,     /* secondary header flag set (this profile has none) */
    ULK_SPP_IDLE_APID,   /* APID 0x7FF */
    ULK_SPP_SEQ_FLAGS,   /* not '11' */
    ULK_SPP_LENGTH       /* data length field does not match the octets given */
} ulk_spp_verdict;

typedef struct {
    ulk_spp_verdict verdict;
    ulk_spp_hdr hdr;       /* filled whenever at least 6 octets were given */
    const uint8_t *data;   /* the data field inside the parsed buffer; NULL unless OK */
    size_t n_data;
} ulk_spp_packet;

/* Parses exactly n octets at p as one telecommand packet; the verdict goes to out.
 * Returns 0, or ULK_EINVAL when p or out is NULL. out->data points into p. */
int ulk_spp_parse(const uint8_t *p, size_t n, ulk_spp_packet *out);
const char *ulk_spp_verdict_str(ulk_spp_verdict v);

/* Packet data field of a command (docs/spec/ccsds-tc.md section 2.1): the opcode as one
 * octet, then the argument bits (values 0/1, MSB first, already encoded by the caller),
 * then zero bits to a whole octet. Returns 0 with *n_out = 1 + ceil(n_arg_bits / 8);
 * ULK_EINVAL when opcode > 255 or a pointer is NULL (arg_bits may be NULL when
 * n_arg_bits is 0); ULK_ELIMIT when cap is too small. */
int ulk_ccsds_command_data(uint32_t opcode, const uint8_t *arg_bits, size_t n_arg_bits,
                           uint8_t *out, size_t cap, size_t *n_out);

/* ---- TC Transfer Frame (CCSDS 232.0-B-4 sections 4.1.2 to 4.1.4, from memory) ---- */

typedef struct {
    uint8_t version;       /* 2 bits, '00' */
    uint8_t bypass;        /* 1 bit: 1 = Type-B (expedited) */
    uint8_t ctrl_cmd;      /* 1 bit: 0 = data (Type-D), 1 = control command */
    uint8_t spare;         /* 2 bits, '00' */
    uint16_t scid;         /* 10 bits */
    uint8_t vcid;          /* 6 bits */
    uint16_t frame_length; /* 10 bits: frame octets - 1 */
    uint8_t seq_num;       /* N(S), 8 bits */
} ulk_tcf_hdr;

/* Writes h into out[0..4]. Returns 0, or ULK_EINVAL for NULL or a field too wide. */
int ulk_tcf_hdr_pack(const ulk_tcf_hdr *h, uint8_t out[ULK_TCF_HDR_OCTETS]);
void ulk_tcf_hdr_unpack(const uint8_t in[ULK_TCF_HDR_OCTETS], ulk_tcf_hdr *h);

/* FECF: CRC-16/IBM-3740 (a.k.a. CRC-16/CCITT-FALSE) over n octets:
 *   width 16, poly 0x1021, init 0xFFFF, refin false, refout false, xorout 0x0000,
 *   check ("123456789") 0x29B1.
 * Source of the parameters: CCSDS 232.0-B-4 section 4.1.4 (FECF, from memory); of the check value: the published
 * catalogue of parametrised CRC algorithms. p may be NULL when n is 0. */
uint16_t ulk_tcf_crc16(const uint8_t *p, size_t n);

/* Octets of a frame carrying n_data octets under tc: 5 + segment header + security header +
 * n_data + security trailer + FECF. */
size_t ulk_tcf_octets(const ulk_ccsds_tc *tc, size_t n_data);

/* Builds one frame: header (version 0, bypass = expedited, control command flag 0, spare 0,
 * SCID, VCID, length, N(S) = seq_num for sequence-controlled and 0 for expedited), the
 * segment header when configured, the n_data octets of data (the packet), the FECF when
 * configured. Returns 0 with *n_out set; ULK_EINVAL for NULL or an invalid tc;
 * ULK_ELIMIT when the frame would exceed 1024 octets or cap. out must not overlap data. */
int ulk_tcf_build(const ulk_ccsds_tc *tc, uint8_t seq_num, const uint8_t *data, size_t n_data,
                  uint8_t *out, size_t cap, size_t *n_out);

typedef enum {
    ULK_TCF_OK = 0,
    ULK_TCF_TOO_SHORT,   /* shorter than its header, segment header and FECF */
    ULK_TCF_VERSION,     /* version not '00' */
    ULK_TCF_LENGTH,      /* frame length field + 1 != octets given */
    ULK_TCF_FECF,        /* FECF mismatch */
    ULK_TCF_CTRL_CMD,    /* a control command frame (this profile sends none) */
    ULK_TCF_SCID,        /* spacecraft id differs from the configured one */
    ULK_TCF_VCID,        /* virtual channel differs */
    ULK_TCF_SEGMENT      /* segment header: sequence flags not '11' or MAP ID differs */
} ulk_tcf_verdict;

typedef struct {
    ulk_tcf_verdict verdict;
    ulk_tcf_hdr hdr;         /* filled whenever at least 5 octets were given */
    uint8_t seg_flags;       /* segment header fields, when configured and present */
    uint8_t map_id;
    uint16_t fecf_received;  /* when configured and present */
    uint16_t fecf_computed;
    const uint8_t *data;     /* frame data field (after the segment header and the security
                                header, before the security trailer); NULL unless OK */
    size_t n_data;
} ulk_tcf_frame;

/* Parses exactly n octets at f as one frame under tc (which says whether a segment header
 * and a FECF are present and which SCID/VCID/MAP ID to accept). Checks in this order:
 * too short, version, length, FECF, control command flag, SCID, VCID, segment header;
 * the first failure is the verdict. Returns 0, or ULK_EINVAL for NULL or invalid tc. */
int ulk_tcf_parse(const ulk_ccsds_tc *tc, const uint8_t *f, size_t n, ulk_tcf_frame *out);
const char *ulk_tcf_verdict_str(ulk_tcf_verdict v);

/* ---- TC Synchronization and Channel Coding (CCSDS 231.0-B-4 sections 3, 5, 6, from memory) ---- */

/* Writes the first n octets of the TC pseudo-random sequence (register all ones). */
void ulk_tc_random_sequence(uint8_t *out, size_t n);
/* XORs p[0..n-1] with the sequence from its start: randomizes, and derandomizes again. */
void ulk_tc_randomize(uint8_t *p, size_t n);

/* Encodes 7 information octets into one codeblock: the 56 bits, the complements of the 7
 * parity bits of g(x) (the remainder of i(x) x^7 by g(x), highest order first), the filler
 * bit 0. */
void ulk_bch_encode(const uint8_t info[ULK_CB_INFO_OCTETS], uint8_t cb[ULK_CB_OCTETS]);
/* The 7-bit syndrome of a received codeblock: the remainder by g(x) of its first 63 bits
 * with the parity complement removed; 0 for a codeword. The filler bit is not read. */
unsigned ulk_bch_syndrome(const uint8_t cb[ULK_CB_OCTETS]);

typedef enum {
    ULK_CB_CLEAN = 0,     /* syndrome zero */
    ULK_CB_CORRECTED = 1, /* SEC only: one bit corrected */
    ULK_CB_REJECTED = 2   /* detected errors it will not correct */
} ulk_cb_verdict;

/* Decodes one codeblock. SEC corrects any single error among the 63 coded bits and rejects
 * every double error; TED rejects any non-zero syndrome (every 1-, 2- and 3-bit error).
 * The filler bit is outside the code: its value is ignored (a 1 there is neither an error
 * nor a correction). info (may be NULL) receives the 7 information octets unless the
 * verdict is REJECTED; *bit (may be NULL) the corrected bit's index in transmission order
 * (0..62), else -1. cb is not modified. */
ulk_cb_verdict ulk_bch_decode(ulk_bch_mode mode, const uint8_t cb[ULK_CB_OCTETS],
                              uint8_t info[ULK_CB_INFO_OCTETS], int *bit);

/* Octets of the CLTU of an n_frame-octet frame: 2 + 8 * ceil(n_frame / 7) + 8. */
size_t ulk_cltu_octets(size_t n_frame);
/* Builds a CLTU: start sequence, the frame (randomized when tc->randomize) in codeblocks
 * with the last one completed by 0x55 fill octets (never randomized), tail sequence.
 * Returns 0 with *n_out set; ULK_EINVAL for NULL, n_frame 0 or invalid tc; ULK_ELIMIT
 * when n_frame > 1024 or cap is too small. out must not overlap frame. */
int ulk_cltu_build(const ulk_ccsds_tc *tc, const uint8_t *frame, size_t n_frame,
                   uint8_t *out, size_t cap, size_t *n_out);

/* One bit per octet (0/1), most significant first: bits must hold 8 * n. */
void ulk_octets_to_bits(const uint8_t *p, size_t n, uint8_t *bits);
/* n_bits of acquisition or idle sequence: alternating bits, starting with 0. */
void ulk_cltu_idle_bits(uint8_t *bits, size_t n_bits);

/* ---- one command, end to end ---- */

typedef struct {
    uint16_t apid;           /* the system's address */
    uint16_t seq_count;      /* packet sequence count for this APID */
    uint8_t frame_seq;       /* N(S) (used for sequence-controlled service) */
    uint32_t opcode;         /* 0..255 */
    const uint8_t *arg_bits; /* encoded arguments, 0/1, MSB first; NULL when none */
    size_t n_arg_bits;
} ulk_tc_command;

/* Command data field -> packet -> frame -> CLTU. Returns 0 with *n_out set, or the first
 * failing step's status (ULK_EINVAL, ULK_ELIMIT when the frame would exceed 1024 octets or
 * cap is too small). */
int ulk_ccsds_command_cltu(const ulk_ccsds_tc *tc, const ulk_tc_command *c, uint8_t *out,
                           size_t cap, size_t *n_out);

/* ---- decoding CLTUs from a hard bit stream (docs/spec/ccsds-tc.md section 4) ---- */

typedef enum {
    ULK_CLTU_ACCEPTED = 0,
    ULK_CLTU_NO_START,      /* no start sequence within start_errors in the bits searched */
    ULK_CLTU_TRUNCATED,     /* the bits end before the frame is complete */
    ULK_CLTU_CODEBLOCK,     /* codeblock k rejected before the frame was complete */
    ULK_CLTU_FRAME_HEADER,  /* frame too short, version, length, control flag, SCID, VCID, segment */
    ULK_CLTU_FECF,          /* FECF mismatch */
    ULK_CLTU_PACKET,        /* packet header, or packet length not filling the frame */
    ULK_CLTU_SECURED        /* a sound frame of a secured link (tc->sec_header_octets > 0): the
                               packet is read after ulk/sdls.h has verified it; frame[] holds it */
} ulk_cltu_verdict;

typedef struct {
    ulk_cltu_verdict verdict;
    char reason[160];          /* one line saying why, "" when accepted */
    size_t start_bit;          /* first bit of the start sequence (valid unless NO_START) */
    size_t end_bit;            /* where the next search should begin (see ulk_cltu_decode) */
    int start_errors;          /* bit errors found in the start sequence */
    int n_codeblocks;          /* codeblocks decoded before the one that ended the CLTU */
    int n_corrected;           /* of those, with one bit corrected */
    int rejected_codeblock;    /* 0-based index of the rejected codeblock that ended it, -1 */
    int tail_exact;            /* 1 when that codeblock was exactly the tail sequence */
    uint8_t cb_verdict[ULK_CLTU_MAX_CODEBLOCKS + 1]; /* ulk_cb_verdict per codeblock */
    ulk_tcf_verdict frame_verdict;
    ulk_tcf_hdr frame_hdr;     /* valid from FRAME_HEADER on (when 5 octets were decoded) */
    uint8_t map_id;            /* segment header's MAP ID when configured */
    ulk_spp_verdict packet_verdict;
    ulk_spp_hdr packet_hdr;    /* valid for ACCEPTED and PACKET (when 6 octets were present) */
    uint8_t data[ULK_TCF_MAX_OCTETS]; /* packet data field when ACCEPTED */
    size_t n_data;
    uint8_t frame[ULK_TCF_MAX_OCTETS]; /* the frame, when ACCEPTED, PACKET or SECURED */
    size_t n_frame;
} ulk_cltu_result;

/* Searches bits[from_bit ..] (one channel bit per octet, 0/1) for the first start sequence
 * with at most tc->start_errors bit errors, decodes codeblocks in tc->correction mode until
 * one is rejected (the tail sequence is always rejected), derandomizes, parses the frame
 * (whose length field says how many decoded octets are frame and how many are fill),
 * checks the FECF and parses the packet. One frame per CLTU: a rejected codeblock ends the
 * CLTU without loss once the frame is complete (a damaged tail), codeblocks decoded past
 * the frame's are ignored, and so is the end of the bits once the frame is complete (a
 * tail damaged into a valid codeblock makes the decoder run on).
 * end_bit: after NO_START, the first start position not yet searched (n_bits - 15 when
 * the bits ran out); after TRUNCATED, start_bit (retry there with more bits); after
 * ACCEPTED, the end of the tail sequence's place; after CODEBLOCK, the end of the rejected
 * codeblock; otherwise the end of the codeblock that ended the CLTU; never beyond n_bits.
 * So a whole stream is
 * decoded by calling again with from_bit = end_bit until NO_START or TRUNCATED.
 * Returns 0 with the verdict in res, or ULK_EINVAL for a NULL pointer or an invalid tc. */
int ulk_cltu_decode(const ulk_ccsds_tc *tc, const uint8_t *bits, size_t n_bits, size_t from_bit,
                    ulk_cltu_result *res);
const char *ulk_cltu_verdict_str(ulk_cltu_verdict v);

#ifdef __cplusplus
}
#endif
#endif
