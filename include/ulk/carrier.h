/* ulk/carrier.h - the composite carrier: data, voice and ranging channels phase-modulating
 * one carrier, its power division, the modulation-index planner and the baseband generator
 * (docs/spec/carrier.md).
 *
 * Why: with several channels on one phase-modulated carrier, every index taken from one
 * channel's power is paid for by the residual carrier and the others, and the cross-products
 * (intermodulation) are lost to all. The planner says, per mode, where the power goes and how
 * much margin each need keeps, and can choose the indices that leave the smallest margin
 * largest. The generator makes the complex baseband x(t) = exp(j(sum_k m_k c_k(t) + 2 pi f_o t))
 * with tone and chip phases computed exactly on the sample index, as the modulator does.
 *
 * Usage:
 *     ulk_carrier *c;
 *     if (ulk_carrier_load("dictionaries/carrier/demo-carrier.yaml", &c, diag) == 0) {
 *         const ulk_carrier_mode *mo = &c->modes[0];
 *         ulk_carrier_plan p;
 *         ulk_carrier_plan_indices(c, mo, mo->m_rad, c->pt_n0_dbhz, &p); // p.carrier = P_c/P_T
 *         ulk_carrier_destroy(c);
 *     }
 */
#ifndef ULK_CARRIER_H
#define ULK_CARRIER_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/error.h"
#include "ulk/link.h"

#ifdef __cplusplus
extern "C" {
#endif

/* ---- Bessel functions of the first kind ----
 * |x| <= 12: power series in long double (its largest term is ~4e3, so cancellation costs
 * ~1e-16 with an 80-bit long double); 12 < |x| <= 25: Miller's backward recurrence
 * normalised by J0 + 2 sum J_2k = 1; beyond: Hankel's asymptotic expansion truncated at its
 * smallest term (error ~e^-2x). Measured against Bessel's integral over 0..60: below 1e-14
 * absolute, i.e. 1e-12 relative except within ~1e-2 of a zero, where no absolute method
 * can promise a relative figure. Where long double is double (some ARM ABIs) the series
 * loses up to ~3 more digits near x = 12. Even/odd symmetry for x < 0; NaN gives NaN. */
double ulk_bessel_j0(double x);
double ulk_bessel_j1(double x);

/* ---- power division (docs/spec/carrier.md section 2) ---- */

typedef enum { ULK_CHAN_SINE = 0, ULK_CHAN_BINARY = 1 } ulk_chan_kind;

/* Fractions of one channel of peak phase deviation m_rad: sinusoidal f0 = J0(m)^2,
 * f1 = 2 J1(m)^2 (both first harmonic lines); binary f0 = cos(m)^2, f1 = sin(m)^2.
 * f0 or f1 may be NULL. */
void ulk_chan_fractions(ulk_chan_kind kind, double m_rad, double *f0, double *f1);

#define ULK_SPLIT_MAX 8
/* One phase term of the composite: its kind and index. */
typedef struct {
    ulk_chan_kind kind;
    double m_rad;
} ulk_chan_term;

/* Power division among n terms (n <= ULK_SPLIT_MAX):
 *   carrier  = prod_k f0(m_k)                (P_c / P_T)
 *   useful_k = f1(m_k) * prod_{i!=k} f0(m_i) (P_k / P_T)
 *   intermod = 1 - carrier - sum_k useful_k
 * Returns 0, or ULK_EINVAL when terms or out is NULL (with n > 0) or n is out of range. */
typedef struct {
    double carrier;
    double useful[ULK_SPLIT_MAX];
    double intermod;
} ulk_power_split;
int ulk_power_split_compute(const ulk_chan_term *terms, int n, ulk_power_split *out);

/* ---- ranging code: maximal-length sequence ---- */

#define ULK_MLS_MAX_DEGREE 24

/* Generates the binary sequence of the feedback polynomial with the n_exp exponents exps
 * (e.g. {10, 3, 0} for x^10 + x^3 + 1, any order, no repeats): r = the largest exponent,
 * a_0 .. a_{r-1} = 1 and a_{k+r} = XOR of a_{k+e} over the exponents e < r.
 * On success *period is the sequence's period (the number of steps until the register of r
 * values first returns to all ones) and, when bits is not NULL, *bits receives the period's
 * values a_0 .. a_{period-1} (one 0/1 byte each; free with free()).
 * The polynomial is primitive exactly when *period == 2^r - 1.
 * Returns 0; ULK_EINVAL (NULL, no exponents, a negative or repeated exponent, r < 2);
 * ULK_ELIMIT (r > ULK_MLS_MAX_DEGREE); ULK_EPARSE when there is no constant term (exponent
 * 0): the recurrence is then singular and the polynomial cannot be primitive (*period 0);
 * ULK_ENOMEM. */
int ulk_mls_generate(const int *exps, int n_exp, uint64_t *period, uint8_t **bits);
/* Chip value of a sequence value: c = 1 - 2a (a = 0 -> +1, a = 1 -> -1). */
static inline int ulk_mls_chip(uint8_t a) { return 1 - 2 * (int)(a & 1); }

/* ---- the carrier section model ---- */

typedef enum { ULK_CH_DATA = 0, ULK_CH_VOICE = 1, ULK_CH_RANGING = 2, ULK_CH_N = 3 } ulk_channel;
const char *ulk_channel_name(ulk_channel ch); /* "data", "voice", "ranging" */

typedef struct {
    char *name;
    int on[ULK_CH_N];          /* channel present in the mode */
    double m_rad[ULK_CH_N];    /* peak phase deviation of each channel that is on */
    ulk_loc loc;               /* where the mode was written */
} ulk_carrier_mode;

typedef struct {
    /* data: the link profile's signal divided by A + A_p (absent when no link was given) */
    int has_data;
    ulk_profile profile;
    ulk_waveform data_wave;    /* sine: sinusoidal channel; square: binary */
    ulk_ratio data_fsc_hz;     /* f_sc */
    ulk_ratio data_rb;         /* R_b, information bit rate used for E_b/N_0 */
    ulk_ratio data_symbol_rate;/* R_s (sub-bit or channel bit rate): main lobe half-width */
    double data_amp;           /* A */
    int has_pilot;
    ulk_ratio pilot_hz;        /* f_p */
    double pilot_amp;          /* A_p */
    int has_data_need;
    double data_ebn0_req_db;   /* required E_b/N_0 */

    /* voice: FM subcarrier */
    int has_voice;
    ulk_ratio voice_fv_hz;     /* f_v */
    ulk_ratio voice_dev_hz;    /* Delta, peak deviation */
    ulk_ratio voice_tone_hz;   /* f_a of the test tone; with audio, the audio bandwidth
                                * (audio_bandwidth_hz, default 3400 Hz) that Carson's rule,
                                * the rate rule and the voice demodulator use */
    char *voice_audio;         /* audio file (relative paths resolved against the dictionary's
                                * folder), NULL: the test tone. Owned by the carrier. */
    int voice_audio_channel;   /* channel (0-based) of a multi-channel audio file; -1: refuse
                                * multi-channel files */
    int has_voice_need;
    double voice_pn0_req_dbhz;

    /* ranging */
    int has_ranging;
    ulk_ratio chip_rate;       /* chips/s */
    int poly_exps[ULK_MLS_MAX_DEGREE + 1];
    int n_poly_exps;
    int degree;                /* r */
    uint64_t period;           /* N = 2^r - 1 (checked) */
    int has_ranging_need;
    double ranging_pn0_req_dbhz;

    /* carrier loop */
    int has_loop;
    double loop_bw_hz;         /* B_L */
    double loop_snr_req_db;

    /* budget */
    int has_pt_n0;
    double pt_n0_dbhz;         /* P_T / N_0 */

    ulk_ratio offset_hz;       /* f_o (may be negative; 0 when absent) */

    double bound_lo[ULK_CH_N], bound_hi[ULK_CH_N]; /* solver bounds, rad */

    ulk_carrier_mode *modes;
    int n_modes;

    char *file;                /* where it was loaded from (NULL when built in code) */
} ulk_carrier;

/* Loads a carrier section from a YAML or JSON file (".json" => JSON). The file is either a
 * whole dictionary with a `carrier:` key (its link, checked by the dictionary loader, gives
 * the data channel) or a standalone file whose only top-level key is `carrier:`; in the
 * latter, `carrier.dictionary: FILE` (relative to the file's folder) names the dictionary
 * whose link gives the data channel. Keys and rules: docs/carrier.md.
 * Returns 0 with *out (free with ulk_carrier_destroy); ULK_EIO (unreadable), ULK_EPARSE
 * (any error; every finding in diag with file:line:col and tree path), ULK_ENOMEM,
 * ULK_EINVAL (NULL argument). Warnings (overlapping main lobes) do not fail the load. */
int ulk_carrier_load(const char *path, ulk_carrier **out, ulk_diag *diag);
/* Frees c; NULL does nothing. */
void ulk_carrier_destroy(ulk_carrier *c);
struct ulk_dict;
/* The `carrier` section of a whole dictionary, loaded and checked with it by ulk_dict_load()
 * (its data channel is the dictionary's link). Owned by the dictionary (valid until
 * ulk_dict_destroy); NULL when the dictionary has no such section or d is NULL. */
const ulk_carrier *ulk_dict_carrier(const struct ulk_dict *d);
/* Index of the mode called name, -1 when absent (or c/name NULL). */
int ulk_carrier_find_mode(const ulk_carrier *c, const char *name);

/* ---- the planner ---- */

/* Lines of a plan: the residual carrier, the useful power of data, voice and ranging, the
 * pilot (when the link has one and data is on), intermodulation. */
typedef struct {
    double carrier;                /* P_c / P_T */
    double useful[ULK_CH_N];       /* P_k / P_T, 0 for a channel that is off */
    double pilot;                  /* P_pilot / P_T (0 without pilot) */
    double intermod;               /* 1 - everything above */
    /* margins in dB (available minus required), valid when has_margin[] is set */
    int has_loop_margin;
    double loop_snr_db, loop_margin_db;
    int has_margin[ULK_CH_N];
    double avail[ULK_CH_N];        /* data: E_b/N_0 dB; voice/ranging: P/N_0 dB-Hz */
    double margin_db[ULK_CH_N];
    int n_margins;
    double min_margin_db;          /* smallest margin (-HUGE_VAL when a channel gets no power) */
} ulk_carrier_plan;

/* Plans indices m_rad[] (used for the channels that are on in mode) with total P_T/N_0
 * pt_n0_dbhz (NaN: no margins). Returns 0, ULK_EINVAL (NULL argument, a channel on in the
 * mode that the carrier does not define). */
int ulk_carrier_plan_indices(const ulk_carrier *c, const ulk_carrier_mode *mode, const double *m_rad,
                             double pt_n0_dbhz, ulk_carrier_plan *out);

/* Finds, on the 0.01 rad lattice within each channel's bounds, the indices of the channels
 * on in mode that maximise the smallest margin (exhaustive search over the lattice with the
 * per-channel fractions tabulated, so it is deterministic and exact to the lattice; ties go
 * to the first point in lexicographic order data, voice, ranging). m_rad_out gets the
 * indices (channels that are off keep 0). Returns 0; ULK_EINVAL (NULL, NaN budget, no need
 * defined for the mode so there is nothing to maximise); ULK_ELIMIT (more than 4e7 lattice
 * points); ULK_ENOMEM. */
int ulk_carrier_solve(const ulk_carrier *c, const ulk_carrier_mode *mode, double pt_n0_dbhz,
                      double *m_rad_out, ulk_carrier_plan *plan_out);

/* ---- the complex-baseband generator ---- */

/* Data source: writes up to n samples of the data channel's signal in [-1, 1] (the
 * modulator's s_i divided by A + A_p, or any test signal) into out and returns how many
 * (0: the data has ended, the generator stops; negative: an error, passed on). */
typedef long (*ulk_cgen_data_fn)(void *user, float *out, size_t n);

typedef struct {
    const ulk_carrier *carrier;    /* must outlive the generator */
    const ulk_carrier_mode *mode;  /* indices and channels; must outlive the generator */
    ulk_ratio fs;                  /* sample rate, Hz, exact */
    ulk_cgen_data_fn data_fn;      /* required when data is on in the mode */
    void *data_user;
    uint64_t n_samples;            /* stop after this many samples (0: when the data ends,
                                    * or never when data is off) */
} ulk_cgen_config;

typedef struct ulk_cgen ulk_cgen;

/* Creates a generator. With voice on and carrier->voice_audio set, the voice audio comes
 * from that file (ulk_vaudio_create, opened here: its errors -- ULK_EIO, ULK_EFORMAT,
 * ULK_EINVAL for a silent file or a channel choice -- pass on with the file named in diag).
 * Returns 0 and *out; ULK_EINVAL (NULL, rate not > 0, data on without
 * data_fn, a channel on that the carrier does not define); ULK_ELIMIT (rates whose exact
 * ratios do not fit 62-bit integers, ranging degree above the limit); ULK_ENOMEM. Reason in
 * diag (may be NULL). Free with ulk_cgen_destroy(). */
int ulk_cgen_create(const ulk_cgen_config *cfg, ulk_cgen **out, ulk_diag *diag);
/* Writes up to max complex samples as interleaved I, Q floats (2*max floats) into iq, in
 * order from sample 0. Returns the count written, 0 at the end, or a negative status
 * (ULK_EINVAL for NULL arguments, or the data source's error). */
long ulk_cgen_run(ulk_cgen *g, float *iq, size_t max);
/* Frees g; NULL does nothing. */
void ulk_cgen_destroy(ulk_cgen *g);

/* Voice test-tone phase at t: 2 pi frac(f_v t) + (Delta/f_a)(1 - cos(2 pi frac(f_a t))),
 * with f_v t and f_a t taken exactly for t = i / fs (i the sample index). Returns 0 or
 * ULK_ELIMIT (ratios too fine). For tests and the generator. */
int ulk_voice_tone_phase(ulk_ratio fv, ulk_ratio dev, ulk_ratio fa, ulk_ratio fs, uint64_t i,
                         double *phase_rad);

/* ---- voice audio from a sound file ----
 * The voice phase term 2 pi Delta integral_0^t a(u) du for audio read from a file (WAV, or
 * anything libsndfile reads), streamed in chunks so memory stays flat whatever its length:
 *  - a(t) is the file's samples divided by their largest magnitude (two passes over the
 *    file: the first finds the peak), so its peak is 1; a silent file is refused;
 *  - resampled to the output rate by linear interpolation between the two input samples
 *    around t = i / fs, the position i * f_in / fs taken exactly (integer count and
 *    remainder on the sample index; f_in is whole for sound files, fs any exact rate). No
 *    anti-alias filter: the output rate is normally far above the audio's;
 *  - after the last sample the audio is silent (a = 0; the interpolation runs from the last
 *    sample to 0 over one input period), so the phase term holds its final value;
 *  - integrated by the trapezoidal rule on the output samples: I_0 = 0,
 *    I_i = I_{i-1} + (a_{i-1} + a_i) / (2 fs). */
typedef struct ulk_vaudio ulk_vaudio;
/* Opens path (channel: which channel of a multi-channel file, -1 refuses them) for output
 * rate fs and peak deviation dev_hz. Reads the file once for its peak. Returns 0 and *out;
 * ULK_EIO / ULK_EFORMAT (cannot open or read; not a sound file), ULK_EINVAL (NULL, rate not
 * > 0, channel choice, a silent file, a rate that is not a whole number of Hz), ULK_ELIMIT
 * (rates too fine for exact arithmetic), ULK_ENOMEM; the reason names the file in diag. Free
 * with ulk_vaudio_destroy. */
int ulk_vaudio_create(const char *path, int channel, ulk_ratio fs, double dev_hz, ulk_vaudio **out,
                      ulk_diag *diag);
/* Writes the next n values of Delta * I_i in cycles, reduced to [0, 1) (the phase term is
 * 2 pi times it), in order from output sample 0. Returns n, or a negative status (ULK_EINVAL
 * for NULL, the reader's ULK_EIO / ULK_EFORMAT; sticky). Never ends: silence follows the file. */
long ulk_vaudio_run(ulk_vaudio *v, double *cycles, size_t n);
/* The file's largest sample magnitude before normalisation, its rate (Hz) and frames. */
double ulk_vaudio_peak(const ulk_vaudio *v);
double ulk_vaudio_rate(const ulk_vaudio *v);
uint64_t ulk_vaudio_frames(const ulk_vaudio *v);
/* The reason of the last failed ulk_vaudio_run ("" when none; never NULL for non-NULL v). */
const char *ulk_vaudio_error(const ulk_vaudio *v);
/* Frees v; NULL does nothing. */
void ulk_vaudio_destroy(ulk_vaudio *v);

/* ---- ranging correlation (docs/spec/carrier.md section 3) ----
 * The received chip index of a capture delayed by D chips is floor(t * chip_rate - D) mod N.
 * The correlator folds the complex capture onto one code period -- sample i adds to bin
 * floor(K * ((i * chip_rate / fs) mod N)), K = ULK_RCORR_BINS_PER_CHIP, taken exactly on the
 * sample index -- after removing the section's carrier offset f_o, and at the end correlates
 * the folded period circularly with the code (one complex FFT of N*K points). |correlation|
 * is used, so the carrier phase need not be known; the fold is coherent, so a carrier
 * frequency error e beyond f_o must keep e * capture length well below 1 (ulk decode feeds
 * it the carrier loop's de-rotated samples, ulk_crec_track, with f_o set to 0). Memory: N * K complex bins, whatever the capture's length. */

#define ULK_RCORR_BINS_PER_CHIP 16

typedef struct {
    double phase_chips;   /* D in [0, N), refined by a parabola through the peak's neighbours */
    double delay_s;       /* D / chip_rate */
    double peak_to_mean;  /* |peak| over the mean |correlation| of all lags: ~1 without a code */
    uint64_t n_samples;   /* samples folded */
    double n_periods;     /* code periods they span */
} ulk_ranging_result;

typedef struct ulk_rcorr ulk_rcorr;

/* Creates a correlator for c's ranging code at exact rate fs. Returns 0 and *out;
 * ULK_EINVAL (NULL, rate not > 0, no ranging channel); ULK_ELIMIT (rates too fine for exact
 * arithmetic); ULK_EFORMAT (built without FFTW3); ULK_ENOMEM. Reason in diag. */
int ulk_rcorr_create(const ulk_carrier *c, ulk_ratio fs, ulk_rcorr **out, ulk_diag *diag);
/* Folds n complex samples (interleaved I, Q), in order from sample 0. Returns 0 or ULK_EINVAL. */
int ulk_rcorr_feed(ulk_rcorr *r, const float *iq, size_t n);
/* Correlates what was folded. Returns 0 with *out; ULK_EINVAL (NULL); ULK_ELIMIT (less than one
 * code period folded: the phase would be ambiguous); ULK_ENOMEM. */
int ulk_rcorr_result(ulk_rcorr *r, ulk_ranging_result *out);
/* Frees r; NULL does nothing. */
void ulk_rcorr_destroy(ulk_rcorr *r);

/* ---- carrier recovery (docs/spec/carrier.md section 3) ----
 * Finds the residual carrier of a complex capture and tracks it, so that the phase of the
 * de-rotated signal is the composite phase phi(t) = sum_k m_k c_k(t).
 *
 * Coarse: one Hann-windowed FFT of the first block (ulk_crec_acquire; a power of two of at
 * least 0.5 s, or the whole capture when shorter), the strongest bin within +-max_offset_hz,
 * refined by a parabola through the log magnitudes of its neighbours: the error is a few
 * hundredths of a bin (bin 1 / block length, <= 2 Hz). The residual carrier is the line of
 * amplitude prod J0(m_k) prod cos(m_k); a mode whose line is near zero (a sinusoidal index
 * near 2.405, a binary one near pi/2) has nothing to acquire -- the caller checks the plan.
 * Tracking: a second-order phase-locked loop (proportional-integral loop filter, perfect
 * integrator NCO) whose phase detector is atan2 of the de-rotated sample: its mean is the
 * phase error whatever the indices (unit gain, so the loop bandwidth is what is asked as long
 * as sum m_k < pi, where atan2 returns phi(t) without wrapping). Gains from the one-sided
 * noise bandwidth B_L and damping zeta (Gardner, Phaselock Techniques; from memory):
 * w_n = 8 zeta B_L / (4 zeta^2 + 1), K_p = 2 zeta w_n T, K_i = (w_n T)^2, T = 1 / f_s.
 * With the default B_L = 20 Hz and zeta = 0.707 the loop pulls in a frequency error of about
 * +-8 Hz (2 zeta w_n), far beyond the coarse step's error. The channels are outside the loop
 * bandwidth (subcarriers at kHz; the ranging code's power within B_L is ~B_L / chip_rate of it).
 *
 * Over the whole capture: the first block's line is held only when it stands out as the
 * search below requires (peak bin over the mean bin above ln(n_bins / 1e-7)). Otherwise -- a
 * capture that starts with noise or silence -- ulk_crec_track searches as it goes, on sums of
 * dec = floor(fs / (4 max_offset)) samples: a short window (>= search_s, default 0.02 s),
 * unwindowed and zero-padded, every eighth of it, and a Hann window 8 times longer every
 * quarter; on a hit the loop takes the line's frequency and its phase at the next sample, and
 * a frequency assist corrects it over the next 0.06 s. While searching, the outputs are 0.
 * While holding, the line's share of each long window of de-rotated samples is watched; three
 * windows without it (the transmission ended) and the search starts again, so each of several
 * transmissions separated by gaps is acquired. Memory: one long window. (docs/carrier.md)
 */
typedef struct {
    double fs_hz;          /* sample rate, > 0 */
    double max_offset_hz;  /* coarse search range +-; 0 = 5000; at most 0.45 fs */
    double loop_bw_hz;     /* B_L; 0 = 20 */
    double damping;        /* zeta; 0 = 0.7071 */
    double search_s;       /* short search window, s (rounded up to a power of two of
                              summed samples); 0 = 0.02 */
    int delayed;           /* 1: run with ulk_crec_push / ulk_crec_drain, outputs delayed by
                              one short window so that a transmission's first samples are
                              de-rotated too (the line is found within that window); 0:
                              ulk_crec_track, outputs as the samples come */
} ulk_crec_config;

typedef struct {
    double coarse_hz;      /* carrier offset from the coarse FFT */
    double line_db;        /* the line's bin over the mean bin within the search range, dB */
    double freq_hz;        /* the loop's frequency now */
    double mean_freq_hz;   /* the loop's frequency averaged over the tracked samples */
    double phase_rms_rad;  /* rms of the phase detector output (phi(t) plus noise) */
    uint64_t n_tracked;    /* samples tracked with a carrier held */
    int n_acquired;        /* carriers acquired: the first block's, then each sliding-search hit */
    int holding;           /* 1 while a carrier is held, 0 while searching */
    int at_limit;          /* the last line found sat at the end of the +-max_offset range */
    double acquired_s;     /* sample time of the last acquisition, s from the first sample */
} ulk_crec_status;

typedef struct ulk_crec ulk_crec;

/* Creates a carrier-recovery object. Returns 0 and *out; ULK_EINVAL (NULL, rate not > 0, a
 * range beyond 0.45 fs, bandwidth or damping not > 0 or a bandwidth beyond fs / 20);
 * ULK_ENOMEM. Reason in diag. Free with ulk_crec_destroy. */
int ulk_crec_create(const ulk_crec_config *cfg, ulk_crec **out, ulk_diag *diag);
/* Coarse acquisition on n complex samples (interleaved I, Q; uses at most the first
 * ulk_crec_block(r) of them, at least 64): sets the loop's frequency to the line found and
 * its phase to the line's at the first of the n samples (measured over them, Hann-weighted).
 * Returns 0; ULK_EINVAL (NULL, n < 64); ULK_EFORMAT (built without FFTW3); ULK_ENOMEM. */
int ulk_crec_acquire(ulk_crec *r, const float *iq, size_t n);
/* Samples the coarse step wants: the power of two >= 0.5 s, at most 2^20. */
size_t ulk_crec_block(const ulk_crec *r);
/* Tracks n complex samples in order. Each output may be NULL: derot gets the de-rotated
 * samples x exp(-j theta) (2n floats), phi the composite phase atan2(Q, I) of them (n
 * floats, in (-pi, pi]); both 0 while no carrier is held (sliding search, above). Returns 0
 * or ULK_EINVAL (NULL r, or iq NULL with n > 0). */
int ulk_crec_track(ulk_crec *r, const float *iq, size_t n, float *derot, float *phi);
/* Delayed running (config.delayed = 1; ulk_crec_track then returns ULK_EINVAL): pushes n
 * complex samples and writes the outputs of earlier samples, in order from sample 0, into
 * derot (2 floats each) and phi (1 each; either may be NULL; room for n): returns how many
 * (n once ulk_crec_delay(r) samples have been pushed, fewer before), or ULK_EINVAL. The
 * search looks ahead by the delay, so on a hit the loop starts that many samples back, with
 * the line's phase extrapolated back, and the transmission's start is de-rotated too. */
long ulk_crec_push(ulk_crec *r, const float *iq, size_t n, float *derot, float *phi);
/* At the end: writes the outputs still held (at most ulk_crec_delay(r)) and returns how many;
 * once. ULK_EINVAL when not delayed or drained already. */
long ulk_crec_drain(ulk_crec *r, float *derot, float *phi);
/* The output delay in samples (0 unless delayed). */
size_t ulk_crec_delay(const ulk_crec *r);
/* Status so far; r and st must not be NULL. */
void ulk_crec_get_status(const ulk_crec *r, ulk_crec_status *st);
/* Frees r; NULL does nothing. */
void ulk_crec_destroy(ulk_crec *r);

/* ---- voice demodulation ----
 * From the composite phase phi(t) (ulk_crec_track): mix the voice subcarrier f_v to 0 Hz,
 * low-pass it to Carson's half-bandwidth Delta + f_a (Blackman-windowed sinc; f_a the tone,
 * at least 3400 Hz so that speech passes), FM discriminator arg(z_n conj z_{n-1}) f_s / (2 pi)
 * divided by Delta (audio of peak 1 for a full deviation), low-pass to 0.45 of the output
 * rate and keep every D-th sample: the output rate f_s / D is the lowest whole rate
 * >= 16 kHz that divides f_s (f_s itself when no such divisor exists). */
typedef struct ulk_vdemod ulk_vdemod;
/* Returns 0 and *out; ULK_EINVAL (NULL, rates not > 0, f_v + Delta + f_a not below f_s / 2,
 * f_s not a whole number of Hz); ULK_ENOMEM. Reason in diag. */
int ulk_vdemod_create(double fs_hz, double fv_hz, double dev_hz, double tone_hz, ulk_vdemod **out,
                      ulk_diag *diag);
/* Output sample rate, Hz (whole). */
int ulk_vdemod_rate(const ulk_vdemod *v);
/* Feeds n phase samples; writes at most n / D + 1 audio samples to audio and returns their
 * count (>= 0), or ULK_EINVAL. */
long ulk_vdemod_push(ulk_vdemod *v, const float *phi, size_t n, float *audio);
/* Frees v; NULL does nothing. */
void ulk_vdemod_destroy(ulk_vdemod *v);

/* ---- plot ---- */

/* Draws two panels to path (SVG or PNG by its extension ".svg"/".png"): the modelled line
 * powers of every mode in dB (carrier, data, voice, ranging, pilot, intermodulation), and the
 * margins (or, when pt_n0_dbhz is NaN, the line powers) of mode number mode_index as the
 * index of channel sweep_ch (-1: the mode's first channel) runs over its bounds, the other
 * indices as written. Written atomically. Returns 0; ULK_EINVAL (NULL, bad index, a channel
 * not on in the mode, an extension other than .svg/.png); ULK_EFORMAT (built without
 * cairo); ULK_EIO; ULK_ENOMEM. Reason in diag. */
int ulk_carrier_plot(const ulk_carrier *c, int mode_index, int sweep_ch, double pt_n0_dbhz, const char *path,
                     ulk_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
