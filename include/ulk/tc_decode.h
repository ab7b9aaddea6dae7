/* ulk/tc_decode.h - decoding the CCSDS telecommand profile (docs/spec/ccsds-tc.md section 4)
 * from the shared demodulator front end's soft channel symbols to commands.
 *
 * Why a stage of its own: the blind front end (subcarrier, clock, matched filter; ulk/demod.h)
 * is the same for both profiles and hands over soft symbols; what differs is what a unit is.
 * Here hard decisions go to the CLTU decoder of ulk/ccsds.h: start-sequence search with the
 * dictionary's start_errors tolerance in both polarities (EB90 and its complement 146F
 * resolve the 180 degree ambiguity; nrz-m is decoded differentially, which has none),
 * codeblocks in the configured mode, derandomizing, frame and FECF, packet; then the
 * dictionary (APID -> system, opcode -> command, argument bits -> values). Every CLTU found
 * is reported, accepted or rejected with its reason (a rejected one only when the bits before
 * its start sequence are idle or a tail, see ulk_tc_decoder_n_ignored) ("start", "codeblock 2 uncorrectable",
 * "FECF ...", "frame header ...", "unknown APID or opcode ...", "argument ...").
 *
 * Memory stays flat: bits are kept only as long as a CLTU may still need them.
 *
 * Usage:
 *     ulk_tc_decoder *t;
 *     ulk_tc_decoder_create(dict, on_unit, user, &t, diag);
 *     ulk_tc_decoder_push(t, times_s, soft, n);     // any chunk size, in time order
 *     ulk_tc_decoder_finish(t);
 *     ulk_tc_decoder_destroy(t);
 * or ulk_tc_decode_samples() for the front end and the decoder together.
 */
#ifndef ULK_TC_DECODE_H
#define ULK_TC_DECODE_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/ccsds.h"
#include "ulk/decode.h"
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/sdls.h"

#ifdef __cplusplus
extern "C" {
#endif

#define ULK_TC_MAX_ARGS 1024 /* a 1010-octet data field holds at most this many 1..64-bit fields */

typedef struct {
    const ulk_arg *arg;       /* the dictionary's argument */
    uint64_t raw;             /* raw field, right-aligned */
    double eng;               /* engineering value (enum: code; boolean: 0/1) */
    const char *label;        /* enum label, else NULL */
    char text[64];            /* value in command-list syntax (ulk_arg_format) */
} ulk_tc_arg;

typedef enum { ULK_TC_ACCEPTED = 0, ULK_TC_REJECTED = 1 } ulk_tc_status;

/* One CLTU found in the stream. Large (about 70 kB): the decoder owns the one it reports. */
typedef struct {
    ulk_tc_status status;
    char reason[200];         /* rejected only: "codeblock 2 uncorrectable", "FECF ...", ... */
    ulk_reject_kind reject;   /* the sub-bit decoder's kinds: CLTU, frame or packet failures are
                                 ULK_REJ_CHECK; then SYSTEM (unknown APID), OPCODE, LENGTH (data
                                 field), ENUM, RANGE, PADDING; ULK_REJ_NONE when accepted */
    double start_s;           /* time of the first bit of its start sequence */
    int polarity;             /* +1 as sent, -1 inverted (nrz-l); always +1 for nrz-m */
    int start_errors;         /* bit errors in its start sequence */
    int n_codeblocks, n_corrected;
    const ulk_command *cmd;   /* accepted (and "argument" rejections): the command */
    uint32_t apid, opcode;    /* when the packet was read */
    uint16_t seq_count;       /* packet sequence count */
    uint8_t frame_seq;        /* N(S) */
    /* Space Data Link Security (ulk/sdls.h), when the link has it: */
    int secured;              /* 1: the frame carries a security header and trailer */
    ulk_security_verdict sec_verdict; /* ACCEPTED (authenticated), UNCHECKED (no keys: secured, not
                                 authenticated), or why it was rejected */
    uint16_t spi;             /* from the security header */
    uint64_t iv_counter;      /* the IV's counter */
    int n_args;
    ulk_tc_arg args[ULK_TC_MAX_ARGS];
    char data_hex[2 * ULK_TCF_MAX_OCTETS + 1]; /* the packet data field (opcode, arguments) when
                                                  the CLTU was decoded, else "" */
} ulk_tc_unit;

typedef void (*ulk_tc_unit_fn)(const ulk_tc_unit *u, void *user);

typedef struct ulk_tc_decoder ulk_tc_decoder;

/* Creates a decoder for a ccsds-tc dictionary (d must outlive it). on_unit is called for
 * every CLTU in time order; the unit is valid during the call. Returns 0 with *out;
 * ULK_EINVAL (message in diag) when d is not a ccsds-tc dictionary; ULK_ENOMEM. */
int ulk_tc_decoder_create(const ulk_dict *d, ulk_tc_unit_fn on_unit, void *user, ulk_tc_decoder **out,
                          ulk_diag *diag);
/* Frames of a secured link (ulk/sdls.h) are verified by rx (not owned; it must outlive t):
 * accepted only when authentic and new, else rejected with the reason (authentication failed,
 * unknown SPI, replayed, outside the window). Without it (rx NULL, the default) a secured frame
 * is reported secured but not authenticated: its command when the data field travels in clear
 * (service authentication), rejected when it is encrypted. Returns 0, or ULK_EINVAL for NULL t. */
int ulk_tc_decoder_set_security(ulk_tc_decoder *t, ulk_sdls_rx *rx);
/* Feeds n soft symbols (value about +-1 as received, polarity unresolved, before nrz-m
 * decoding) and their start times. Returns 0 or a sticky ULK_ENOMEM. */
int ulk_tc_decoder_push(ulk_tc_decoder *t, const double *t_s, const float *soft, size_t n);
/* Decodes what is left (a CLTU cut off by the end is reported rejected, "truncated").
 * Returns 0 or the sticky status. */
int ulk_tc_decoder_finish(ulk_tc_decoder *t);
/* CLTUs reported so far, and how many of them were accepted. */
size_t ulk_tc_decoder_n_units(const ulk_tc_decoder *t);
size_t ulk_tc_decoder_n_accepted(const ulk_tc_decoder *t);
/* Start sequences found whose CLTU failed and whose preceding bits are not what a transmitter
 * sends there (idle, or a tail when the link has no idle between CLTUs): chance matches in
 * noise, in the acquisition edge or inside a rejected CLTU. They are not reported as units. */
size_t ulk_tc_decoder_n_ignored(const ulk_tc_decoder *t);
void ulk_tc_decoder_destroy(ulk_tc_decoder *t); /* NULL does nothing */

/* The blind front end (ulk/demod.h, ulk_demod_create_symbols on ulk_tc_symbols) and the
 * decoder over a whole capture given in memory. est (may be NULL) receives the front end's estimates.
 * Returns 0, or the first failure's status (message in diag). */
int ulk_tc_decode_samples(const ulk_dict *d, const float *x, size_t n, double fs_hz, ulk_tc_unit_fn on_unit,
                          void *user, ulk_demod_estimates *est, ulk_diag *diag);

/* The channel symbols of a ccsds-tc link for the shared front end (ulk_demod_create_symbols):
 * one symbol per channel bit (R_s = R), its line code and subcarrier, no pilot. */
void ulk_tc_symbols(const ulk_link *tc_link, ulk_demod_symbols *out);

#ifdef __cplusplus
}
#endif
#endif
