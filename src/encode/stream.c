/* src/stream.c - expands an upload into its sub-bit stream, chunk by chunk
 * (docs/spec/subbit.md section 3): I^P W_1 I^G ... W_N I^T, each bit as its n-sub-bit pattern.
 * Commands are read through the ulk_upload_* accessors, so a lean upload (ULK_UPLOAD_LEAN:
 * idles and packed unit octets only) streams exactly as a full one.
 * The link profile (ulk/profile.h) says what a unit's bits are (word or CLTU) and what its
 * filler is (the idle pattern, or docs/spec/ccsds-tc.md section 3's alternating bits that
 * restart at 0 on every run); the layout is the same for both. */
#include <string.h>

#include "ulk/profile.h"
#include "ulk/subbit.h"
#include "util.h"

struct ulk_stream {
    const ulk_upload *u;
    const ulk_profile_ops *prof;
    uint64_t total;
    size_t cmd;          /* current command (0-based); n_cmds = postamble */
    int in_word;         /* 0: in the idles before cmd, 1: in its word */
    uint64_t pos;        /* idle pattern or bit index within the current part */
    int sub;             /* sub-bit within the pattern */
};

uint64_t ulk_upload_n_subbits(const ulk_upload *u)
{
    if (u->lean) return u->lean->n_subbits;
    uint64_t patterns = u->idles_after;
    for (size_t i = 0; i < u->n_cmds; i++) patterns += ulk_upload_idles_before(u, i) + ulk_upload_unit_bits(u, i);
    return patterns * (uint64_t)u->link.n_subbits;
}

ulk_stream *ulk_stream_create(const ulk_upload *u)
{
    ulk_stream *s = ulk_calloc(1, sizeof *s);
    if (!s) return NULL;
    s->u = u;
    s->prof = ulk_profile_ops_for(u->link.profile);
    if (!s->prof) {
        ulk_free(s);
        return NULL;
    }
    s->total = ulk_upload_n_subbits(u);
    return s;
}

void ulk_stream_destroy(ulk_stream *s) { ulk_free(s); }
uint64_t ulk_stream_length(const ulk_stream *s) { return s->total; }

size_t ulk_stream_read(ulk_stream *s, uint8_t *subbits, ulk_subbit_info *info, size_t max)
{
    const ulk_link *l = &s->u->link;
    const int n = l->n_subbits;
    size_t got = 0;
    while (got < max) {
        uint64_t part_len;
        int is_word;
        if (s->cmd > s->u->n_cmds) break;
        if (s->cmd == s->u->n_cmds) { part_len = s->u->idles_after; is_word = 0; }
        else if (!s->in_word) { part_len = ulk_upload_idles_before(s->u, s->cmd); is_word = 0; }
        else { part_len = ulk_upload_unit_bits(s->u, s->cmd); is_word = 1; }
        if (s->pos >= part_len) {
            /* next part */
            if (s->cmd == s->u->n_cmds) { s->cmd++; break; }
            if (!s->in_word) s->in_word = 1;
            else { s->in_word = 0; s->cmd++; }
            s->pos = 0;
            s->sub = 0;
            continue;
        }
        const uint8_t *pat = NULL;
        int bitv = -1;
        if (is_word) {
            bitv = ulk_upload_unit_bit(s->u, s->cmd, s->pos);
            pat = bitv ? l->one : l->zero;
        }
        while (s->sub < n && got < max) {
            subbits[got] = pat ? pat[s->sub] : (uint8_t)s->prof->filler_symbol(l, s->pos, s->sub);
            if (info) {
                info[got].word = is_word ? (uint32_t)(s->cmd + 1) : 0;
                info[got].bit = is_word ? (int32_t)s->pos : -1;
                info[got].bit_value = (int8_t)bitv;
            }
            got++;
            s->sub++;
        }
        if (s->sub == n) { s->sub = 0; s->pos++; }
    }
    return got;
}

double ulk_stream_word_start_s(const ulk_upload *u, size_t k)
{
    uint64_t patterns = 0;
    for (size_t i = 0; i < k && i < u->n_cmds; i++) {
        patterns += ulk_upload_idles_before(u, i);
        if (i + 1 < k) patterns += ulk_upload_unit_bits(u, i);
    }
    /* one pattern lasts 1/R_b */
    return (double)patterns * (double)u->link.bit_rate.den / (double)u->link.bit_rate.num;
}

double ulk_stream_start_next(const ulk_upload *u, ulk_start_cursor *c)
{
    if (c->k >= u->n_cmds) return -1.0;
    if (c->k > 0) c->patterns += ulk_upload_unit_bits(u, c->k - 1);
    c->patterns += ulk_upload_idles_before(u, c->k);
    c->k++;
    return (double)c->patterns * (double)u->link.bit_rate.den / (double)u->link.bit_rate.num;
}
