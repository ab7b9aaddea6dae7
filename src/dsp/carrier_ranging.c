/* src/carrier_ranging.c - the ranging correlator: code phase (delay) of a complex capture by
 * folding onto one code period and circular correlation with the code (contract in
 * include/ulk/carrier.h, docs/spec/carrier.md section 3).
 *
 * Why fold first: a capture of many periods costs one pass and N*K bins of memory, and the
 * single FFT at the end is of one period whatever the capture's length. Chip positions are
 * integer accumulators on the sample index (as the generator's), so a long capture does not
 * drift against the code.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/carrier.h"
#include "util.h"

#ifdef ULK_HAVE_FFTW
#include <fftw3.h>
#endif

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

struct ulk_rcorr {
    uint64_t period;        /* N */
    size_t n_bins;          /* N * K */
    double chip_rate;
    /* code position in chips: acc / den, acc in [0, N * den), step per sample */
    __int128 acc, step, den;
    /* carrier offset removal: phase in cycles acc_o / den_o */
    int64_t acc_o, step_o, den_o;
    double *sum_re, *sum_im; /* folded period */
    uint8_t *bits;          /* the code, a_0 .. a_{N-1} */
    uint64_t n;
};

void ulk_rcorr_destroy(ulk_rcorr *r)
{
    if (!r) return;
    ulk_free(r->sum_re);
    ulk_free(r->sum_im);
    free(r->bits); /* from ulk_mls_generate: free() */
    ulk_free(r);
}

int ulk_rcorr_create(const ulk_carrier *c, ulk_ratio fs, ulk_rcorr **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!c || !out || fs.num <= 0 || fs.den <= 0)
        return ulk_fail(diag, ULK_EINVAL, "ranging: missing carrier or sample rate");
    if (!c->has_ranging) return ulk_fail(diag, ULK_EINVAL, "ranging: the carrier section has no ranging channel");
#ifndef ULK_HAVE_FFTW
    return ulk_fail(diag, ULK_EFORMAT, "ranging: this build has no FFTW3, so it cannot correlate");
#else
    ulk_ratio q, qo;
    if (ulk_ratio_div(c->chip_rate, fs, &q) || ulk_ratio_div(c->offset_hz, fs, &qo))
        return ulk_fail(diag, ULK_ELIMIT, "ranging: chip rate and sample rate are too fine to relate exactly");
    ulk_rcorr *r = ulk_calloc(1, sizeof *r);
    if (!r) return ulk_fail(diag, ULK_ENOMEM, "ranging: out of memory");
    uint64_t period = 0;
    int rc = ulk_mls_generate(c->poly_exps, c->n_poly_exps, &period, &r->bits);
    if (rc) {
        ulk_rcorr_destroy(r);
        return ulk_fail(diag, rc == ULK_ENOMEM ? ULK_ENOMEM : ULK_EINVAL, "ranging: cannot generate the code");
    }
    r->period = period;
    r->n_bins = (size_t)period * ULK_RCORR_BINS_PER_CHIP;
    r->chip_rate = ulk_ratio_to_double(c->chip_rate);
    r->den = q.den;
    r->step = ((__int128)q.num) % ((__int128)period * q.den);
    r->den_o = qo.den;
    r->step_o = qo.num % qo.den;
    if (r->step_o < 0) r->step_o += qo.den;
    r->sum_re = ulk_calloc(r->n_bins, sizeof *r->sum_re);
    r->sum_im = ulk_calloc(r->n_bins, sizeof *r->sum_im);
    if (!r->sum_re || !r->sum_im) {
        ulk_rcorr_destroy(r);
        return ulk_fail(diag, ULK_ENOMEM, "ranging: out of memory");
    }
    *out = r;
    return 0;
#endif
}

int ulk_rcorr_feed(ulk_rcorr *r, const float *iq, size_t n)
{
    if (!r || (!iq && n)) return ULK_EINVAL;
    const __int128 wrap = (__int128)r->period * r->den;
    for (size_t k = 0; k < n; k++) {
        double re = iq[2 * k], im = iq[2 * k + 1];
        if (r->step_o) { /* remove f_o: multiply by exp(-j 2 pi f_o t) */
            double ph = -2.0 * M_PI * (double)r->acc_o / (double)r->den_o;
            double c = cos(ph), s = sin(ph);
            double a = re * c - im * s;
            im = re * s + im * c;
            re = a;
            r->acc_o += r->step_o;
            if (r->acc_o >= r->den_o) r->acc_o -= r->den_o;
        }
        size_t b = (size_t)((r->acc * ULK_RCORR_BINS_PER_CHIP) / r->den);
        if (b >= r->n_bins) b = r->n_bins - 1;
        if (isfinite(re) && isfinite(im)) {
            r->sum_re[b] += re;
            r->sum_im[b] += im;
        }
        r->acc += r->step;
        if (r->acc >= wrap) r->acc -= wrap;
    }
    r->n += n;
    return 0;
}

int ulk_rcorr_result(ulk_rcorr *r, ulk_ranging_result *out)
{
    if (!r || !out) return ULK_EINVAL;
    memset(out, 0, sizeof *out);
    out->n_samples = r->n;
#ifndef ULK_HAVE_FFTW
    return ULK_EFORMAT;
#else
    /* periods spanned: samples times chips per sample (step is reduced mod N den, which only
     * matters for a chip rate above N times the sample rate: then one sample spans a period) */
    double cps = (double)r->step / (double)r->den;
    out->n_periods = (double)r->n * cps / (double)r->period;
    if (out->n_periods < 1.0) return ULK_ELIMIT;
    const size_t M = r->n_bins, K = ULK_RCORR_BINS_PER_CHIP;
    fftwf_complex *y = fftwf_malloc(M * sizeof *y), *cf = fftwf_malloc(M * sizeof *cf);
    fftwf_plan py = NULL, pc = NULL, pi = NULL;
    if (!y || !cf) goto oom;
    py = fftwf_plan_dft_1d((int)M, y, y, FFTW_FORWARD, FFTW_ESTIMATE);
    pc = fftwf_plan_dft_1d((int)M, cf, cf, FFTW_FORWARD, FFTW_ESTIMATE);
    pi = fftwf_plan_dft_1d((int)M, y, y, FFTW_BACKWARD, FFTW_ESTIMATE);
    if (!py || !pc || !pi) goto oom;
    for (size_t b = 0; b < M; b++) {
        y[b][0] = (float)r->sum_re[b];
        y[b][1] = (float)r->sum_im[b];
        cf[b][0] = (float)ulk_mls_chip(r->bits[b / K]);
        cf[b][1] = 0;
    }
    fftwf_execute(py);
    fftwf_execute(pc);
    /* R(L) = sum_b y(b) code(b - L): Y(f) conj(C(f)) back-transformed, lag L at index L */
    for (size_t b = 0; b < M; b++) {
        double a = y[b][0], bb = y[b][1], c = cf[b][0], d = -cf[b][1];
        y[b][0] = (float)(a * c - bb * d);
        y[b][1] = (float)(a * d + bb * c);
    }
    fftwf_execute(pi);
    size_t best = 0;
    double bmax = -1, sum = 0;
    for (size_t b = 0; b < M; b++) {
        double m = hypot(y[b][0], y[b][1]);
        sum += m;
        if (m > bmax) { bmax = m; best = b; }
    }
    double lm = hypot(y[(best + M - 1) % M][0], y[(best + M - 1) % M][1]);
    double lp = hypot(y[(best + 1) % M][0], y[(best + 1) % M][1]);
    double den = lm - 2 * bmax + lp, frac = 0;
    if (den < 0) frac = 0.5 * (lm - lp) / den;
    double d = ((double)best + frac) / (double)K;
    d = fmod(d, (double)r->period);
    if (d < 0) d += (double)r->period;
    /* a received chip index floor(t rc - D) is the code shifted right by D: lag D */
    out->phase_chips = d;
    out->delay_s = d / r->chip_rate;
    out->peak_to_mean = sum > 0 ? bmax / (sum / (double)M) : 0;
    fftwf_destroy_plan(py);
    fftwf_destroy_plan(pc);
    fftwf_destroy_plan(pi);
    fftwf_free(y);
    fftwf_free(cf);
    return 0;
oom:
    if (py) fftwf_destroy_plan(py);
    if (pc) fftwf_destroy_plan(pc);
    if (pi) fftwf_destroy_plan(pi);
    fftwf_free(y);
    fftwf_free(cf);
    return ULK_ENOMEM;
#endif
}
