/* include/ulk/verify.h - does a capture hold exactly an upload's commands, in order, bit for
 * bit? The receiver's units (include/ulk/rx.h events) are added as they arrive; each is kept
 * as a compact record (start, identity, argument raws, its hex and command-list text), never
 * the whole decoded unit, so memory is the upload plus a few hundred octets per unit found.
 * Then one comparison aligns the accepted units with the upload's commands.
 *
 * Alignment: a minimum-edit script where equal units match (cost 0), the same command with
 * other bits is "changed" (1), anything else "missing" or "extra" (1 each); by dynamic
 * programming when (upload + 1) x (accepted + 1) <= 2e7 cells, else a greedy walk in order.
 * Among scripts of equal cost the one whose paired units lie nearest the upload's schedule
 * wins (docs/decode.md, "verify report").
 */
#ifndef ULK_VERIFY_H
#define ULK_VERIFY_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/decode.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/rx.h"
#include "ulk/upload.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One unit received, as the comparison and the report need it. */
typedef struct {
    double start_s;
    int tc;                    /* 1: a CLTU, 0: a sub-bit word */
    int accepted;
    const ulk_command *cmd;    /* accepted only */
    uint32_t system;           /* system address, or APID */
    int n_args;
    uint64_t *raw;             /* n_args argument raws (accepted only) */
    uint16_t seq_count;        /* CLTU */
    uint8_t frame_seq;         /* CLTU */
    ulk_word word;             /* sub-bit word: its W bits */
    char *hex;                 /* the word in hex, or the CLTU's packet data field */
    char *text;                /* accepted: the command in command-list syntax;
                                  rejected: the reason */
    ulk_reject_kind reject;
} ulk_verify_unit;

typedef enum { ULK_VERIFY_MATCH = 0, ULK_VERIFY_MISSING, ULK_VERIFY_EXTRA, ULK_VERIFY_CHANGED } ulk_verify_op_kind;

typedef struct {
    ulk_verify_op_kind kind;
    size_t upload_index;       /* MATCH, MISSING, CHANGED: index into u->cmds */
    size_t accepted_index;     /* MATCH, EXTRA, CHANGED: index among the accepted units */
} ulk_verify_op;

typedef struct ulk_verify ulk_verify;

/* Creates a comparison against u, whose commands were compiled with dict (the caller checks
 * the dictionary digests; both must outlive the object). Returns 0, or ULK_ENOMEM. */
int ulk_verify_create(const ulk_dict *dict, const ulk_upload *u, ulk_verify **out, ulk_diag *diag);

/* Adds a ULK_RX_WORD or ULK_RX_CLTU event, or keeps a copy of the ULK_RX_ESTIMATES event's
 * estimates (others are ignored). Returns 0 or ULK_ENOMEM. */
int ulk_verify_add(ulk_verify *v, const ulk_rx_event *ev);

/* Aligns the accepted units with the upload. Returns 0 or ULK_ENOMEM. Once, after the last add. */
int ulk_verify_compare(ulk_verify *v);

size_t ulk_verify_n_accepted(const ulk_verify *v);
const ulk_verify_unit *ulk_verify_accepted(const ulk_verify *v, size_t i);
size_t ulk_verify_n_rejected(const ulk_verify *v);
const ulk_verify_unit *ulk_verify_rejected(const ulk_verify *v, size_t i);
/* The edit script, in order (after compare). */
size_t ulk_verify_n_ops(const ulk_verify *v);
const ulk_verify_op *ulk_verify_op_at(const ulk_verify *v, size_t i);
/* What the receiver measured (its ULK_RX_ESTIMATES event): the clock-error estimate and
 * whether it reached its search limit, and for a complex capture the carrier's. NULL until
 * that event was added. */
const ulk_rx_estimates *ulk_verify_estimates(const ulk_verify *v);
/* 1 when the script is all matches (the capture holds exactly the upload). */
int ulk_verify_good(const ulk_verify *v);

/* The upload command's identity as the report shows it: the word in hex, or (ccsds-tc) its
 * packet data field read from the frame. */
void ulk_verify_sent_hex(const ulk_upload *u, const ulk_upload_cmd *c, char *buf, size_t len);

void ulk_verify_destroy(ulk_verify *v); /* NULL does nothing */

#ifdef __cplusplus
}
#endif
#endif
