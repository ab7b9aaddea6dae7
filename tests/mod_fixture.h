/* tests/mod_fixture.h - uploads built in C for the modulator and sample I/O tests, and a slow
 * obvious reference of docs/spec/subbit.md sections 3 and 4 to compare the fast code with.
 *
 * The reference takes every decision in __int128 arithmetic straight from the contract's
 * formulas (j = floor(i R_s / f_s), frac(f t_i) from i f / f_s) and calls sin() per sample;
 * it shares nothing with src/mod.c but the ulk_ratio type.
 */
#ifndef ULK_MOD_FIXTURE_H
#define ULK_MOD_FIXTURE_H

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/link.h"
#include "ulk/upload.h"

#define FX_MAX_WORDS 64

typedef struct {
    const char *rb, *zero, *one, *idle, *fsc, *fp; /* fp NULL: no pilot */
    double amp, ap;
    ulk_waveform wave;
    ulk_line_code line;
    int P, G, T;                    /* idle patterns: preamble, gap, postamble */
    const char *words[FX_MAX_WORDS]; /* "0101..." each, NULL-terminated; all of one length */
} fx_spec;

typedef struct {
    ulk_upload u;
    ulk_upload_cmd cmds[FX_MAX_WORDS];
} fx_upload;

static inline int fx_pattern(uint8_t *dst, const char *s)
{
    int n = (int)strlen(s);
    for (int i = 0; i < n; i++) dst[i] = (uint8_t)(s[i] == '1');
    return n;
}

static inline ulk_ratio fx_ratio(const char *text)
{
    ulk_ratio r = {0, 1};
    if (ulk_ratio_parse(text, &r) != 0) abort();
    return r;
}

/* Builds f from s (no allocation: the upload lives inside f). */
static inline void fx_make(fx_upload *f, const fx_spec *s)
{
    memset(f, 0, sizeof *f);
    ulk_link *l = &f->u.link;
    l->profile = ULK_PROFILE_SUBBIT;
    l->bit_rate = fx_ratio(s->rb);
    l->n_subbits = fx_pattern(l->zero, s->zero);
    fx_pattern(l->one, s->one);
    fx_pattern(l->idle, s->idle);
    l->line_code = s->line;
    l->fsc = fx_ratio(s->fsc);
    l->waveform = s->wave;
    l->amplitude = s->amp;
    if (s->fp) {
        l->has_pilot = 1;
        l->fp = fx_ratio(s->fp);
        l->pilot_amplitude = s->ap;
    }
    l->preamble = s->P;
    l->gap = s->G;
    l->postamble = s->T;
    size_t n = 0;
    while (n < FX_MAX_WORDS && s->words[n]) n++;
    int W = n ? (int)strlen(s->words[0]) : 8;
    l->word_bits = W;
    l->opcode_bits = W; /* the modulator reads only word_bits; keep the sum consistent */
    f->u.format_version = 1;
    f->u.cmds = f->cmds;
    f->u.n_cmds = n;
    f->u.idles_after = (uint64_t)s->T;
    for (size_t k = 0; k < n; k++) {
        f->cmds[k].idles_before = (uint64_t)(k == 0 ? s->P : s->G);
        f->cmds[k].word.n_bits = W;
        fx_pattern(f->cmds[k].word.bits, s->words[k]);
    }
}

/* The sub-bit stream I^P W_1 I^G ... W_N I^T (section 3), written out naively. Caller frees. */
static inline uint8_t *fx_subbits(const fx_spec *s, size_t *len)
{
    size_t n = strlen(s->zero), cap = 1024, k = 0;
    uint8_t *v = malloc(cap);
    size_t nw = 0;
    while (nw < FX_MAX_WORDS && s->words[nw]) nw++;
#define FX_PUT(pat)                                                   \
    do {                                                              \
        for (size_t q = 0; q < n; q++) {                              \
            if (k == cap) { cap *= 2; v = realloc(v, cap); }          \
            v[k++] = (uint8_t)((pat)[q] == '1');                      \
        }                                                             \
    } while (0)
    for (size_t w = 0; w < nw; w++) {
        for (int r = 0; r < (w == 0 ? s->P : s->G); r++) FX_PUT(s->idle);
        for (const char *b = s->words[w]; *b; b++) FX_PUT(*b == '1' ? s->one : s->zero);
    }
    for (int r = 0; r < s->T; r++) FX_PUT(s->idle);
#undef FX_PUT
    *len = k;
    return v;
}

/* Line levels d_j of section 4 (nrz-m: d_{-1} = +1). Caller frees. */
static inline int8_t *fx_levels(const uint8_t *sb, size_t len, ulk_line_code lc)
{
    int8_t *d = malloc(len ? len : 1);
    int prev = 1;
    for (size_t j = 0; j < len; j++) {
        if (lc == ULK_LINE_NRZM) {
            if (sb[j]) prev = -prev;
            d[j] = (int8_t)prev;
        } else {
            d[j] = sb[j] ? 1 : -1;
        }
    }
    return d;
}

/* floor(i * x / fs) and the remainder, for x, fs exact: x/fs = (x.num fs.den) / (x.den fs.num). */
static inline void fx_divmod(uint64_t i, ulk_ratio x, ulk_ratio fs, __int128 *q, __int128 *r, __int128 *den)
{
    __int128 num = (__int128)i * x.num * fs.den, d = (__int128)x.den * fs.num;
    *q = num / d;
    *r = num % d;
    *den = d;
}

/* s_i straight from the formula of section 4, in double. */
static inline double fx_ref_sample(const ulk_link *l, const int8_t *levels, ulk_ratio fs, uint64_t i)
{
    const double TWO_PI = 6.283185307179586476925286766559;
    ulk_ratio rs = ulk_ratio_make(l->bit_rate.num * l->n_subbits, l->bit_rate.den);
    __int128 q, r, d;
    fx_divmod(i, rs, fs, &q, &r, &d);
    double lev = levels[(size_t)q];
    fx_divmod(i, l->fsc, fs, &q, &r, &d);
    double c;
    if (l->waveform == ULK_WAVE_SQUARE) c = 2 * r < d ? 1.0 : -1.0;
    else c = sin(TWO_PI * ((double)r / (double)d));
    double s = l->amplitude * lev * c;
    if (l->has_pilot) {
        fx_divmod(i, l->fp, fs, &q, &r, &d);
        s += l->pilot_amplitude * sin(TWO_PI * ((double)r / (double)d));
    }
    return s;
}

/* ceil(L * fs / R_s). */
static inline uint64_t fx_n_samples(const ulk_link *l, size_t L, ulk_ratio fs)
{
    __int128 num = (__int128)L * fs.num * l->bit_rate.den, den = (__int128)fs.den * l->bit_rate.num * l->n_subbits;
    return (uint64_t)((num + den - 1) / den);
}

#endif
