/* ulk/decode.h - interpreting recovered words against a dictionary.
 *
 * Why a separate stage: the demodulator knows bits, the dictionary knows meaning. Each word
 * is either accepted (its check passes and every field means something: our vehicle, a
 * known system and opcode, defined enum codes, values within range, zero padding) or
 * rejected with the first reason found, in that order. A word whose check fails is never
 * accepted, whatever its other fields say.
 *
 * Usage:
 *     ulk_decoded r;
 *     ulk_decode_word(dict, &w, &r);
 *     if (r.status == ULK_WORD_ACCEPTED) printf("%s\n", r.cmd->mnemonic);
 *     else printf("rejected: %s\n", r.reason);
 */
#ifndef ULK_DECODE_H
#define ULK_DECODE_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/word.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef enum { ULK_WORD_ACCEPTED = 0, ULK_WORD_REJECTED = 1 } ulk_word_status;

typedef enum {
    ULK_REJ_NONE = 0,
    ULK_REJ_CHECK,      /* check field does not match */
    ULK_REJ_VEHICLE,    /* another vehicle's address */
    ULK_REJ_SYSTEM,     /* no system with this address */
    ULK_REJ_OPCODE,     /* the system has no command with this opcode */
    ULK_REJ_ENUM,       /* an enum argument carries an undefined code */
    ULK_REJ_RANGE,      /* an argument's engineering value is outside its range */
    ULK_REJ_PADDING,    /* argument-field bits after the packed arguments are not zero */
    ULK_REJ_LENGTH,     /* the word's length is not the dictionary's W */
    ULK_REJ_ALIGNMENT   /* the demodulator could not decide the word's sub-bit alignment */
} ulk_reject_kind;

/* The security check's verdict on a received secured frame (Space Data Link Security,
 * docs/sdls.md): here, in the receive layer, because receiver events
 * (ulk/rx.h) carry it; the check itself belongs to the profile that has it. */
typedef enum {
    ULK_SEC_ACCEPTED = 0,    /* the MAC verifies and the counter is new and inside the window */
    ULK_SEC_UNCHECKED,       /* no keys given: secured, not authenticated */
    ULK_SEC_AUTH_FAILED,     /* the MAC does not verify (another key, a changed frame) */
    ULK_SEC_UNKNOWN_SPI,     /* not the link's SPI */
    ULK_SEC_REPLAYED,        /* authentic, but its counter is not above the last accepted */
    ULK_SEC_OUTSIDE_WINDOW,  /* authentic, but more than `window` above the last accepted */
    ULK_SEC_MALFORMED        /* too short for its security header and trailer */
} ulk_security_verdict;
/* Short stable text of a verdict: "accepted", "secured, not authenticated", "authentication
 * failed", "unknown SPI", "replayed", "outside the window", "malformed security fields"
 */
const char *ulk_security_verdict_str(ulk_security_verdict v);
/* What a report says of a received secured frame (decode's `security.verdict`):
 * "authenticated" (accepted), "not authenticated" (no keys given), else why the check refused
 * it (ulk_security_verdict_str). */
const char *ulk_security_verdict_report(ulk_security_verdict v);

#define ULK_DECODE_MAX_ARGS 64 /* D <= 64 bits, every argument at least one bit */

typedef struct {
    const ulk_arg *arg;   /* the dictionary's argument (owned by the dictionary) */
    uint64_t raw;         /* raw field, right-aligned */
    double eng;           /* engineering value (enum: code; boolean: 0/1; float32: value) */
    const char *label;    /* enum label, NULL otherwise or when undefined */
    char text[64];        /* value in command-list syntax (ulk_arg_format) */
} ulk_decoded_arg;

typedef struct {
    ulk_word_status status;
    ulk_reject_kind reject;       /* ULK_REJ_NONE when accepted */
    char reason[200];             /* one line, "" when accepted */
    const ulk_command *cmd;       /* the command when system and opcode are known, else NULL */
    uint32_t vehicle, system, opcode;
    int n_args;
    ulk_decoded_arg args[ULK_DECODE_MAX_ARGS];
    char hex[33];                 /* ulk_word_hex */
} ulk_decoded;

/* Classifies w against dict into *out (fully overwritten). Returns 0, or ULK_EINVAL when an
 * argument is NULL. A rejection is a result (status), never an error. */
int ulk_decode_word(const ulk_dict *dict, const ulk_word *w, ulk_decoded *out);
/* As ulk_decode_word, for a word from the demodulator: a word marked ambiguous (its sub-bit
 * alignment not decided, ulk_demod_word.ambiguous) is rejected with
 * ULK_REJ_ALIGNMENT ("alignment") whatever its bits say, since a slipped reading can pass the
 * check (nrz-m 01/10 with parity: every bit flips). Length is still checked first. Same
 * returns as ulk_decode_word. */
int ulk_decode_demod_word(const ulk_dict *dict, const ulk_demod_word *w, ulk_decoded *out);

/* Short stable name of a rejection kind ("check", "vehicle", "system", "opcode", "enum",
 * "range", "padding", "length", "none"). */
const char *ulk_reject_name(ulk_reject_kind k);

/* The exact engineering value a raw field encodes, as text: calibrated and float32 values as
 * the shortest decimal of the double nearest the exact value (raw 3 at a step of 0.37 is
 * "1.11", although the command-list text "1" compiles to the same raw), enum labels,
 * true/false, uncalibrated integers exactly. It compiles back to the same raw. */
void ulk_arg_encoded(const ulk_arg *a, uint64_t raw, char *buf, size_t len);

/* Writes the accepted command in command-list syntax with each argument's encoded value
 * (ulk_arg_encoded; "MNEMONIC a=1.11deg b=OPEN") into buf. Returns the length that was
 * needed (like snprintf). */
int ulk_decoded_format(const ulk_decoded *r, char *buf, size_t len);

#ifdef __cplusplus
}
#endif
#endif
