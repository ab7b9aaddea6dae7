/* ulk/profile.h - PROPOSAL (not wired in, nothing implements it yet): the interface behind
 * which a link profile sits, so that validate / compile / modulate / timing / decode are
 * written once and the sub-bit profile (subbit-profile.md) and the CCSDS telecommand
 * profile (ccsds-tc-profile.md) are two tables of functions.
 *
 * Why this split: the two profiles differ in four places only.
 *   1. The link section and its rules (patterns and word fields vs. SCID/VCID/APIDs and a
 *      1024-octet frame limit).
 *   2. What one command becomes: a W-bit word vs. a CLTU (packet -> frame -> randomizer ->
 *      BCH codeblocks); the CCSDS one carries state across commands (packet sequence
 *      count per APID, N(S) of sequence-controlled frames).
 *   3. How bits become channel symbols and what fills the gaps: each bit as an n-sub-bit
 *      pattern with the idle pattern I as filler, vs. one symbol per bit with alternating
 *      0101... filler restarting at 0 on every run.
 *   4. How symbols become commands again: pattern correlation and a word check vs. start
 *      sequence search, codeblock decoding, frame and packet checks.
 * Everything else is shared: the stream layout (filler^P unit_1 filler^G ... unit_N
 * filler^T, waits as max(count, ceil(t * filler_rate))), the line code and waveform
 * (subbit-profile.md s.4 with R_s the symbol rate), the sample I/O, the timing table
 * columns (unit number, bit in unit, bit value, symbol), the demodulator front end (clock,
 * subcarrier, matched filter -> soft symbols), and the dictionary side of decoding
 * (system address + opcode -> command, argument bits -> values, "unknown APID or opcode"
 * and "argument" rejections).
 *
 * So a profile never sees samples and never formats arguments; it sees argument bits
 * (already encoded per subbit-profile.md s.2) going in and coming out.
 */
#ifndef ULK_PROFILE_H
#define ULK_PROFILE_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/link.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One command to encode: fields the shared compiler has already resolved. */
typedef struct {
    size_t ordinal;            /* 0-based index of the command in the list */
    uint32_t system_addr;      /* sub-bit: system address; CCSDS: APID */
    uint32_t opcode;
    const uint8_t *arg_bits;   /* encoded arguments, 0/1, MSB first, dictionary order */
    size_t n_arg_bits;
} ulk_unit_request;

/* What one command becomes on the channel, before symbol expansion: the bits the timing
 * table's `bit` column counts (sub-bit: the W word bits; CCSDS: the CLTU's bits, start
 * sequence first). bits has room for ops->max_unit_bits(link). */
typedef struct {
    uint8_t *bits;             /* 0/1, caller's buffer */
    size_t n_bits;
    char label[64];            /* short text for listings: word hex, or "APID 0x155 seq 7 N(S) 3" */
} ulk_unit;

/* Which filler run a gap is. */
typedef enum { ULK_GAP_PREAMBLE = 0, ULK_GAP_BETWEEN = 1, ULK_GAP_POSTAMBLE = 2 } ulk_gap;

/* One soft channel symbol from the shared demodulator front end: value in units of the
 * estimated amplitude (about +-1; positive = symbol 1 as received, i.e. polarity NOT
 * resolved: the profile resolves it from its own structure - the idle pattern, or EB90
 * against its complement 146F), and the symbol's start time. For nrz-m the front end has
 * already done the differential decoding (which removes the ambiguity). */
typedef struct {
    double t_s;
    float soft;
} ulk_soft_symbol;

typedef enum { ULK_UNIT_ACCEPTED = 0, ULK_UNIT_REJECTED = 1 } ulk_unit_status;

/* One unit found by a profile decoder. The shared layer then looks up the command and
 * decodes the arguments (and may still reject: unknown system/APID or opcode, argument). */
typedef struct {
    ulk_unit_status status;
    char reason[160];          /* rejected only: "check mismatch", "codeblock 3
                                  uncorrectable", "FECF 0x1234, computed 0x5678", ... */
    double start_s;            /* first symbol of the unit */
    double margin;             /* soft margin (sub-bit) or 1 - corrected/codeblocks (CCSDS) */
    int polarity;              /* +1 as sent, -1 inverted */
    uint32_t system_addr, opcode;      /* accepted only */
    const uint8_t *arg_bits;   /* accepted only; valid during the callback */
    size_t n_arg_bits;         /* sub-bit: D (with its zero padding); CCSDS: whole octets */
    char hex[2 * 1024 + 1];    /* sub-bit: the word; CCSDS: the frame */
} ulk_decoded_unit;

typedef void (*ulk_decoded_unit_fn)(const ulk_decoded_unit *u, void *user);

typedef struct ulk_profile_ops {
    const char *name;          /* the dictionary's `profile:` value */
    ulk_profile id;

    /* ---- dictionary ---- */
    /* Profile rules on a loaded dictionary (link section ranges, unit size limits, address
     * uniqueness, idle APID, ...). Findings go to diag with their locations. Returns 0 or
     * ULK_EPARSE. */
    int (*validate)(const ulk_dict *d, ulk_diag *diag);
    /* Largest unit in bits (buffer size for ulk_unit.bits). */
    size_t (*max_unit_bits)(const ulk_link *l);

    /* ---- compile ---- */
    /* An encoder holds the state that runs across one upload's commands (packet sequence
     * counts, N(S)); NULL state is fine for stateless profiles. Returns 0 or ULK_ENOMEM. */
    int (*encoder_create)(const ulk_dict *d, void **enc, ulk_diag *diag);
    /* Builds the unit of one command. Returns 0, or ULK_ELIMIT/ULK_EINVAL with the reason
     * in diag (e.g. "frame of 1031 octets exceeds 1024"). */
    int (*encode)(void *enc, const ulk_unit_request *req, ulk_unit *out, ulk_diag *diag);
    void (*encoder_destroy)(void *enc);  /* NULL does nothing */

    /* ---- stream and waveform ---- */
    ulk_ratio (*symbol_rate)(const ulk_link *l);  /* R_s: n R_b, or R */
    int (*symbols_per_bit)(const ulk_link *l);    /* n, or 1 */
    /* Symbols of one unit bit (n of them): Z or O, or the bit itself. */
    void (*expand_bit)(const ulk_link *l, int bit, uint8_t *symbols);
    /* Filler counts in filler units (idle patterns, or bits), before waits. */
    uint64_t (*gap_units)(const ulk_link *l, ulk_gap gap);
    ulk_ratio (*filler_rate)(const ulk_link *l);  /* filler units per second: R_b, or R */
    int (*symbols_per_filler_unit)(const ulk_link *l); /* n, or 1 */
    /* Symbol k (0-based from the start of its run) of a filler run: I[k mod n], or k & 1. */
    int (*filler_symbol)(const ulk_link *l, uint64_t k);

    /* ---- decode ---- */
    /* A decoder consumes soft symbols in time order, in chunks of any size, with flat
     * memory, and reports each unit through on_unit. Returns 0 or ULK_ENOMEM/ULK_EINVAL. */
    int (*decoder_create)(const ulk_dict *d, ulk_decoded_unit_fn on_unit, void *user, void **dec,
                          ulk_diag *diag);
    int (*decoder_push)(void *dec, const ulk_soft_symbol *s, size_t n);
    int (*decoder_finish)(void *dec);
    void (*decoder_destroy)(void *dec);  /* NULL does nothing */
} ulk_profile_ops;

/* The table of a profile, NULL for an unknown id. (Proposal: not implemented yet.) */
const ulk_profile_ops *ulk_profile_ops_for(ulk_profile id);

#ifdef __cplusplus
}
#endif
#endif
