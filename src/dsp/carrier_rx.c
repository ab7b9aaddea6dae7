/* src/carrier_rx.c - the receiving side of the composite carrier: carrier recovery (coarse FFT
 * of the residual carrier line, then a second-order phase-locked loop) and the voice FM
 * demodulator (include/ulk/carrier.h; composite-carrier.md section 3).
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
};

void ulk_crec_destroy(ulk_crec *r) { ulk_free(r); }

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
    *out = r;
    return 0;
}

size_t ulk_crec_block(const ulk_crec *r) { return r ? r->block : 0; }

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
    double bin = r->fs / (double)nf;
    /* bins up to the one holding max_off are searched; one more each side for the parabola */
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
    r->line_db = mean > 0 ? 10 * log10(bestv / mean) : 0;
    r->coarse_hz = ((double)best + frac) * bin;
    r->omega = 2 * M_PI * r->coarse_hz / r->fs;
    fftwf_destroy_plan(p);
    fftwf_free(buf);
    ulk_free(mag);
    return 0;
#endif
}

int ulk_crec_track(ulk_crec *r, const float *iq, size_t n, float *derot, float *phi)
{
    if (!r || (!iq && n)) return ULK_EINVAL;
    double th = r->theta, om = r->omega;
    for (size_t i = 0; i < n; i++) {
        double re = iq[2 * i], im = iq[2 * i + 1];
        if (!isfinite(re) || !isfinite(im)) re = im = 0;
        double c = cos(th), s = sin(th);
        double yr = re * c + im * s, yi = im * c - re * s; /* x exp(-j theta) */
        double e = (yr == 0 && yi == 0) ? 0 : atan2(yi, yr);
        if (derot) { derot[2 * i] = (float)yr; derot[2 * i + 1] = (float)yi; }
        if (phi) phi[i] = (float)e;
        om += r->ki * e;
        th += om + r->kp * e;
        if (th >= M_PI || th < -M_PI) th -= 2 * M_PI * floor((th + M_PI) / (2 * M_PI));
        r->sum_omega += om;
        r->sum_e2 += e * e;
    }
    r->theta = th;
    r->omega = om;
    r->n += n;
    return 0;
}

void ulk_crec_get_status(const ulk_crec *r, ulk_crec_status *st)
{
    memset(st, 0, sizeof *st);
    st->coarse_hz = r->coarse_hz;
    st->line_db = r->line_db;
    st->freq_hz = r->omega * r->fs / (2 * M_PI);
    st->mean_freq_hz = r->n ? r->sum_omega / (double)r->n * r->fs / (2 * M_PI) : st->freq_hz;
    st->phase_rms_rad = r->n ? sqrt(r->sum_e2 / (double)r->n) : 0;
    st->n_tracked = r->n;
}

/* ---- voice ---- */

struct ulk_vdemod {
    double fs, fv, dev;
    int rate_out, decim;
    double ph, dph;           /* mixer phase, cycles */
    int nc, na;               /* channel and audio filter lengths */
    double *hc, *ha;          /* taps */
    double *zr, *zi;          /* channel filter input ring, doubled (2 nc) */
    double *ar;               /* discriminator output ring, doubled (2 na) */
    int pc, pa;
    double pr, pi;            /* previous channel output */
    long cnt;                 /* samples until the next output */
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
static void lowpass(double *h, int n, double fc)
{
    double sum = 0;
    for (int i = 0; i < n; i++) {
        double m = i - (n - 1) / 2.0;
        double s = m == 0 ? 2 * fc : sin(2 * M_PI * fc * m) / (M_PI * m);
        double w = 0.42 - 0.5 * cos(2 * M_PI * i / (n - 1)) + 0.08 * cos(4 * M_PI * i / (n - 1));
        h[i] = s * w;
        sum += h[i];
    }
    for (int i = 0; i < n; i++) h[i] /= sum;
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
    v->dph = fv / fs;
    v->nc = odd_taps(6 * fs / cut);
    v->na = odd_taps(6 * fs / (0.45 * v->rate_out));
    v->hc = ulk_malloc((size_t)v->nc * sizeof *v->hc);
    v->ha = ulk_malloc((size_t)v->na * sizeof *v->ha);
    v->zr = ulk_calloc(2 * (size_t)v->nc, sizeof *v->zr);
    v->zi = ulk_calloc(2 * (size_t)v->nc, sizeof *v->zi);
    v->ar = ulk_calloc(2 * (size_t)v->na, sizeof *v->ar);
    if (!v->hc || !v->ha || !v->zr || !v->zi || !v->ar) {
        ulk_vdemod_destroy(v);
        return ulk_fail(diag, ULK_ENOMEM, "voice: out of memory");
    }
    lowpass(v->hc, v->nc, cut / fs);
    lowpass(v->ha, v->na, v->decim > 1 ? 0.45 / v->decim : 0.45);
    v->cnt = v->decim;
    *out = v;
    return 0;
}

int ulk_vdemod_rate(const ulk_vdemod *v) { return v ? v->rate_out : 0; }

long ulk_vdemod_push(ulk_vdemod *v, const float *phi, size_t n, float *audio)
{
    if (!v || ((!phi || !audio) && n)) return ULK_EINVAL;
    long k = 0;
    const double scale = v->fs / (2 * M_PI * v->dev);
    for (size_t i = 0; i < n; i++) {
        double x = isfinite(phi[i]) ? phi[i] : 0;
        double a = -2 * M_PI * v->ph; /* mix f_v down to 0 Hz */
        v->ph += v->dph;
        v->ph -= floor(v->ph);
        v->pc = v->pc == 0 ? v->nc - 1 : v->pc - 1;
        v->zr[v->pc] = v->zr[v->pc + v->nc] = x * cos(a);
        v->zi[v->pc] = v->zi[v->pc + v->nc] = x * sin(a);
        double yr = 0, yi = 0;
        const double *r = v->zr + v->pc, *q = v->zi + v->pc;
        for (int t = 0; t < v->nc; t++) {
            yr += v->hc[t] * r[t];
            yi += v->hc[t] * q[t];
        }
        /* discriminator: arg(z_n conj z_{n-1}) */
        double dr = yr * v->pr + yi * v->pi, di = yi * v->pr - yr * v->pi;
        double fm = (dr == 0 && di == 0) ? 0 : atan2(di, dr) * scale;
        v->pr = yr;
        v->pi = yi;
        v->pa = v->pa == 0 ? v->na - 1 : v->pa - 1;
        v->ar[v->pa] = v->ar[v->pa + v->na] = fm;
        if (--v->cnt == 0) {
            v->cnt = v->decim;
            double s = 0;
            const double *b = v->ar + v->pa;
            for (int t = 0; t < v->na; t++) s += v->ha[t] * b[t];
            audio[k++] = (float)s;
        }
    }
    return k;
}
