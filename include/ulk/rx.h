/* include/ulk/rx.h - the receiver: samples in, events out.
 *
 * One streaming object runs the whole receive chain of a dictionary's link: for complex
 * (I/Q) samples of the composite carrier first carrier recovery (ulk/carrier.h: coarse
 * search, tracking loop, the data channel as the quadrature of the de-rotated signal divided
 * by the mode's data index, ranging correlation, voice demodulation), then the blind
 * front end (ulk/demod.h) and the link profile's unit decoder (its receiver operations in
 * ulk/profile.h): words interpreted by the dictionary (ulk/decode.h), or frames, which on a
 * link with security are verified with the keys and the receive-side anti-replay state given
 * in the options.
 *
 * Complex captures: the carrier recovery runs with delayed outputs (a transmission found after
 * noise or a gap is de-rotated from its first sample); for a sine data channel without pilot
 * and no voice asked, the samples are low-passed and decimated before it (with ranging to a
 * band that keeps 8 chip rates), with every time still on the capture's sample clock
 * (docs/carrier.md). Warnings at finish: no
 * carrier line found anywhere, the carrier offset or the clock-error estimate at the edge of
 * its search range.
 *
 *     ulk_rx *rx;
 *     ulk_rx_create(dict, &opt, &rx, diag);
 *     while (more samples) {
 *         ulk_rx_push(rx, x, n);                        (or ulk_rx_push_complex)
 *         while (ulk_rx_next_event(rx, &ev) > 0) use(&ev);
 *     }
 *     ulk_rx_finish(rx);
 *     while (ulk_rx_next_event(rx, &ev) > 0) use(&ev);  (ends with ULK_RX_END)
 *     ulk_rx_destroy(rx);
 *
 * Memory is flat: the demodulator keeps a few blocks of samples, and events wait in a queue
 * only until they are pulled (each pull releases the event pulled before), so a caller that
 * drains the queue after every push holds at most one push's worth of events whatever the
 * capture's length. ulk_rx_run_file does exactly that over a capture file.
 *
 * Errors: a negative ulk_status with the reason in the ulk_diag given to create (or to
 * run_file); a rejected word or CLTU is an event (a result), never an error.
 */
#ifndef ULK_RX_H
#define ULK_RX_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/carrier.h"
#include "ulk/decode.h"
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/sampleio.h"
#include "ulk/spectrum.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ulk_rx ulk_rx;

typedef struct {
    double fs_hz;             /* sample rate of the samples pushed, > 0 (required) */
    const char *fs_exact;     /* the same as an exact decimal ("62500.5"), or NULL; the ranging
                                 correlator uses it for sample-exact chip positions */
    int complex_;             /* 1: I/Q samples (ulk_rx_push_complex), carrier recovery first;
                                 needs the dictionary's carrier section */
    const char *mode;         /* complex: the carrier mode; NULL = the section's only mode */
    double max_offset_hz;     /* complex: coarse carrier search +-; 0 = 5000 */
    int ranging;              /* complex: measure the ranging code phase (mode must have it) */
    const char *voice_path;   /* complex: demodulate the voice FM subcarrier into this WAV
                                 (float, written atomically at ulk_rx_finish); NULL = none */
    const char *name;         /* the capture's name in messages; NULL = "capture" */
    ulk_demod_soft_fn on_soft;/* optional: every soft symbol (sub-bit, or channel bit for
                                 ccsds-tc) as it is produced, for plots; called during push */
    void *user;               /* passed to on_soft */
    /* ccsds-tc links with link.tc.security (docs/sdls.md); refused on any other link: */
    const char *keys_path;    /* key file: every frame authenticated (MAC and anti-replay
                                 window); NULL = frames reported secured, not authenticated */
    const char *state_path;   /* receive-side anti-replay state (needs keys_path): locked from
                                 create to destroy, read at create (created when absent, with a
                                 ULK_RX_NOTICE), saved back by ulk_rx_finish once every sample
                                 was decoded; NULL = the window opens at this run's first frame */
} ulk_rx_options;

typedef enum {
    ULK_RX_WORD = 1,      /* a sub-bit word: accepted, or rejected with its reason */
    ULK_RX_CLTU = 2,      /* a ccsds-tc CLTU: accepted (its command), or rejected */
    ULK_RX_WARNING = 3,   /* a condition the operator should know of (one line, in text) */
    ULK_RX_ESTIMATES = 4, /* once, at finish: what was measured (est) */
    ULK_RX_END = 5,       /* once, last: the totals (counts); no event follows */
    ULK_RX_NOTICE = 6     /* information, not a problem (one line, in text): e.g. a receive
                             state created */
} ulk_rx_event_kind;

/* What was measured over the capture (ULK_RX_ESTIMATES). */
typedef struct {
    ulk_demod_estimates demod; /* E_b/N_0, subcarrier, clock error, signal_found, truncated */
    double fs_hz;
    uint64_t n_samples;        /* samples pushed (complex samples for I/Q) */
    double duration_s;         /* n_samples / fs_hz */
    /* complex captures only: */
    int complex_;
    char mode[64];             /* carrier mode used */
    double m_data;             /* data index the quadrature was divided by (0: data off) */
    double loop_bw_hz;         /* B_L of the carrier loop */
    ulk_crec_status crec;      /* coarse and tracked carrier offset, line strength */
    double max_offset_hz;      /* the carrier search range, +-this (crec.at_limit: reached) */
    int has_ranging;
    ulk_ranging_result ranging;
    int voice_rate_hz;         /* voice WAV written (0: not asked) */
    uint64_t voice_samples;
    /* ccsds-tc: */
    int secured;               /* the link has security (link.tc.security) */
    int authenticated;         /* frames were verified (keys given) */
    int state_saved;           /* the receive state was saved back */
} ulk_rx_estimates;

/* Totals (ULK_RX_END, and ulk_rx_get_counts at any time). */
typedef struct {
    uint64_t n_units;          /* words or CLTUs reported */
    uint64_t n_accepted;
    uint64_t n_rejected;
    uint64_t n_rejected_address; /* rejected for the vehicle or system address (APID): words
                                    of another vehicle, or a wrong dictionary */
    uint64_t n_rejected_damaged; /* rejected before the address could be trusted: length,
                                    alignment, check (for a CLTU: start sequence, codeblocks,
                                    frame, FECF, packet) */
    uint64_t n_rejected_security; /* secured frames refused by the security check
                                    (authentication failed, unknown SPI, replayed, outside
                                    the window, malformed): not counted as damaged */
} ulk_rx_counts;

typedef struct {
    ulk_rx_event_kind kind;
    /* ULK_RX_WORD / ULK_RX_CLTU: */
    ulk_demod_word dw;         /* start_s, margin, polarity; the W bits for a word. CLTU:
                                  margin = 1 - corrected / codeblocks */
    const ulk_decoded *dec;    /* the interpretation: status, reject kind and reason, command
                                  and arguments, hex (for a CLTU: APID in system) */
    uint16_t seq_count;        /* CLTU: packet sequence count */
    uint8_t frame_seq;         /* CLTU: N(S) */
    int n_corrected;           /* CLTU: codeblocks with one bit corrected */
    int secured;               /* CLTU: the frame carried a security header and trailer: */
    ulk_security_verdict sec_verdict; /* ACCEPTED (authenticated), UNCHECKED (no keys: secured,
                                  not authenticated), or why the security check refused it */
    uint16_t spi;              /* CLTU, secured: the security parameter index */
    uint64_t iv_counter;       /* CLTU, secured: the IV's counter */
    const char *hex;           /* the unit's identity in hex: the word (dec->hex), or the
                                  CLTU's packet data field ("" when not read) */
    /* ULK_RX_WARNING, ULK_RX_NOTICE: */
    const char *text;
    /* ULK_RX_ESTIMATES: */
    const ulk_rx_estimates *est;
    /* ULK_RX_END: */
    ulk_rx_counts counts;
} ulk_rx_event;

/* Creates a receiver for dict's link (dict must outlive it). For opt->complex_ the mode is
 * checked (it exists, leaves a residual carrier, has the ranging / voice channel asked for)
 * and the voice WAV opened. With opt->keys_path the key file is read, and with
 * opt->state_path the state locked and read (by the profile's security, docs/sdls.md).
 * Returns 0 and *out, or ULK_EINVAL (options, mode, keys or state on a link without
 * security, the link's key missing from the key file), ULK_ELIMIT (a sample rate the
 * demodulator cannot use), ULK_EIO (voice file; key or state file unreadable, in use, or
 * open to others), ULK_EPARSE (key or state file broken), ULK_ENOMEM; reason in diag, which
 * must outlive the receiver (later errors are reported there too). */
int ulk_rx_create(const ulk_dict *dict, const ulk_rx_options *opt, ulk_rx **out, ulk_diag *diag);

/* Pushes n real samples (full scale 1.0; non-finite values count as 0). Events found are
 * queued for ulk_rx_next_event. Returns 0, or a negative status (reason in diag; the
 * receiver is then unusable except for destroy). ULK_EINVAL for a complex receiver. */
int ulk_rx_push(ulk_rx *rx, const float *x, size_t n);

/* Pushes n complex samples, interleaved I, Q (2 n floats). ULK_EINVAL for a real receiver. */
int ulk_rx_push_complex(ulk_rx *rx, const float *iq, size_t n);

/* End of the samples: flushes the demodulator and decoder, commits the voice WAV, measures
 * ranging, saves the receive state (opt->state_path), and queues the last units, then
 * ULK_RX_ESTIMATES and ULK_RX_END. Returns 0 or a negative status (ULK_EFORMAT: too few
 * complex samples to find the carrier; ULK_ELIMIT: ranging over less than a code period;
 * ULK_EIO: the state could not be saved; ULK_ENOMEM). Once only. */
int ulk_rx_finish(ulk_rx *rx);

/* Pulls the next queued event into *ev: returns 1 (an event), 0 (none queued now), or a
 * negative status after a failed push/finish. Pointers in *ev stay valid until the next
 * call or destroy; pulling releases the previous event. */
int ulk_rx_next_event(ulk_rx *rx, ulk_rx_event *ev);

/* Totals so far. */
void ulk_rx_get_counts(const ulk_rx *rx, ulk_rx_counts *c);

/* Frees everything (an uncommitted voice WAV is removed; the state's lock released). NULL
 * does nothing. */
void ulk_rx_destroy(ulk_rx *rx);

/* ---- capture files ---- */

/* How to read a capture file (ulk/sampleio.h readers). */
typedef struct {
    double rate_hz;   /* raw files without metadata: sample rate; 0 = from the file or its .sigmf-meta */
    int format;       /* raw files: ULK_FMT_F32 / ULK_FMT_S16 as the user named it (the file's
                         extension must then agree); -1 = not given (the extension decides) */
    int channel;      /* channel of a multi-channel WAV; -1 = refuse multi-channel unless I/Q */
    int iq;           /* a two-channel WAV is I (left) and Q (right) */
    int format_complex; /* with format: the raw samples are interleaved I/Q (cf32, ci16) */
} ulk_rx_file_options;

/* Called for every event as it is pulled; returns 0 to go on, or a negative status to stop
 * (run_file then returns it). */
typedef int (*ulk_rx_event_fn)(const ulk_rx_event *ev, void *user);

/* Reads the capture at path through the sample readers (WAV; raw .f32/.s16 mono or
 * .cf32/.ci16 I/Q with their .sigmf-meta or fo->rate_hz/format; a two-channel WAV as I/Q
 * with fo->iq) and runs a receiver over it, calling on_event for every event (draining after
 * every block read, so memory stays flat). A complex capture uses opt->mode, else the mode
 * recorded in its SigMF metadata ("ulk:carrier"), else the section's only mode. opt may be
 * NULL (defaults); its fs_hz, fs_exact, complex_ and name are set from the file. Returns 0,
 * or a negative status with the reason in diag (ULK_EIO, ULK_EFORMAT, ULK_EINVAL, ...), or
 * what on_event returned. */
int ulk_rx_run_file(const ulk_dict *dict, const char *path, const ulk_rx_file_options *fo, const ulk_rx_options *opt,
                    ulk_rx_event_fn on_event, void *user, ulk_diag *diag);

/* What the SigMF metadata beside a raw capture says: *complex_ = 1 for a .cf32/.ci16 name or
 * a complex core:datatype, mode = global "ulk:carrier".mode ("" when absent). Quietly
 * nothing when there is no readable metadata. Returns 0, or ULK_ENOMEM. */
int ulk_rx_sniff_meta(const char *path, int *complex_, char *mode, size_t mode_len);

/* ---- the spectrum of a capture file (ulk spectrum) ---- */

#define ULK_RX_MAX_MARKS 12

typedef struct {
    int complex_;              /* 1: two channels read as I/Q, bins -f_s/2 .. f_s/2 */
    double fs_hz;
    uint64_t n_samples;
    uint64_t n_nonfinite;      /* NaN or infinite sample values, taken as 0 */
    size_t nfft;               /* segment length used */
    uint64_t n_segments;
    double *f_hz, *power;      /* n_bins bins (line power, linear); owned */
    size_t n_bins;
    double peak_hz;            /* strongest line, refined by a parabola through the dB values
                                  of its neighbours */
    double peak_bin_hz;        /* the strongest bin's centre */
    double peak_db;            /* -HUGE_VAL when every bin is 0 */
    ulk_spectrum_mark marks[ULK_RX_MAX_MARKS]; /* the dictionary's channels (labels static) */
    int n_marks;
} ulk_rx_spectrum;

/* Welch-averaged power spectrum (Hann window, nfft-sample segments, 50 % overlap; ulk_welch)
 * of the capture at path: one channel is real, two are I/Q. hint: for raw samples without
 * SigMF metadata (NULL: none). nfft: a power of two, or 0 for 8192 reduced to fit a short
 * capture. dict (or NULL) gives the marks: data subcarrier and main lobe (f_sc +- R_s), pilot,
 * and from a carrier section the residual carrier, the voice subcarrier (f_v +- (Delta + f_a))
 * and the ranging main lobe, at +f for a real capture and f_o +- f for a complex one.
 * Returns 0 and *out (free with ulk_rx_spectrum_free), or ULK_EIO / ULK_EFORMAT (reading;
 * I and Q of different lengths), ULK_EINVAL (more than two channels), ULK_ELIMIT (fewer
 * samples than one segment), ULK_ENOMEM; reason in diag. */
int ulk_rx_spectrum_file(const char *path, const ulk_sample_info *hint, size_t nfft, const ulk_dict *dict,
                         ulk_rx_spectrum *out, ulk_diag *diag);
void ulk_rx_spectrum_free(ulk_rx_spectrum *s); /* NULL does nothing */

#ifdef __cplusplus
}
#endif
#endif
