/* ulk/demod.h - blind demodulator for the sub-bit profile (the profile's sections 3-5), and
 * the same front end delivering soft channel symbols only (ulk_demod_create_symbols).
 *
 * Why blind: a captured uplink starts anywhere in the file, its sample clock and subcarrier
 * are off by up to +-1000 ppm (one clock drives both, since f_sc = k R_s), its level, DC
 * offset and polarity are unknown. The demodulator takes samples in chunks of any size,
 * keeps memory flat (a few blocks of slots or samples, whatever the capture length) and reports
 * each W-bit word it finds with its start time and a soft margin.
 *
 * Method (details in docs/decode.md):
 *   1. DC blocker. For a sine subcarrier without pilot the samples are mixed at once to
 *      complex baseband with the nominal subcarrier and summed over slots of whole samples
 *      (at most an eighth of a subcarrier cycle); every later stage works on slots. A square
 *      subcarrier or a link with a pilot keeps the samples (pilot estimated per block and
 *      subtracted).
 *   2. Block estimation of the clock on a window of 3 blocks: each nominal sub-bit is mixed
 *      to complex baseband and squared, which strips the BPSK data; a zoomed DFT of the
 *      squared sequence (searched on sums of D sub-bits, the line being narrow) gives the
 *      clock error eps (the line sits at 2 k eps cycles per
 *      sub-bit) and the subcarrier phase modulo pi; the phase fixes the sub-bit clock to
 *      within one half-cycle of the subcarrier, and the block's phase is unwrapped against
 *      the previous block so that polarity and sub-bit count stay continuous. Every block is
 *      tested, so a signal after any lead-in or gap is acquired; the block that acquires also
 *      demodulates the one before it, and the block after a locked run is demodulated once
 *      on the last clock, so a transmission's first and last words are kept.
 *   3. Matched filter: integrate-and-dump of the received signal times the recovered
 *      subcarrier template (sine, on slots; or square, on samples, ramping to 0 within a
 *      few hundredths of a cycle of its edges) over each half-cycle; the sub-bit boundary (one
 *      of 2k half-cycle positions) is the one whose sub-bit dumps carry the most energy,
 *      accumulated over blocks. Soft sub-bit = dump / template energy.
 *   4. nrz-m: each group's n soft levels and the one before it are correlated with the n + 1
 *      levels each pattern produces, magnitude taken (differential detection over n + 1
 *      sub-bits, free of the polarity).
 *   5. Pattern stage: pattern alignment and polarity from the idle/word structure
 *      (metric accumulated over the stream, with look-ahead); maximum-likelihood bit
 *      decisions by correlating each n-sub-bit group with Z, O and I; word start chosen
 *      by maximum likelihood among nearby candidates where the stream leaves idle.
 *
 * Usage:
 *     ulk_demod *d;
 *     if (ulk_demod_create(&dict->link, 48000.0, NULL, &d, diag) < 0) ...;
 *     while ((n = ulk_reader_read(r, buf, 4096)) > 0) ulk_demod_push(d, buf, n);
 *     ulk_demod_finish(d);
 *     for (size_t i = 0; i < ulk_demod_n_words(d); i++) use(ulk_demod_word_at(d, i));
 *     ulk_demod_destroy(d);
 */
#ifndef ULK_DEMOD_H
#define ULK_DEMOD_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/error.h"
#include "ulk/limits.h"
#include "ulk/link.h"
#include "ulk/word.h"

#ifdef __cplusplus
extern "C" {
#endif

/* One recovered word. */
typedef struct {
    ulk_word word;      /* W bits, bits[0] first sent */
    double start_s;     /* start of the word's first sub-bit, seconds from the first sample */
    double margin;      /* soft margin: min over the W bits of (c_O - c_Z) / (2 d a), with
                           c the correlation of the soft group with the pattern and a the
                           estimated amplitude; 1 = noiseless, 0 = a tie, < 0 impossible */
    int polarity;       /* +1 as sent, -1 when the capture is inverted (always +1 for nrz-m) */
    int ambiguous;      /* 1: a one-sub-bit shift fits the word and its
                           edges nearly as well (log-likelihood ratio below 9.2 nats); the bits
                           are the likelier reading but must not be trusted: the dictionary
                           stage rejects such a word ("alignment") */
} ulk_demod_word;

/* Estimates over the parts of the capture where a signal was found. */
typedef struct {
    int signal_found;       /* 1 when at least one block held the signal */
    double ebn0_db;         /* section 5 definition: P_d f_s / (2 sigma^2 R_b), in dB */
    double subcarrier_hz;   /* f_sc (1 + eps) measured on the capture's time base */
    double rate_error_ppm;  /* eps * 1e6: positive = the signal's clock runs fast against
                               the capture's sample clock */
    double amplitude;       /* estimated data amplitude A (full scale 1.0) */
    uint64_t n_subbits;     /* soft sub-bits produced */
    uint64_t n_truncated;   /* words cut off by the end of the capture or a loss of signal */
    uint64_t n_ambiguous;   /* words handed on with ambiguous set (alignment not decided) */
    int at_search_limit;    /* 1 when the clock-error estimate reached the edge of the searched
                               range (search_limit_ppm) in a block that held the signal: the true
                               error may lie beyond it and rate_error_ppm is then only a bound;
                               widen ulk_demod_options.max_ppm */
    double search_limit_ppm;/* the clock-error range searched, +-this (ppm) */
} ulk_demod_estimates;

/* Default clock-error search range in ppm: +-1000 ppm (sample clock and subcarrier of a
 * real recording) with a 25 % margin, so an error of 1000 ppm lies inside the range and
 * not on its edge. */
#define ULK_DEMOD_DEFAULT_PPM ((double)ULK_DEMOD_DEFAULT_MAX_PPM)

/* Called for every word, in time order. */
typedef void (*ulk_demod_word_fn)(const ulk_demod_word *w, void *user);
/* Called for every soft sub-bit (before nrz-m decoding): start time and value in units of
 * the estimated amplitude (about +-1). Used for plots. */
typedef void (*ulk_demod_soft_fn)(double t_s, float soft, void *user);

typedef struct {
    ulk_demod_word_fn on_word;  /* NULL: words are kept in a list (ulk_demod_word_at) */
    ulk_demod_soft_fn on_soft;  /* NULL: none */
    void *user;
    double max_ppm;             /* clock-error search range; 0 = ULK_DEMOD_DEFAULT_PPM */
    int block_subbits;          /* estimation block in sub-bits; 0 = default 256 */
} ulk_demod_options;

typedef struct ulk_demod ulk_demod;

/* Creates a demodulator with its word stage for link cfg (n sub-bits per bit, the Z, O and
 * I patterns, W-bit words, the framing's gap) at sample rate fs_hz. opt may be NULL
 * (defaults). Returns 0 with *out set; ULK_EINVAL (message in diag) when the link has no
 * words (W = 0: a link whose units are decoded elsewhere goes through
 * ulk_demod_create_symbols), n or W out of range, or fs_hz < 2 (f_sc + R_s) (the data
 * signal's main lobe must lie below Nyquist); ULK_ELIMIT (a sample rate beyond the limit);
 * ULK_ENOMEM. The caller frees with ulk_demod_destroy(). cfg is copied. */
int ulk_demod_create(const ulk_link *cfg, double fs_hz, const ulk_demod_options *opt,
                     ulk_demod **out, ulk_diag *diag);

/* The channel symbols of a link whose units another stage decodes from the soft symbols
 * (one symbol per channel bit, as the CCSDS telecommand profile sends them): what the front
 * end needs to know of the signal, nothing of words. */
typedef struct {
    ulk_ratio symbol_rate;     /* R_s, symbols per second, > 0 */
    ulk_ratio fsc;             /* f_sc = k R_s with k whole, Hz */
    ulk_waveform waveform;     /* sine or square subcarrier */
    ulk_line_code line_code;   /* nrz-l or nrz-m: the soft symbols are the line levels,
                                  before any nrz-m decoding */
    int has_pilot;             /* a pilot tone to remove (f_p, A_p) */
    ulk_ratio fp;
    double pilot_amplitude;
    double amplitude;          /* A, as transmitted (the blind front end measures its own) */
} ulk_demod_symbols;

/* Creates a demodulator without a word stage: the blind search, clock-error search and
 * acquisition of ulk_demod_create, delivering every soft symbol through opt->on_soft (which
 * should then be set) and no words (ulk_demod_n_words stays 0; opt->on_word is not called).
 * The estimates are those of ulk_demod_create; n_subbits counts symbols. Returns 0 with
 * *out set; ULK_EINVAL (rates, subcarrier, sample rate, as ulk_demod_create), ULK_ELIMIT,
 * ULK_ENOMEM; message in diag. */
int ulk_demod_create_symbols(const ulk_demod_symbols *sym, double fs_hz, const ulk_demod_options *opt,
                             ulk_demod **out, ulk_diag *diag);
/* Sets the false-alarm probability per block of the acquisition test (default 1e-6; p in
 * (0, 1)). Raising it finds weak signals a block sooner and locks on noise more often; such a
 * false lock is refused by a level test on the soft values. Returns 0, or ULK_EINVAL for a p
 * out of range or after the first push. */
int ulk_demod_set_acq_pfa(ulk_demod *d, double p);
/* Feeds n samples (full scale 1.0; any level). x may be NULL when n is 0. Returns 0 or a
 * sticky negative status (ULK_ENOMEM). Words are reported as soon as they are decided,
 * which is some blocks after they are pushed. */
int ulk_demod_push(ulk_demod *d, const float *x, size_t n);
/* Ends the capture: decides everything still buffered. Returns 0 or the sticky status.
 * Pushing after finish returns ULK_EINVAL. */
int ulk_demod_finish(ulk_demod *d);
/* Current estimates (final after ulk_demod_finish). d and e must not be NULL. */
void ulk_demod_get_estimates(const ulk_demod *d, ulk_demod_estimates *e);
/* Words kept so far (only when no on_word callback was given). The pointer is valid until
 * the next push/finish/destroy. */
size_t ulk_demod_n_words(const ulk_demod *d);
const ulk_demod_word *ulk_demod_word_at(const ulk_demod *d, size_t i);
/* Frees d; NULL does nothing. */
void ulk_demod_destroy(ulk_demod *d);

#ifdef __cplusplus
}
#endif
#endif
