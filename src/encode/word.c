/* src/word.c - command words and their check codes (docs/spec/subbit.md section 2).
 *
 * A word is one bit per byte, first sent first: fields of any width at any offset are
 * plain loops, and the check codes are computed exactly as the contract states them, bit
 * by bit, so the code reads like the page. The byte-wise catalogue forms exist only to tie
 * the bit-wise form to the published check values.
 */
#include <ctype.h>
#include <string.h>

#include "ulk/error.h"
#include "ulk/word.h"

void ulk_word_put(ulk_word *w, int pos, int n, uint64_t v)
{
    for (int i = 0; i < n; i++) w->bits[pos + i] = (uint8_t)((v >> (n - 1 - i)) & 1u);
}

uint64_t ulk_word_get(const ulk_word *w, int pos, int n)
{
    uint64_t v = 0;
    for (int i = 0; i < n; i++) v = (v << 1) | (w->bits[pos + i] & 1u);
    return v;
}

void ulk_word_hex(const ulk_word *w, char *buf)
{
    static const char hx[] = "0123456789ABCDEF";
    int nd = (w->n_bits + 3) / 4;
    int pad = nd * 4 - w->n_bits; /* zero bits left of the W-bit value */
    for (int d = 0; d < nd; d++) {
        int v = 0;
        for (int k = 0; k < 4; k++) {
            int i = d * 4 + k - pad;
            v = (v << 1) | (i >= 0 ? (w->bits[i] & 1) : 0);
        }
        buf[d] = hx[v];
    }
    buf[nd] = 0;
}

void ulk_word_bin(const ulk_word *w, char *buf)
{
    for (int i = 0; i < w->n_bits; i++) buf[i] = (char)('0' + (w->bits[i] & 1));
    buf[w->n_bits] = 0;
}

int ulk_word_from_hex(const char *hex, int n_bits, ulk_word *w)
{
    if (!hex || n_bits < 1 || n_bits > ULK_MAX_WORD_BITS) return ULK_EPARSE;
    int nd = (n_bits + 3) / 4, pad = nd * 4 - n_bits;
    if ((int)strlen(hex) != nd) return ULK_EPARSE;
    ulk_word t;
    memset(&t, 0, sizeof t);
    t.n_bits = n_bits;
    for (int d = 0; d < nd; d++) {
        int c = (unsigned char)hex[d], v;
        if (c >= '0' && c <= '9') v = c - '0';
        else if (c >= 'a' && c <= 'f') v = c - 'a' + 10;
        else if (c >= 'A' && c <= 'F') v = c - 'A' + 10;
        else return ULK_EPARSE;
        for (int k = 0; k < 4; k++) {
            int i = d * 4 + k - pad, b = (v >> (3 - k)) & 1;
            if (i < 0) {
                if (b) return ULK_EPARSE; /* a set pad bit: the value is wider than W */
            } else {
                t.bits[i] = (uint8_t)b;
            }
        }
    }
    *w = t;
    return 0;
}

/* The contract's register loop: reg = init; per bit: top = msb(reg); reg = (reg << 1) & mask;
 * if (top ^ b) reg ^= poly. */
static uint32_t crc_bits(int width, uint32_t poly, uint32_t init, const uint8_t *bits, int n)
{
    uint32_t mask = (width == 32) ? 0xFFFFFFFFu : ((1u << width) - 1u);
    uint32_t reg = init & mask;
    for (int i = 0; i < n; i++) {
        uint32_t top = (reg >> (width - 1)) & 1u;
        reg = (reg << 1) & mask;
        if (top ^ (bits[i] & 1u)) reg ^= poly;
    }
    return reg;
}

uint32_t ulk_check_compute(ulk_check_kind k, const uint8_t *bits, int n)
{
    switch (k) {
    case ULK_CHECK_PARITY_EVEN:
    case ULK_CHECK_PARITY_ODD: {
        uint32_t x = 0;
        for (int i = 0; i < n; i++) x ^= bits[i] & 1u;
        return k == ULK_CHECK_PARITY_EVEN ? x : x ^ 1u;
    }
    case ULK_CHECK_CRC8: return crc_bits(8, 0x07, 0x00, bits, n);
    case ULK_CHECK_CRC16: return crc_bits(16, 0x1021, 0xFFFF, bits, n);
    default: return 0;
    }
}

uint8_t ulk_crc8_bytes(const uint8_t *p, size_t n)
{
    uint8_t reg = 0x00;
    for (size_t i = 0; i < n; i++) {
        reg ^= p[i];
        for (int k = 0; k < 8; k++) reg = (uint8_t)((reg & 0x80) ? (reg << 1) ^ 0x07 : (reg << 1));
    }
    return reg;
}

uint16_t ulk_crc16_bytes(uint16_t init, const uint8_t *p, size_t n)
{
    uint16_t reg = init;
    for (size_t i = 0; i < n; i++) {
        reg ^= (uint16_t)(p[i] << 8);
        for (int k = 0; k < 8; k++) reg = (uint16_t)((reg & 0x8000) ? (reg << 1) ^ 0x1021 : (reg << 1));
    }
    return reg;
}

ulk_word_layout ulk_word_layout_of(const ulk_link *l)
{
    ulk_word_layout y;
    y.vehicle_pos = 0;
    y.system_pos = l->vehicle_bits;
    y.opcode_pos = y.system_pos + l->system_bits;
    y.args_pos = y.opcode_pos + l->opcode_bits;
    y.check_pos = y.args_pos + l->argument_bits;
    return y;
}

static uint64_t low_bits(uint64_t v, int n) { return n >= 64 ? v : (v & (((uint64_t)1 << n) - 1)); }

void ulk_word_build(const ulk_link *l, uint32_t system_addr, uint32_t opcode, const uint8_t *arg_bits,
                    ulk_word *out)
{
    ulk_word_layout y = ulk_word_layout_of(l);
    int c = ulk_check_bits(l->check);
    out->n_bits = y.check_pos + c;
    ulk_word_put(out, y.vehicle_pos, l->vehicle_bits, low_bits(l->vehicle_value, l->vehicle_bits));
    ulk_word_put(out, y.system_pos, l->system_bits, low_bits(system_addr, l->system_bits));
    ulk_word_put(out, y.opcode_pos, l->opcode_bits, low_bits(opcode, l->opcode_bits));
    if (arg_bits) {
        for (int i = 0; i < l->argument_bits; i++) out->bits[y.args_pos + i] = arg_bits[i] & 1u;
    } else {
        memset(out->bits + y.args_pos, 0, (size_t)l->argument_bits);
    }
    if (c) ulk_word_put(out, y.check_pos, c, ulk_check_compute(l->check, out->bits, y.check_pos));
}

int ulk_word_check_ok(const ulk_link *l, const ulk_word *w)
{
    ulk_word_layout y = ulk_word_layout_of(l);
    int c = ulk_check_bits(l->check);
    if (w->n_bits != y.check_pos + c || w->n_bits > ULK_MAX_WORD_BITS) return 0;
    if (!c) return 1;
    return ulk_word_get(w, y.check_pos, c) == ulk_check_compute(l->check, w->bits, y.check_pos);
}
