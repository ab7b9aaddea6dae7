/* tests/sim_capture.h - an analytic capture generator for the demodulator's tests and its
 * benchmark (header-only, test code, not installed).
 *
 * Why a second generator beside src/mod.c: the tests need a transmitter whose clock is off
 * by an exact amount (ppm), a start anywhere inside the file and white noise of a stated
 * E_b/N_0, and a generator written straight from docs/spec/subbit.md sections 3-5 is also an
 * independent check of the decoder against the contract (not against our own modulator).
 *
 * The stream is I^P W_1 I^G ... W_N I^T (section 3); sample i of the capture is taken at the
 * transmitter time t = (i / f_s - delay) (1 + ppm 1e-6), where the section 4 waveform is
 * evaluated; before t = 0 and after the stream only noise is written. Noise: per-sample
 * variance sigma^2 from E_b/N_0 = P_d f_s / (2 sigma^2 R_b) (section 5), P_d computed from
 * the amplitude actually sent (A times level).
 */
#ifndef ULK_SIM_CAPTURE_H
#define ULK_SIM_CAPTURE_H

#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/link.h"
#include "ulk/word.h"

typedef struct {
    double fs_hz;
    double ppm;        /* transmitter clock error */
    double delay_s;    /* noise-only lead-in */
    double tail_s;     /* noise-only tail */
    double level;      /* scales the whole signal; 0 means 1 */
    double dc;
    int invert;
    int no_noise;
    double ebn0_db;
    uint64_t seed;
} sim_cfg;

typedef struct {
    uint64_t s;
    int have;
    double spare;
} sim_rng;

static inline uint64_t sim_next(sim_rng *r)
{
    /* xorshift64* (Vigna); good enough for noise and random words in tests */
    uint64_t x = r->s;
    x ^= x >> 12;
    x ^= x << 25;
    x ^= x >> 27;
    r->s = x;
    return x * 0x2545F4914F6CDD1DULL;
}

static inline void sim_seed(sim_rng *r, uint64_t seed)
{
    r->s = seed * 0x9E3779B97F4A7C15ULL + 0x1234567ULL;
    if (!r->s) r->s = 1;
    r->have = 0;
    for (int i = 0; i < 4; i++) sim_next(r);
}

static inline double sim_uniform(sim_rng *r) { return ((sim_next(r) >> 11) + 0.5) * (1.0 / 9007199254740992.0); }

static inline double sim_gauss(sim_rng *r)
{
    if (r->have) { r->have = 0; return r->spare; }
    double u1 = sim_uniform(r), u2 = sim_uniform(r);
    double m = sqrt(-2 * log(u1));
    r->spare = m * sin(2 * M_PI * u2);
    r->have = 1;
    return m * cos(2 * M_PI * u2);
}

/* Random W-bit words (content is irrelevant to the demodulator). */
static inline void sim_random_words(sim_rng *r, int W, ulk_word *w, size_t n_words)
{
    for (size_t i = 0; i < n_words; i++) {
        w[i].n_bits = W;
        for (int b = 0; b < W; b++) w[i].bits[b] = (uint8_t)(sim_next(r) >> 63);
    }
}

/* Sub-bits of I^P W_1 I^G ... W_N I^T; returns a malloc'd array of *len sub-bits and the
 * sub-bit index of each word's start in word_start (n_words entries, may be NULL). */
static inline uint8_t *sim_subbits(const ulk_link *l, const ulk_word *w, size_t n_words, size_t *len,
                                   size_t *word_start)
{
    const int n = l->n_subbits;
    size_t L = (size_t)n * ((size_t)l->preamble + (size_t)l->postamble +
                            n_words * (size_t)l->word_bits + (n_words ? (n_words - 1) * (size_t)l->gap : 0));
    uint8_t *s = malloc(L ? L : 1);
    size_t p = 0;
    for (int i = 0; i < l->preamble; i++) { memcpy(s + p, l->idle, (size_t)n); p += (size_t)n; }
    for (size_t k = 0; k < n_words; k++) {
        if (k) for (int i = 0; i < l->gap; i++) { memcpy(s + p, l->idle, (size_t)n); p += (size_t)n; }
        if (word_start) word_start[k] = p;
        for (int b = 0; b < l->word_bits; b++) {
            memcpy(s + p, w[k].bits[b] ? l->one : l->zero, (size_t)n);
            p += (size_t)n;
        }
    }
    for (int i = 0; i < l->postamble; i++) { memcpy(s + p, l->idle, (size_t)n); p += (size_t)n; }
    *len = p;
    return s;
}

/* Capture samples for the sub-bit stream sb[0..L). Returns malloc'd samples, count in *ns. */
static inline float *sim_capture(const ulk_link *l, const uint8_t *sb, size_t L, const sim_cfg *c, size_t *ns)
{
    double rb = ulk_ratio_to_double(l->bit_rate), rs = rb * l->n_subbits;
    double fsc = ulk_ratio_to_double(l->fsc), k = fsc / rs;
    double fp = l->has_pilot ? ulk_ratio_to_double(l->fp) : 0;
    double lev = c->level > 0 ? c->level : 1.0;
    double A = l->amplitude * lev, Ap = l->has_pilot ? l->pilot_amplitude * lev : 0;
    double sc = 1 + c->ppm * 1e-6;
    double dur = c->delay_s + (double)L / rs / sc + c->tail_s;
    size_t N = (size_t)ceil(dur * c->fs_hz);
    float *x = malloc((N ? N : 1) * sizeof *x);
    int8_t *lvl = malloc(L ? L : 1);
    int8_t d = 1;
    for (size_t j = 0; j < L; j++) {
        if (l->line_code == ULK_LINE_NRZM) { if (sb[j]) d = (int8_t)-d; lvl[j] = d; }
        else lvl[j] = sb[j] ? 1 : -1;
    }
    double pd = l->waveform == ULK_WAVE_SQUARE ? A * A : A * A / 2;
    /* E_b/N_0 = P_d f_s / (2 sigma^2 R_b): common practice: real samples at rate f_s carry a two-sided density N_0/2 over f_s, so
     * sigma^2 = N_0 f_s / 2 and E_b = P_d / R_b (e.g. Proakis, Digital Communications, 4th ed.,
     * chapter 5, from memory; docs/spec/subbit.md section 5) */
    double sigma = c->no_noise ? 0 : sqrt(pd * c->fs_hz / (2 * rb * pow(10, c->ebn0_db / 10)));
    sim_rng r;
    sim_seed(&r, c->seed);
    for (size_t i = 0; i < N; i++) {
        double t = ((double)i / c->fs_hz - c->delay_s) * sc;
        double s = 0;
        if (t >= 0) {
            double th = t * rs;
            double jf = floor(th);
            if (jf < (double)L) {
                size_t j = (size_t)jf;
                double ph = th * k - floor(th * k);
                double cv = l->waveform == ULK_WAVE_SQUARE ? (ph < 0.5 ? 1.0 : -1.0) : sin(2 * M_PI * ph);
                s = A * lvl[j] * cv;
                if (Ap > 0) s += Ap * sin(2 * M_PI * fmod(fp * t, 1.0));
            }
        }
        if (c->invert) s = -s;
        x[i] = (float)(s + c->dc + (sigma > 0 ? sigma * sim_gauss(&r) : 0));
    }
    free(lvl);
    *ns = N;
    return x;
}

/* A sub-bit link for tests, set up as the dictionary loader would (n <= 16). */
static inline void sim_link(ulk_link *l, const char *bit_rate, const char *zero, const char *one,
                            const char *idle, const char *fsc, ulk_waveform wf, ulk_line_code lc,
                            int W_args, ulk_check_kind ck)
{
    memset(l, 0, sizeof *l);
    l->profile = ULK_PROFILE_SUBBIT;
    ulk_ratio_parse(bit_rate, &l->bit_rate);
    l->n_subbits = (int)strlen(zero);
    for (int i = 0; i < l->n_subbits; i++) {
        l->zero[i] = (uint8_t)(zero[i] == '1');
        l->one[i] = (uint8_t)(one[i] == '1');
        l->idle[i] = (uint8_t)(idle[i] == '1');
    }
    l->line_code = lc;
    ulk_ratio_parse(fsc, &l->fsc);
    l->waveform = wf;
    l->amplitude = 0.9;
    l->preamble = 32;
    l->gap = 8;
    l->postamble = 8;
    l->vehicle_bits = 8;
    l->vehicle_value = 0xA7;
    l->system_bits = 4;
    l->opcode_bits = 6;
    l->argument_bits = W_args;
    l->check = ck;
    l->check_bits = ulk_check_bits(ck);
    l->word_bits = 8 + 4 + 6 + W_args + l->check_bits;
}

#endif
