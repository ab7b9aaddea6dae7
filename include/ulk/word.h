/* ulk/word.h - command words (docs/spec/subbit.md section 2) and check codes.
 *
 * A word is at most ULK_MAX_WORD_BITS bits, kept one bit per byte, most significant
 * (first sent) first, so that any field of any width can be read and written without
 * shifting across 64-bit boundaries.
 */
#ifndef ULK_WORD_H
#define ULK_WORD_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/error.h"
#include "ulk/link.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    int n_bits;                          /* W */
    uint8_t bits[ULK_MAX_WORD_BITS];     /* 0/1, bits[0] sent first */
} ulk_word;

/* Writes the n low bits of v (MSB first) at bit offset pos; n 0..64, pos + n <= W. */
void ulk_word_put(ulk_word *w, int pos, int n, uint64_t v);
/* Reads n bits (0 <= n <= 64) from offset pos, right-aligned; 0 when n is 0. */
uint64_t ulk_word_get(const ulk_word *w, int pos, int n);
/* W-bit value right-aligned in ceil(W/4) hex digits; buf needs 33 bytes. */
void ulk_word_hex(const ulk_word *w, char *buf);
/* W bits as '0'/'1' characters, first sent first; buf needs W + 1 (at most 129) bytes. */
void ulk_word_bin(const ulk_word *w, char *buf);
/* Parses hex as written by ulk_word_hex into a word of n_bits (1..ULK_MAX_WORD_BITS):
 * exactly ceil(n_bits/4) hex digits (either case), and the pad bits left of the W-bit
 * value must be zero. Returns 0 or ULK_EPARSE (w untouched then). */
int ulk_word_from_hex(const char *hex, int n_bits, ulk_word *w);

/* Check field over bits[0 .. n-1] (section 2), bit by bit, most significant first.
 * Returns the check value (C bits; 0 for ULK_CHECK_NONE). Usage:
 *     uint32_t c = ulk_check_compute(ULK_CHECK_CRC16, w.bits, w.n_bits - 16); */
uint32_t ulk_check_compute(ulk_check_kind k, const uint8_t *bits, int n);

/* Byte-wise catalogue forms, for the catalogue check values:
 * CRC-8/SMBUS: width 8, poly 0x07, init 0x00, refin false, refout false, xorout 0x00,
 *   check ("123456789") 0xF4.
 * CRC-16/IBM-3740 (CRC-16/CCITT-FALSE): width 16, poly 0x1021, init 0xFFFF, refin false,
 *   refout false, xorout 0x0000, check 0x29B1.
 * Source: the published catalogue of parametrised CRC algorithms (reveng). */
uint8_t ulk_crc8_bytes(const uint8_t *p, size_t n);
uint16_t ulk_crc16_bytes(uint16_t init, const uint8_t *p, size_t n);

/* Field offsets of a link's word. */
typedef struct {
    int vehicle_pos, system_pos, opcode_pos, args_pos, check_pos;
} ulk_word_layout;
ulk_word_layout ulk_word_layout_of(const ulk_link *l);

/* Builds a complete word: addresses, opcode, the packed argument field (args_bits bits
 * at args_pos, already packed by the caller as a word-sized bit array of length D) and
 * the check. arg_bits may be NULL when D is 0 (or for an all-zero field). system_addr and
 * opcode are masked to their widths. */
void ulk_word_build(const ulk_link *l, uint32_t system_addr, uint32_t opcode,
                    const uint8_t *arg_bits /* D bits, 0/1 */, ulk_word *out);
/* 1 when the check field of w matches its content (always 1 for check none); 0 when it
 * does not or when w's length is not the link's W. A verdict, never an error. */
int ulk_word_check_ok(const ulk_link *l, const ulk_word *w);

#ifdef __cplusplus
}
#endif
#endif
