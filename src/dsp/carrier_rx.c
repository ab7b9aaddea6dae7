/* src/carrier_rx.c - the receiving side of the composite carrier: carrier recovery (coarse FFT
 * of the residual carrier line, then a second-order phase-locked loop) and the voice FM
 * demodulator (include/ulk/carrier.h; docs/spec/carrier.md section 3).
 *
 * Why atan2 as the phase detector: the residual carrier's amplitude is prod J0 prod cos of the
 * indices, so the usual Im(x e^-j theta) detector has a gain that changes with the mode (and
 * the loop bandwidth with it). atan2 of the de-rotated sample is phi(t) + theta_e with phi(t)
 * of mean ~0, so its mean is theta_e with unit gain in every mode, and the same number is the
 * composite phase the decoders want. It holds while sum m_k < pi (no wrap of phi). */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#ifdef ULK_HAVE_FFTW
#include <fftw3.h>
#endif

#include "ulk/carrier.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define CREC_B 32 /* samples per loop update (see crec_block) */
typedef float crec_v4 __attribute__((vector_size(16)));

struct ulk_crec {
    double fs;
    double max_off;
    double kp, ki;        /* loop gains per sample */
    double theta;         /* NCO phase, rad, kept in [-pi, pi) */
    double omega;         /* NCO frequency, rad/sample */
    double coarse_hz, line_db;
    double sum_omega, sum_e2;
    uint64_t n;
    size_t block;
    /* Sliding search (see ulk_crec_track): while no carrier is held, every hop the last ns
     * samples are searched for the line; while one is held, its strength is watched. */
    int state;            /* CREC_FRESH, CREC_LOCKED, CREC_SEARCHING */
    size_t ns, nl;        /* short and long search windows, decimated samples (nl = 8 ns) */
    int dec;              /* decimation of the search: sums of dec samples, rate fs / dec */
    int dcnt;
    double dre, dim;      /* the sum being formed */
    float *ring;          /* the last nl decimated samples, interleaved */
    size_t rpos, rfill, since_s, since_l;
    uint64_t n_in;        /* samples given to track */
    double det_ratio;     /* detection threshold: peak bin over the mean bin */
    double mon_re, mon_im, mon_p;
    size_t mon_n;
    int weak;             /* consecutive monitor windows without the line */
    int n_acq, at_limit;
    int assist;           /* short windows left for the frequency assist after an acquisition */
    size_t assist_wait;
    size_t pending;       /* delayed: decimated samples until a line seen is measured */   /* delayed: output samples before the assist starts (the search's
                             look-ahead: before it the output may be noise only) */
    float rc[CREC_B], rs[CREC_B]; /* exp(j n om_tab), n < CREC_B (crec_tabulate) */
    size_t bm;            /* samples in the open block of the loop (crec_block), 0: none open */
    double b_th, b_om;    /* the block's phase and frequency at its start */
    double b_se, b_sme;   /* its sums of e and m e */
    float b_c0, b_s0;     /* cos, sin of b_th */
    double om_tab;
    int have_tab;
    double az_r, az_i, pz_r, pz_i;
    size_t az_n;
    double ref_th, ref_om;  /* the assist's reference: the acquisition's phase (at the next output
                               sample) and frequency, held fixed while the loop moves */
    double b_ref;           /* ref_th at the open block's start */
    double b_yr, b_yi;      /* the open block's sum of y */
    double au;              /* the assist's phase advances summed (unwrapped), rad */
    int aq;                 /* how many */
    uint64_t acq_sample;
    size_t delay;         /* output delay of ulk_crec_push, samples (0: ulk_crec_track) */
    float *wk;            /* work buffer, interleaved: the last `delay` inputs, then up to
                             CREC_PIECE new ones (finite: a NaN or infinity is taken as 0) */
    int drained;
    void *fbuf, *plan_s, *plan_l; /* FFTW buffer (nl); plans: short window zero-padded to 2 ns, long */
    double *mag;
    double *hann;         /* the long window's Hann taps (nl): not recomputed every hop */
};

enum { CREC_FRESH = 0, CREC_LOCKED = 1, CREC_SEARCHING = 2 };

/* The loop is updated once every CREC_B samples: over a block the NCO runs open loop at its
 * frequency (rotation by recursion from one sincos of the block's phase and one of its step),
 * the de-rotation and phase detector of the block's samples are independent of each other (so
 * the compiler vectorises them), and the block's errors then move the loop exactly as the
 * per-sample loop would have, only up to CREC_B samples later: with PI gains K_p, K_i,
 *   omega_B = omega_0 + K_i sum e_n,  theta_B = theta_0 + B omega_0 + K_p sum e_n + K_i sum (B - n) e_n.
 * The feedback delay (32 samples: 0.67 ms at 48 kHz) is far below the loop's time constant
 * (1 / w_n = 27 ms at B_L = 20 Hz), so the loop's dynamics are unchanged. The phase detector
 * is a polynomial arctangent (Abramowitz and Stegun 4.4.49, |error| <= 1e-5 rad on [0, 1],
 * checked against numpy: 1.15e-5) in single precision without branches, far below the phase
 * noise of any usable capture; the library's atan2 per sample cost most of the loop's time. */
/* input samples per piece of ulk_crec_push / ulk_crec_track (the work buffer) */
#define CREC_PIECE 4096

/* De-rotation and phase detector of n samples: y = o p* (p the NCO's phasor), e = arg y by
 * the polynomial arctangent, without branches. gcc if-converts the selections (and so
 * vectorises the loop) only without trapping math; no floating-point exception is ever
 * looked at here, and the results are the same. */
#if defined(__GNUC__) && !defined(__clang__)
__attribute__((optimize("no-trapping-math")))
#endif
static void crec_derotate(const float *o, const float *pc, const float *ps, float *y, float *e, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        float xr = o[2 * i], xi = o[2 * i + 1];
        float yr = xr * pc[i] + xi * ps[i], yi = xi * pc[i] - xr * ps[i]; /* x exp(-j theta) */
        y[2 * i] = yr;
        y[2 * i + 1] = yi;
        float ax = fabsf(yr), ay = fabsf(yi);
        int swap = ay > ax;
        float mx = swap ? ay : ax, mn = swap ? ax : ay;
        float z = mn / (mx > 0 ? mx : 1.0f), z2 = z * z; /* 0 when both are 0 */
        float t = z * (0.9998660f + z2 * (-0.3302995f + z2 * (0.1801410f + z2 * (-0.0851330f + z2 * 0.0208351f))));
        float u = 1.57079632679489662f - t;
        t = swap ? u : t;
        u = 3.14159265358979324f - t;
        t = yr < 0 ? u : t;
        e[i] = yi < 0 ? -t : t;
    }
}

/* Monitor: the line's share of the de-rotated window, R = |sum y|^2 / sum |y|^2, is about
 * exponential with mean 1 on noise alone and about P_c/N_0 times the window length on a held
 * carrier (above 60 for 29 dB-Hz in 0.08 s). Below 8 (noise: probability e^-8 = 3e-4) three
 * windows in a row, the carrier is taken as gone and the search starts again. */
#define CREC_MON_R 8.0
#define CREC_MON_N 3
/* Detection: the largest of n_bins noise bins over their mean exceeds t with probability
 * about n_bins exp(-t) (bins about exponential and independent; common practice). */
#define CREC_PFA 1e-7

void ulk_crec_destroy(ulk_crec *r)
{
    if (!r) return;
#ifdef ULK_HAVE_FFTW
    if (r->plan_s) fftwf_destroy_plan((fftwf_plan)r->plan_s);
    if (r->plan_l) fftwf_destroy_plan((fftwf_plan)r->plan_l);
    fftwf_free(r->fbuf);
#endif
    ulk_free(r->ring);
    ulk_free(r->mag);
    ulk_free(r->wk);
    ulk_free(r->hann);
    ulk_free(r);
}

int ulk_crec_create(const ulk_crec_config *cfg, ulk_crec **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!cfg || !out || !(cfg->fs_hz > 0) || !isfinite(cfg->fs_hz))
        return ulk_fail(diag, ULK_EINVAL, "carrier recovery: missing configuration or sample rate");
    double fs = cfg->fs_hz;
    double mo = cfg->max_offset_hz > 0 ? cfg->max_offset_hz : 5000.0;
    double bl = cfg->loop_bw_hz > 0 ? cfg->loop_bw_hz : 20.0;
    double z = cfg->damping > 0 ? cfg->damping : 0.70710678118654752;
    if (cfg->max_offset_hz < 0 || !(mo <= 0.45 * fs))
        return ulk_fail(diag, ULK_EINVAL,
                        "carrier recovery: offset range +-%g Hz is beyond 0.45 of the sample rate (%g Hz)", mo, fs);
    if (cfg->loop_bw_hz < 0 || cfg->damping < 0 || !(bl <= fs / 20) || !isfinite(z))
        return ulk_fail(diag, ULK_EINVAL,
                        "carrier recovery: loop bandwidth %g Hz must be > 0 and at most f_s / 20 (%g Hz), damping > 0",
                        bl, fs / 20);
    ulk_crec *r = ulk_calloc(1, sizeof *r);
    if (!r) return ulk_fail(diag, ULK_ENOMEM, "carrier recovery: out of memory");
    r->fs = fs;
    r->max_off = mo;
    double wn = 8 * z * bl / (4 * z * z + 1); /* rad/s */
    double wt = wn / fs;
    r->kp = 2 * z * wt;
    r->ki = wt * wt;
    size_t b = 64;
    while ((double)b < 0.5 * fs && b < ((size_t)1 << 20)) b <<= 1; /* 1 M samples at most (8 MB) */
    r->block = b;
    /* The search looks at +-max_off only: sums of dec samples (a boxcar, -0.8 dB at most at
     * the range's end, fs / dec >= 4 max_off) cut its cost by dec without losing the line. */
    r->dec = (int)floor(fs / (4 * mo));
    if (r->dec < 1) r->dec = 1;
    double fd = fs / r->dec;
    double ws = cfg->search_s > 0 ? cfg->search_s : 0.02;
    size_t w = 64;
    while ((double)w < ws * fd && w < ((size_t)1 << 16)) w <<= 1;
    r->ns = w;
    r->nl = 8 * w;
    if (cfg->delayed) {
        /* one short window: a line is found within it of the transmission's start; nothing is
         * held before the search finds one */
        r->state = CREC_SEARCHING;
        r->delay = w * (size_t)r->dec;
    }
    r->wk = ulk_calloc(2 * (r->delay + CREC_PIECE), sizeof *r->wk);
    if (!r->wk) {
        ulk_crec_destroy(r);
        return ulk_fail(diag, ULK_ENOMEM, "carrier recovery: out of memory");
    }
    r->ring = ulk_calloc(2 * r->nl, sizeof *r->ring);
    r->mag = ulk_malloc(r->nl * sizeof *r->mag);
    r->hann = ulk_malloc(r->nl * sizeof *r->hann);
    if (r->hann)
        for (size_t i = 0; i < r->nl; i++) r->hann[i] = 0.5 - 0.5 * cos(2 * M_PI * (double)i / (double)r->nl);
    if (!r->ring || !r->mag || !r->hann) {
        ulk_crec_destroy(r);
        return ulk_fail(diag, ULK_ENOMEM, "carrier recovery: out of memory");
    }
#ifdef ULK_HAVE_FFTW
    r->fbuf = fftwf_malloc(r->nl * sizeof(fftwf_complex));
    r->plan_s = r->fbuf ? (void *)fftwf_plan_dft_1d((int)(2 * r->ns), r->fbuf, r->fbuf, FFTW_FORWARD, FFTW_ESTIMATE) : NULL;
    r->plan_l = r->fbuf ? (void *)fftwf_plan_dft_1d((int)r->nl, r->fbuf, r->fbuf, FFTW_FORWARD, FFTW_ESTIMATE) : NULL;
    if (!r->plan_s || !r->plan_l) {
        ulk_crec_destroy(r);
        return ulk_fail(diag, ULK_ENOMEM, "carrier recovery: out of memory");
    }
#endif
    *out = r;
    return 0;
}

#ifdef ULK_HAVE_FFTW
/* Strongest bin within +-max_off of the spectrum in buf (nf bins): its signed index, the
 * parabola's fraction, the peak over the mean bin, and whether it sits at the range's end. */
static void peak_search(const ulk_crec *r, double rate, const fftwf_complex *buf, size_t nf, double *mag,
                        long *best_out, double *frac_out, double *ratio_out, int *edge)
{
    double bin = rate / (double)nf;
    long kmax = (long)ceil(r->max_off / bin);
    if (kmax > (long)nf / 2 - 2) kmax = (long)nf / 2 - 2;
    long best = 0;
    double bestv = -1, sum = 0;
    for (long k = -kmax - 1; k <= kmax + 1; k++) {
        size_t i = (size_t)(k < 0 ? k + (long)nf : k);
        double v = (double)buf[i][0] * buf[i][0] + (double)buf[i][1] * buf[i][1];
        mag[i] = v;
        if (k < -kmax || k > kmax) continue;
        sum += v;
        if (v > bestv) { bestv = v; best = k; }
    }
    double frac = 0;
    {
        size_t im1 = (size_t)(best - 1 < 0 ? best - 1 + (long)nf : best - 1);
        size_t ip1 = (size_t)(best + 1 < 0 ? best + 1 + (long)nf : best + 1);
        double a = log(mag[im1] + 1e-300), b = log(bestv + 1e-300), c = log(mag[ip1] + 1e-300);
        double den = a - 2 * b + c;
        if (den < 0) frac = 0.5 * (a - c) / den;
        if (frac > 0.5) frac = 0.5;
        if (frac < -0.5) frac = -0.5;
    }
    double mean = sum / (double)(2 * kmax + 1);
    *best_out = best;
    *frac_out = frac;
    *ratio_out = mean > 0 ? bestv / mean : 0;
    *edge = kmax > 0 && labs(best) == kmax;
}
#endif

size_t ulk_crec_block(const ulk_crec *r) { return r ? r->block : 0; }

/* The phase at sample 0 of a line at omega in the n samples iq: the Hann-weighted sum of
 * x_i exp(-j omega (i - c)) has the line's phase at the window's middle c = (n - 1) / 2
 * (unbiased by a small frequency error: the window is symmetric about c), taken back to
 * sample 0. Without it the loop started at phase 0 whatever the carrier's: a carrier near half
 * a cycle put the loop at the detector's unstable point, where it hung until noise pushed it
 * off, and the first word went (192 kHz, phase pi: the word 0.032 s after the start lost). */
static double acquire_phase(const float *iq, size_t n, double omega)
{
    double c = (double)(n - 1) / 2, zr = 0, zi = 0;
    double pr = cos(omega * c), pi = sin(omega * c), sr = cos(omega), si = -sin(omega);
    for (size_t i = 0; i < n; i++) {
        if (i % 4096 == 0) {
            /* exp(-j omega (i - c)) set afresh now and then: no drift of the recursion */
            pr = cos(omega * (c - (double)i));
            pi = sin(omega * (c - (double)i));
        }
        double w = 0.5 - 0.5 * cos(2 * M_PI * (double)i / (double)n);
        double xr = iq[2 * i], xi = iq[2 * i + 1];
        if (!isfinite(xr) || !isfinite(xi)) xr = xi = 0;
        zr += w * (xr * pr - xi * pi);
        zi += w * (xr * pi + xi * pr);
        double t = pr * sr - pi * si;
        pi = pr * si + pi * sr;
        pr = t;
    }
    double th = atan2(zi, zr) - omega * c;
    return th - 2 * M_PI * floor((th + M_PI) / (2 * M_PI));
}

int ulk_crec_acquire(ulk_crec *r, const float *iq, size_t n)
{
    if (!r || !iq || n < 64) return ULK_EINVAL;
#ifndef ULK_HAVE_FFTW
    return ULK_EFORMAT;
#else
    if (n > r->block) n = r->block;
    /* zero-padded to the full block, so the bin is fs / block whatever n is */
    size_t nf = r->block;
    fftwf_complex *buf = fftwf_malloc(nf * sizeof *buf);
    double *mag = ulk_malloc(nf * sizeof *mag);
    fftwf_plan p = buf ? fftwf_plan_dft_1d((int)nf, buf, buf, FFTW_FORWARD, FFTW_ESTIMATE) : NULL;
    if (!buf || !mag || !p) {
        if (p) fftwf_destroy_plan(p);
        fftwf_free(buf);
        ulk_free(mag);
        return ULK_ENOMEM;
    }
    for (size_t i = 0; i < nf; i++) {
        double w = i < n ? 0.5 - 0.5 * cos(2 * M_PI * (double)i / (double)n) : 0; /* Hann */
        float re = i < n ? iq[2 * i] : 0, im = i < n ? iq[2 * i + 1] : 0;
        buf[i][0] = isfinite(re) ? (float)(w * re) : 0;
        buf[i][1] = isfinite(im) ? (float)(w * im) : 0;
    }
    fftwf_execute(p);
    long best;
    double frac, ratio;
    int edge;
    peak_search(r, r->fs, buf, nf, mag, &best, &frac, &ratio, &edge);
    double bin = r->fs / (double)nf;
    long kmax = (long)ceil(r->max_off / bin);
    r->line_db = ratio > 0 ? 10 * log10(ratio) : 0;
    r->coarse_hz = ((double)best + frac) * bin;
    r->omega = 2 * M_PI * r->coarse_hz / r->fs;
    /* Held only when the line stands out of the noise as the sliding search would require;
     * otherwise (a capture that starts with noise or silence) the search runs over the samples
     * as they are tracked, from the first one. */
    double thr = log((double)(2 * kmax + 1) / CREC_PFA);
    if (ratio >= thr) {
        r->theta = acquire_phase(iq, n, r->omega);
        r->state = CREC_LOCKED;
        r->n_acq = 1;
        r->at_limit = edge;
        r->acq_sample = 0;
    } else {
        r->state = CREC_SEARCHING;
    }
    fftwf_destroy_plan(p);
    fftwf_free(buf);
    ulk_free(mag);
    return 0;
#endif
}

/* One search over the last N decimated samples of the ring (N = ns or nl): on a line, the loop
 * takes its frequency and the phase it has at the next input sample. mode 0: only say whether
 * a line is there (1) or not (0); 1: take it; 2: take the strongest bin without the test. */
static int search_window(ulk_crec *r, size_t N, int mode)
{
#ifdef ULK_HAVE_FFTW
    fftwf_complex *buf = r->fbuf;
    const double fd = r->fs / r->dec;
    size_t j0 = (r->rpos + r->nl - N) % r->nl;
    /* The short window is unwindowed and zero-padded to 2 N: a transmission that has just
     * started fills the newest samples, which a taper would weight down (with Hann the line
     * shows when it reaches the window's middle); padding halves the loss between bins. The
     * long window (weak lines, found later anyway) is Hann-tapered. */
    int shortw = N < r->nl;
    size_t nf = shortw ? 2 * N : N;
    for (size_t i = 0; i < nf; i++) {
        size_t j = (j0 + i) % r->nl;
        double w = shortw ? 1.0 : r->hann[i];
        buf[i][0] = i < N ? (float)(w * r->ring[2 * j]) : 0;
        buf[i][1] = i < N ? (float)(w * r->ring[2 * j + 1]) : 0;
    }
    fftwf_execute((fftwf_plan)(shortw ? r->plan_s : r->plan_l));
    long best;
    double frac, ratio;
    int edge;
    peak_search(r, fd, buf, nf, r->mag, &best, &frac, &ratio, &edge);
    double bin = fd / (double)nf;
    long kmax = (long)ceil(r->max_off / bin);
    if (kmax > (long)nf / 2 - 2) kmax = (long)nf / 2 - 2;
    /* padded bins are not independent: counting them all is conservative */
    if (mode != 2 && !(ratio >= log((double)(2 * kmax + 1) / CREC_PFA))) return 0;
    if (mode == 0) return 1;
    r->line_db = 10 * log10(ratio);
    r->at_limit = edge;
    if (shortw) {
        /* finer: the same samples zero-padded to nl (4 times finer again) */
        for (size_t i = 0; i < r->nl; i++) {
            size_t j = (j0 + i) % r->nl;
            buf[i][0] = i < N ? r->ring[2 * j] : 0;
            buf[i][1] = i < N ? r->ring[2 * j + 1] : 0;
        }
        fftwf_execute((fftwf_plan)r->plan_l);
        double rr;
        peak_search(r, fd, buf, r->nl, r->mag, &best, &frac, &rr, &edge);
        bin = fd / (double)r->nl;
    }
    double f = ((double)best + frac) * bin;
    double omd = 2 * M_PI * f / fd; /* rad per decimated sample */
    /* The line's phase at decimated sample N: sum_i w_i z_i exp(-j omd (i - N)) has the phase a
     * line at omd has there, whatever part of the window it fills. A sum of dec samples has
     * the phase of its middle, (dec - 1) / 2 samples after its first; decimated sample N would
     * start at the next input sample. */
    double zr = 0, zi = 0;
    for (size_t i = 0; i < N; i++) {
        size_t j = (j0 + i) % r->nl;
        double w = shortw ? 1.0 : 0.5 - 0.5 * cos(2 * M_PI * (double)i / (double)N), a = -omd * ((double)i - (double)N);
        double c = cos(a), sn = sin(a), xr = r->ring[2 * j], xi = r->ring[2 * j + 1];
        zr += w * (xr * c - xi * sn);
        zi += w * (xr * sn + xi * c);
    }
    double om = 2 * M_PI * f / r->fs;
    double th = atan2(zi, zr) - om * (double)(r->dec - 1) / 2.0;
    r->theta = th - 2 * M_PI * floor((th + M_PI) / (2 * M_PI));
    r->omega = om;
    r->coarse_hz = f;
    r->state = CREC_LOCKED;
    r->n_acq++;
    r->weak = 0;
    r->mon_re = r->mon_im = r->mon_p = 0;
    r->mon_n = 0;
    r->assist = 12;
    r->az_r = r->az_i = r->pz_r = r->pz_i = 0;
    r->az_n = 0;
    r->au = 0;
    r->aq = 0;
    return 1;
#else
    (void)r;
    (void)N;
    (void)mode;
    return 0;
#endif
}

/* The search side of one input sample (re, im): summed into the search's ring while no
 * carrier is held, searched every hop; on a line the loop takes it (theta then is the phase of
 * the sample being output now: with a delay, the one `delay` samples older). */
static void crec_search_in(ulk_crec *r, double re, double im)
{
    r->n_in++;
    if (r->state != CREC_SEARCHING) return;
    r->dre += re;
    r->dim += im;
    if (++r->dcnt < r->dec) return;
    r->ring[2 * r->rpos] = (float)r->dre;
    r->ring[2 * r->rpos + 1] = (float)r->dim;
    r->dre = r->dim = 0;
    r->dcnt = 0;
    r->rpos = (r->rpos + 1) % r->nl;
    if (r->rfill < r->nl) r->rfill++;
    /* the short window finds a strong line within a few thousandths of a second (hop an
     * eighth of it); the long one (8 times longer, Hann, hop a quarter) a weak one */
    size_t N = 0;
    int mode = 1;
    if (++r->since_s >= r->ns / 8 && r->rfill >= r->ns) { r->since_s = 0; N = r->ns; }
    if (++r->since_l >= r->nl / 4 && r->rfill >= r->nl) { r->since_l = 0; N = r->nl; }
    if (r->pending > 0) {
        /* delayed: a line seen on the short window is measured half a window later, on twice
         * the signal (the look-ahead still covers the start) */
        N = 0;
        if (--r->pending == 0) { N = r->ns; mode = 2; }
    } else if (N == r->ns && r->delay) {
        if (search_window(r, N, 0)) r->pending = r->ns / 2;
        N = 0;
    }
    if (!N) return;
    search_window(r, N, mode);
    if (r->state != CREC_LOCKED) return;
    if (N == r->nl) r->since_s = 0;
    /* the phase was for the next input sample; the sample output now is delay + 1 samples
     * before it */
    double th = r->theta - r->omega * (double)(r->delay + 1);
    r->theta = th - 2 * M_PI * floor((th + M_PI) / (2 * M_PI));
    r->acq_sample = r->n_in - 1 - r->delay;
    r->assist_wait = r->delay;
    r->ref_th = r->theta;
    r->ref_om = r->omega;
}

/* n (<= CREC_B) output samples o through the loop, open loop over the block, then the loop
 * moved by the block's errors (above). Sums of y, |y|^2 into acc[0..2]. */
/* The phasors exp(j n omega_t), n < CREC_B, of the block's NCO step (by recursion from one
 * sincos): tabulated again when the loop's frequency has moved by more than CREC_TAB_RAD /
 * CREC_B from omega_t. The phase error that leaves within a block, 1e-3 rad, is far below
 * the loop's own phase noise (sqrt(B_L N_0 / P_c) = 0.04 rad at P_c/N_0 = 41 dB-Hz, the
 * demo's command mode at the ideal receiver's WER 1e-2); the NCO's phase itself always
 * advances by the loop's frequency. */
#define CREC_TAB_RAD 1e-3
static void crec_tabulate(ulk_crec *r, double om)
{
    double c = 1, s = 0, cs = cos(om), ss = sin(om);
    for (int i = 0; i < CREC_B; i++) {
        r->rc[i] = (float)c;
        r->rs[i] = (float)s;
        double c2 = c * cs - s * ss;
        s = c * ss + s * cs;
        c = c2;
    }
    r->om_tab = om;
    r->have_tab = 1;
}

static inline crec_v4 crec_ld(const float *p)
{
    crec_v4 v;
    memcpy(&v, p, sizeof v);
    return v;
}

static inline double crec_hsum(crec_v4 a) { return (double)((a[0] + a[2]) + (a[1] + a[3])); }

/* The loop update at the end of a block of L = bm samples (also at a point where the assist
 * or the monitor acts): sum (L - m) e_m = L sum e - sum m e. */
static void crec_close(ulk_crec *r)
{
    if (r->bm == 0) return;
    double L = (double)r->bm, swe = L * r->b_se - r->b_sme;
    double th = r->b_th + L * r->b_om + r->kp * r->b_se + r->ki * swe;
    r->sum_omega += L * r->b_om + r->ki * swe;
    r->omega = r->b_om + r->ki * r->b_se;
    r->theta = th - 2 * M_PI * floor((th + M_PI) / (2 * M_PI));
    if (r->assist > 0 && r->assist_wait == 0) {
        /* the frequency assist's sum: the block's samples de-rotated by the assist's fixed
         * reference instead of the loop, x e^-j ref = y e^j (theta - ref), the difference
         * taken at the block's middle */
        double d = r->b_th - r->b_ref + (L - 1) / 2 * (r->b_om - r->ref_om), c = cos(d), sn = sin(d);
        r->az_r += r->b_yr * c - r->b_yi * sn;
        r->az_i += r->b_yr * sn + r->b_yi * c;
    }
    r->bm = 0;
}

/* n output samples o continuing the open block (n <= CREC_B - bm; a block opens at the loop's
 * phase and frequency then): de-rotated at the block's open-loop phase, their errors summed;
 * the block closes when full. Blocks start at fixed output samples (every CREC_B since the
 * last point where the assist or the monitor acted), whatever pieces the samples come in, so
 * the outputs do not depend on how a capture is pushed. Sums of y, |y|^2 into acc[0..2]. */
static void crec_block(ulk_crec *r, const float *o, size_t n, float *derot, float *phi, double *acc)
{
    float pc[CREC_B] = {0}, ps[CREC_B] = {0}, y[2 * CREC_B], e[CREC_B];
    if (r->bm == 0) {
        r->b_th = r->theta;
        r->b_om = r->omega;
        r->b_se = r->b_sme = 0;
        r->b_yr = r->b_yi = 0;
        r->b_ref = r->ref_th;
        if (!r->have_tab || fabs(r->b_om - r->om_tab) * CREC_B > CREC_TAB_RAD) crec_tabulate(r, r->b_om);
        r->b_c0 = (float)cos(r->b_th);
        r->b_s0 = (float)sin(r->b_th);
    }
    const size_t m0 = r->bm;
    const float c0 = r->b_c0, s0 = r->b_s0, *rc = r->rc + m0, *rs = r->rs + m0;
    for (size_t i = 0; i < n; i++) {
        pc[i] = c0 * rc[i] - s0 * rs[i];
        ps[i] = s0 * rc[i] + c0 * rs[i];
    }
    crec_derotate(o, pc, ps, y, e, n);
    for (size_t i = n; i < CREC_B; i++) y[2 * i] = y[2 * i + 1] = e[i] = 0; /* the sums below run over all */
    /* sums in lanes of four: e, m e (m the index in the block), e^2; y (lanes I, Q, I, Q), |y|^2 */
    crec_v4 se = {0, 0, 0, 0}, sme = se, se2 = se, sy = se, sp = se, w = {0, 1, 2, 3};
    w += (float)m0;
    for (int i = 0; i < CREC_B; i += 4) {
        crec_v4 ev = crec_ld(e + i), ya = crec_ld(y + 2 * i), yb = crec_ld(y + 2 * i + 4);
        se += ev;
        sme += w * ev;
        se2 += ev * ev;
        sy += ya + yb;
        sp += ya * ya + yb * yb;
        w += 4;
    }
    if (derot) memcpy(derot, y, 2 * n * sizeof *y);
    if (phi) memcpy(phi, e, n * sizeof *e);
    r->b_se += crec_hsum(se);
    r->b_sme += crec_hsum(sme);
    r->bm += n;
    r->sum_e2 += crec_hsum(se2);
    r->n += n;
    double yr = (double)(sy[0] + sy[2]), yi = (double)(sy[1] + sy[3]);
    acc[0] += yr;
    acc[1] += yi;
    acc[2] += crec_hsum(sp);
    r->b_yr += yr;
    r->b_yi += yi;
    r->ref_th += (double)n * r->ref_om;
    if (r->ref_th >= M_PI || r->ref_th < -M_PI) r->ref_th -= 2 * M_PI * floor((r->ref_th + M_PI) / (2 * M_PI));
    if (r->bm == CREC_B) crec_close(r);
}

/* n output samples o while a carrier is held, within one stretch of the frequency assist and
 * one monitor window (the caller splits there); then the assist and the monitor act. */
static void crec_locked(ulk_crec *r, const float *o, size_t n, float *derot, float *phi)
{
    double acc[3] = {0, 0, 0};
    for (size_t i = 0, b; i < n; i += b) {
        b = n - i < CREC_B - r->bm ? n - i : CREC_B - r->bm;
        crec_block(r, o + 2 * i, b, derot ? derot + 2 * i : NULL, phi ? phi + i : NULL, acc);
    }
    /* the assist and the monitor act on the loop as it is: close the block where they do */
    size_t qa = r->ns * (size_t)r->dec / 4;
    if ((r->assist_wait == 0 && r->assist > 0 && r->az_n + n == qa) || r->mon_n + n >= r->nl * (size_t)r->dec ||
        (r->assist > 0 && r->assist_wait > 0 && r->assist_wait == n))
        crec_close(r); /* (the last: the assist's wait ends, its sums start after this block) */
    if (r->assist_wait > 0) {
        r->assist_wait -= n;
    } else if (r->assist > 0) {
        /* Frequency assist: a line found on a few thousandths of a second of signal can be
         * off by more than the loop's pull-in range (+-8 Hz at B_L = 20 Hz). The samples are
         * de-rotated by a fixed reference too (the acquisition's phase and frequency): the
         * phase advance of their mean from one quarter of a short window to the next is the
         * line's offset from the reference (unambiguous within +-2 f_s / (dec ns), +-94 Hz at
         * the default window). Over the first 12 quarters (0.06 s) the loop's frequency is set
         * to the reference plus the mean advance so far, so that the first words after the
         * acquisition see a steady carrier. (Measured against the loop's own de-rotation, as
         * it was, the advance included the loop's phase corrections: each was taken for a
         * frequency error, the assist drove the loop 10 Hz off and the carrier slipped for
         * 0.5 s, and at 192 kHz, -1000 ppm, E_b/N_0 8.1 dB the demodulator then kept none of
         * 300 words: bench_envelope's composite cell, seed 1.) */
        r->az_n += n; /* the sums come with each block closed (crec_close) */
        if (r->az_n == qa) {
            if (r->pz_r != 0 || r->pz_i != 0) {
                double dr = r->az_r * r->pz_r + r->az_i * r->pz_i, di = r->az_i * r->pz_r - r->az_r * r->pz_i;
                r->au += atan2(di, dr);
                r->aq++;
                r->omega = r->ref_om + r->au / ((double)r->aq * (double)qa);
            }
            r->pz_r = r->az_r;
            r->pz_i = r->az_i;
            r->az_r = r->az_i = 0;
            r->az_n = 0;
            r->assist--;
        }
    }
    r->mon_re += acc[0];
    r->mon_im += acc[1];
    r->mon_p += acc[2];
    r->mon_n += n;
    if (r->mon_n < r->nl * (size_t)r->dec) return;
    double R = r->mon_p > 0 ? (r->mon_re * r->mon_re + r->mon_im * r->mon_im) / r->mon_p : 0;
    r->weak = R < CREC_MON_R ? r->weak + 1 : 0;
    r->mon_re = r->mon_im = r->mon_p = 0;
    r->mon_n = 0;
    if (r->weak >= CREC_MON_N) {
        r->state = CREC_SEARCHING;
        r->rfill = r->since_s = r->since_l = 0;
        r->pending = 0;
        r->dcnt = 0;
        r->dre = r->dim = 0;
        r->weak = 0;
    }
}

/* Up to n output samples while a carrier is held, to the next point where the assist or the
 * monitor acts. Returns how many were tracked (>= 1). */
static size_t crec_run_locked(ulk_crec *r, const float *o, size_t n, float *derot, float *phi)
{
    size_t m = r->nl * (size_t)r->dec - r->mon_n;
    if (r->assist_wait > 0) {
        if (r->assist_wait < m) m = r->assist_wait;
    } else if (r->assist > 0) {
        size_t qa = r->ns * (size_t)r->dec / 4;
        if (qa - r->az_n < m) m = qa - r->az_n;
    }
    if (n < m) m = n;
    crec_locked(r, o, m, derot, phi);
    return m;
}

/* n steps: input sample j (in, NULL when draining) feeds the search, output sample j (o: the
 * same sample, or `delay` samples older) is de-rotated while a carrier is held, else its
 * outputs are 0 (the data, voice and ranging stages get silence, not a carrier turning at the
 * offset frequency). The first `skip` steps have no output (the delay filling). Returns the
 * outputs written to derot / phi. */
static size_t crec_steps(ulk_crec *r, const float *in, const float *o, size_t n, size_t skip, float *derot, float *phi)
{
    size_t k = 0, j = 0;
    while (j < n) {
        if (r->state == CREC_SEARCHING) {
            if (in) crec_search_in(r, in[2 * j], in[2 * j + 1]);
            if (j < skip) { j++; continue; }
            if (r->state == CREC_SEARCHING) {
                if (derot) derot[2 * k] = derot[2 * k + 1] = 0;
                if (phi) phi[k] = 0;
                k++;
                j++;
                continue;
            }
            /* locked on this sample's input: its output is the loop's first */
            size_t m = crec_run_locked(r, o + 2 * j, n - j, derot ? derot + 2 * k : NULL, phi ? phi + k : NULL);
            if (in) r->n_in += m - 1; /* this sample's input was counted */
            k += m;
            j += m;
            continue;
        }
        if (j < skip) {
            /* held from the first block (ulk_crec_acquire) while the delay fills */
            size_t m = skip - j;
            if (in) r->n_in += m;
            j += m;
            continue;
        }
        size_t m = crec_run_locked(r, o + 2 * j, n - j, derot ? derot + 2 * k : NULL, phi ? phi + k : NULL);
        if (in) r->n_in += m;
        k += m;
        j += m;
    }
    return k;
}

/* n input samples into the work buffer after the `delay` held ones, non-finite values as 0 */
static void crec_fill(ulk_crec *r, const float *iq, size_t n)
{
    float *w = r->wk + 2 * r->delay;
    for (size_t i = 0; i < n; i++) {
        float re = iq[2 * i], im = iq[2 * i + 1];
        int ok = isfinite(re) && isfinite(im);
        w[2 * i] = ok ? re : 0;
        w[2 * i + 1] = ok ? im : 0;
    }
}

int ulk_crec_track(ulk_crec *r, const float *iq, size_t n, float *derot, float *phi)
{
    if (!r || (!iq && n)) return ULK_EINVAL;
    if (r->delay) return ULK_EINVAL; /* a delayed object is run with ulk_crec_push */
    size_t k = 0;
    while (n > 0) {
        size_t m = n < CREC_PIECE ? n : CREC_PIECE;
        crec_fill(r, iq, m);
        k += crec_steps(r, r->wk, r->wk, m, 0, derot ? derot + 2 * k : NULL, phi ? phi + k : NULL);
        iq += 2 * m;
        n -= m;
    }
    return 0;
}

size_t ulk_crec_delay(const ulk_crec *r) { return r ? r->delay : 0; }

long ulk_crec_push(ulk_crec *r, const float *iq, size_t n, float *derot, float *phi)
{
    if (!r || (!iq && n) || !r->delay || r->drained) return ULK_EINVAL;
    size_t k = 0;
    while (n > 0) {
        size_t m = n < CREC_PIECE ? n : CREC_PIECE;
        size_t skip = r->n_in >= r->delay ? 0 : r->delay - (size_t)r->n_in;
        if (skip > m) skip = m;
        crec_fill(r, iq, m);
        /* input j is wk[delay + j], its output wk[j] (delay samples older) */
        k += crec_steps(r, r->wk + 2 * r->delay, r->wk, m, skip, derot ? derot + 2 * k : NULL, phi ? phi + k : NULL);
        memmove(r->wk, r->wk + 2 * m, 2 * r->delay * sizeof *r->wk); /* the last delay inputs */
        iq += 2 * m;
        n -= m;
    }
    return (long)k;
}

long ulk_crec_drain(ulk_crec *r, float *derot, float *phi)
{
    if (!r || !r->delay || r->drained) return ULK_EINVAL;
    r->drained = 1;
    size_t held = r->n_in < r->delay ? (size_t)r->n_in : r->delay;
    /* the last `held` inputs end the held part of the work buffer */
    return (long)crec_steps(r, NULL, r->wk + 2 * (r->delay - held), held, 0, derot, phi);
}

void ulk_crec_get_status(const ulk_crec *r, ulk_crec_status *st)
{
    memset(st, 0, sizeof *st);
    st->coarse_hz = r->coarse_hz;
    st->line_db = r->line_db;
    /* with a block open, what its closing would add (crec_close) */
    double L = (double)r->bm, swe = L * r->b_se - r->b_sme;
    double om = r->bm ? r->b_om + r->ki * r->b_se : r->omega;
    double sum_om = r->sum_omega + (r->bm ? L * r->b_om + r->ki * swe : 0);
    st->freq_hz = om * r->fs / (2 * M_PI);
    st->mean_freq_hz = r->n ? sum_om / (double)r->n * r->fs / (2 * M_PI) : st->freq_hz;
    st->phase_rms_rad = r->n ? sqrt(r->sum_e2 / (double)r->n) : 0;
    st->n_tracked = r->n;
    st->n_acquired = r->n_acq;
    st->holding = r->state != CREC_SEARCHING;
    st->at_limit = r->at_limit;
    st->acquired_s = (double)r->acq_sample / r->fs;
}

/* ---- voice ---- */

/* The channel filter and the discriminator run at f_s / m (m a divisor of D, the rate at least
 * 4 (Delta + f_a): the channel filter's stopband, from about 1.46 (Delta + f_a), folds no
 * closer than 2.5 (Delta + f_a) to 0 Hz), the audio filter at that rate too; the mixer runs at
 * f_s on every sample (the channel filter needs them all), by a phasor turned by recursion and
 * set again from the exact phase every VD_RENORM samples. At 192 kHz: m = 6, the channel
 * filter's 157 taps once per 6 samples, where they ran on every one (the voice demodulator
 * was 60 % of a full-mode decode). */
#define VD_RENORM 256
typedef float vd_v4 __attribute__((vector_size(16)));

struct ulk_vdemod {
    double fs, fv, dev;
    int rate_out, decim;
    int m;                    /* channel filter and discriminator every m-th sample (m | decim) */
    double ph, dph;           /* mixer phase, cycles */
    double mc, ms, sc, ss;    /* the mixer's phasor exp(-j 2 pi ph) and its step */
    int nren;                 /* samples until the phasor is set from ph again */
    int nc, na, ncp, nap;     /* channel and audio filter lengths; rounded up to 8 */
    float *hc, *ha;           /* taps, zeros after nc / na (ncp / nap) */
    float *zr, *zi;           /* channel filter input ring, doubled (2 nc + 8) */
    float *ar;                /* discriminator output ring, doubled (2 na + 8) */
    int pc, pa;
    double pr, pi;            /* previous channel output */
    long cnt;                 /* samples until the next output */
    long ccnt;                /* samples until the next discriminator output */
};

void ulk_vdemod_destroy(ulk_vdemod *v)
{
    if (!v) return;
    ulk_free(v->hc);
    ulk_free(v->ha);
    ulk_free(v->zr);
    ulk_free(v->zi);
    ulk_free(v->ar);
    ulk_free(v);
}

/* Blackman-windowed sinc low-pass of n (odd) taps, cutoff fc (fraction of fs), unit DC gain. */
static void lowpass(float *h, int n, double fc)
{
    double sum = 0;
    for (int i = 0; i < n; i++) {
        double m = i - (n - 1) / 2.0;
        double s = m == 0 ? 2 * fc : sin(2 * M_PI * fc * m) / (M_PI * m);
        sum += s * (0.42 - 0.5 * cos(2 * M_PI * i / (n - 1)) + 0.08 * cos(4 * M_PI * i / (n - 1)));
    }
    for (int i = 0; i < n; i++) {
        double m = i - (n - 1) / 2.0;
        double s = m == 0 ? 2 * fc : sin(2 * M_PI * fc * m) / (M_PI * m);
        h[i] = (float)(s * (0.42 - 0.5 * cos(2 * M_PI * i / (n - 1)) + 0.08 * cos(4 * M_PI * i / (n - 1))) / sum);
    }
}

static inline vd_v4 vd_ld(const float *p)
{
    vd_v4 v;
    memcpy(&v, p, sizeof v);
    return v;
}

/* sum h[t] x[t], t < n (a multiple of 8) */
static inline float vd_dot(const float *h, const float *x, int n)
{
    vd_v4 a0 = {0, 0, 0, 0}, a1 = a0;
    for (int t = 0; t < n; t += 8) {
        a0 += vd_ld(h + t) * vd_ld(x + t);
        a1 += vd_ld(h + t + 4) * vd_ld(x + t + 4);
    }
    vd_v4 a = a0 + a1;
    return (a[0] + a[2]) + (a[1] + a[3]);
}

static int odd_taps(double x)
{
    int n = (int)ceil(x);
    if (n < 31) n = 31;
    if (n > 1023) n = 1023;
    return n | 1;
}

int ulk_vdemod_create(double fs, double fv, double dev, double tone, ulk_vdemod **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!out || !(fs > 0) || !(fv > 0) || !(dev > 0) || !(tone >= 0) || !isfinite(fs))
        return ulk_fail(diag, ULK_EINVAL, "voice: rates must be > 0");
    double fa = tone > 3400 ? tone : 3400;
    double cut = dev + fa;
    if (!(fv + cut < fs / 2))
        return ulk_fail(diag, ULK_EINVAL, "voice: f_v + Delta + f_a = %g Hz is not below half the sample rate (%g Hz)",
                        fv + cut, fs / 2);
    if (fs != floor(fs) || fs > 2147483647.0)
        return ulk_fail(diag, ULK_EINVAL, "voice: the sample rate %g Hz is not a whole number of Hz (WAV needs one)", fs);
    ulk_vdemod *v = ulk_calloc(1, sizeof *v);
    if (!v) return ulk_fail(diag, ULK_ENOMEM, "voice: out of memory");
    v->fs = fs;
    v->fv = fv;
    v->dev = dev;
    long f = (long)fs, d = 1;
    for (long k = 1; (double)f / k >= 16000; k++)
        if (f % k == 0) d = k;
    v->decim = (int)d;
    v->rate_out = (int)(f / d);
    v->m = 1;
    for (int k = 1; k <= (int)d; k++)
        if (d % k == 0 && fs / k >= 4 * cut) v->m = k;
    double fm = fs / v->m; /* the discriminator's rate */
    v->dph = fv / fs;
    v->nc = odd_taps(6 * fs / cut);
    v->na = odd_taps(6 * fm / (0.45 * v->rate_out));
    v->ncp = (v->nc + 7) / 8 * 8;
    v->nap = (v->na + 7) / 8 * 8;
    v->hc = ulk_calloc((size_t)v->ncp, sizeof *v->hc);
    v->ha = ulk_calloc((size_t)v->nap, sizeof *v->ha);
    v->zr = ulk_calloc(2 * (size_t)v->nc + 8, sizeof *v->zr);
    v->zi = ulk_calloc(2 * (size_t)v->nc + 8, sizeof *v->zi);
    v->ar = ulk_calloc(2 * (size_t)v->na + 8, sizeof *v->ar);
    if (!v->hc || !v->ha || !v->zr || !v->zi || !v->ar) {
        ulk_vdemod_destroy(v);
        return ulk_fail(diag, ULK_ENOMEM, "voice: out of memory");
    }
    lowpass(v->hc, v->nc, cut / fs);
    int da = v->decim / v->m; /* discriminator samples per audio sample */
    lowpass(v->ha, v->na, da > 1 ? 0.45 / da : 0.45);
    v->cnt = v->decim;
    v->ccnt = v->m;
    v->sc = cos(2 * M_PI * v->dph);
    v->ss = -sin(2 * M_PI * v->dph);
    *out = v;
    return 0;
}

int ulk_vdemod_rate(const ulk_vdemod *v) { return v ? v->rate_out : 0; }

long ulk_vdemod_push(ulk_vdemod *v, const float *phi, size_t n, float *audio)
{
    if (!v || ((!phi || !audio) && n)) return ULK_EINVAL;
    long k = 0;
    const double scale = v->fs / v->m / (2 * M_PI * v->dev);
    for (size_t i = 0; i < n; i++) {
        float x = isfinite(phi[i]) ? phi[i] : 0;
        if (v->nren-- == 0) {
            /* mix f_v down to 0 Hz: exp(-j 2 pi ph), set from the exact phase now and then */
            v->mc = cos(2 * M_PI * v->ph);
            v->ms = -sin(2 * M_PI * v->ph);
            v->nren = VD_RENORM - 1;
        }
        v->pc = v->pc == 0 ? v->nc - 1 : v->pc - 1;
        v->zr[v->pc] = v->zr[v->pc + v->nc] = (float)(x * v->mc);
        v->zi[v->pc] = v->zi[v->pc + v->nc] = (float)(x * v->ms);
        double c = v->mc * v->sc - v->ms * v->ss;
        v->ms = v->mc * v->ss + v->ms * v->sc;
        v->mc = c;
        v->ph += v->dph;
        v->ph -= floor(v->ph);
        if (--v->ccnt > 0) continue;
        v->ccnt = v->m;
        double yr = vd_dot(v->hc, v->zr + v->pc, v->ncp), yi = vd_dot(v->hc, v->zi + v->pc, v->ncp);
        /* discriminator: arg(z_n conj z_{n-1}) */
        double dr = yr * v->pr + yi * v->pi, di = yi * v->pr - yr * v->pi;
        double fm = (dr == 0 && di == 0) ? 0 : atan2(di, dr) * scale;
        v->pr = yr;
        v->pi = yi;
        v->pa = v->pa == 0 ? v->na - 1 : v->pa - 1;
        v->ar[v->pa] = v->ar[v->pa + v->na] = (float)fm;
        if ((v->cnt -= v->m) == 0) {
            v->cnt = v->decim;
            audio[k++] = vd_dot(v->ha, v->ar + v->pa, v->nap);
        }
    }
    return k;
}
