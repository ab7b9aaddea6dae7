/* src/carrier.c - composite carrier: Bessel J0/J1, power division, ranging code, the index
 * planner and the complex-baseband generator (docs/spec/carrier.md).
 *
 * The loader of the carrier section is in carrier_load.c; this file needs no parser.
 */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/carrier.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* ------------------------------------------------------------------ Bessel */

/* Series J_nu(x) = sum_k (-1)^k (x/2)^(2k+nu) / (k! (k+nu)!), nu = 0 or 1 (A&S 9.1.10), in
 * long double: the largest term for x <= 12 is ~4e3, so the 64-bit mantissa leaves ~1e-16. */
static double bessel_series(int nu, double xd)
{
    long double x = xd, q = -(x * x) / 4.0L;
    long double term = nu ? x / 2.0L : 1.0L, sum = term;
    for (int k = 1; k < 200; k++) {
        term *= q / ((long double)k * (long double)(k + nu));
        sum += term;
        if (fabsl(term) < 1e-22L * (fabsl(sum) + 1e-30L) && k > (int)xd) break;
    }
    return (double)sum;
}

/* Hankel's asymptotic expansion (Abramowitz and Stegun 9.2.5, 9.2.9, 9.2.10):
 * J_nu(x) = sqrt(2/(pi x)) (P cos chi - Q sin chi), chi = x - (nu/2 + 1/4) pi,
 * a_k = a_{k-1} (mu - (2k-1)^2) / (8k), mu = 4 nu^2, P = a_0 - a_2/x^2 + ..., Q = a_1/x - ...
 * Summed until the terms stop shrinking (the series diverges; its best truncation error is
 * about the first omitted term, ~e^-2x). */
static double bessel_asym(int nu, double x)
{
    double mu = 4.0 * nu * nu;
    double t = 1.0, P = 1.0, Q = 0.0, prev = HUGE_VAL;
    for (int k = 1; k < 100; k++) {
        double nt = t * (mu - (2.0 * k - 1) * (2.0 * k - 1)) / (8.0 * k * x);
        if (fabs(nt) >= prev || nt == 0.0) break;
        prev = fabs(nt);
        t = nt;
        /* k odd -> Q, k even -> P; signs alternate in pairs: +P0, +Q1, -P2, -Q3, +P4 ... */
        double s = ((k / 2) % 2) ? -1.0 : 1.0;
        if (k % 2) Q += s * t;
        else P += s * t;
        if (fabs(t) < 1e-18) break;
    }
    /* chi computed as x - phase with the phase reduced exactly enough for x < 1e8. */
    double chi = x - (nu * 0.5 + 0.25) * M_PI;
    return sqrt(2.0 / (M_PI * x)) * (P * cos(chi) - Q * sin(chi));
}

/* Miller's backward recurrence J_{k-1} = (2k/x) J_k - J_{k+1} from far above the order
 * (where the minimal solution J_k dominates), normalised by J_0 + 2 sum J_{2k} = 1
 * (A&S 9.1.27, 9.1.46). Stable where the series cancels badly and the asymptotic series is
 * not yet accurate; the start order x + 40 leaves the start's error below 1e-20. */
static double bessel_miller(int nu, double xd)
{
    long double x = xd, jp1 = 0.0L, j = 1e-300L, j0 = 0, j1 = 0, norm = 0;
    int start = 2 * ((int)(xd / 2) + 24);
    for (int k = start; k >= 1; k--) {
        long double jm1 = (2.0L * k / x) * j - jp1;
        jp1 = j;
        j = jm1; /* now J_{k-1} */
        if (k - 1 == 1) j1 = j;
        if ((k - 1) % 2 == 0 && k - 1 > 0) norm += 2.0L * j;
        if (fabsl(j) > 1e300L) { /* rescale to stay in range */
            j *= 1e-300L; jp1 *= 1e-300L; j1 *= 1e-300L; norm *= 1e-300L;
        }
    }
    j0 = j;
    norm += j0;
    return (double)((nu ? j1 : j0) / norm);
}

/* |x| <= 12: series (largest term ~4e3, so ~1e-16 absolute in long double); 12 < |x| <= 25:
 * Miller; beyond: Hankel (best truncation error ~e^-50). */
static double bessel(int nu, double x)
{
    if (x <= 12.0) return bessel_series(nu, x);
    if (x <= 25.0) return bessel_miller(nu, x);
    return bessel_asym(nu, x);
}

double ulk_bessel_j0(double x)
{
    if (isnan(x)) return x;
    return bessel(0, fabs(x));
}

double ulk_bessel_j1(double x)
{
    if (isnan(x)) return x;
    double s = x < 0 ? -1.0 : 1.0;
    return s * bessel(1, fabs(x));
}

/* ------------------------------------------------------------------ power division */

/* Residual and first-order fractions of one channel (docs/spec/carrier.md section 2). Sinusoidal:
 * exp(j m sin t) = sum_n J_n(m) exp(j n t), the Jacobi-Anger expansion (Abramowitz and Stegun,
 * Handbook of Mathematical Functions, 1964, 9.1.41 to 9.1.45, from memory): carrier J0(m)^2, the
 * two first-order lines 2 J1(m)^2. Binary (c = +-1): exp(j m c) = cos m + j c sin m exactly. */
void ulk_chan_fractions(ulk_chan_kind kind, double m, double *f0, double *f1)
{
    double a, b;
    if (kind == ULK_CHAN_BINARY) {
        a = cos(m) * cos(m);
        b = sin(m) * sin(m);
    } else {
        double j0 = ulk_bessel_j0(m), j1 = ulk_bessel_j1(m);
        a = j0 * j0;
        b = 2.0 * j1 * j1;
    }
    if (f0) *f0 = a;
    if (f1) *f1 = b;
}

int ulk_power_split_compute(const ulk_chan_term *terms, int n, ulk_power_split *out)
{
    if (!out || n < 0 || n > ULK_SPLIT_MAX || (n > 0 && !terms)) return ULK_EINVAL;
    double f0[ULK_SPLIT_MAX], f1[ULK_SPLIT_MAX];
    memset(out, 0, sizeof *out);
    out->carrier = 1.0;
    for (int k = 0; k < n; k++) {
        ulk_chan_fractions(terms[k].kind, terms[k].m_rad, &f0[k], &f1[k]);
        out->carrier *= f0[k];
    }
    double sum = out->carrier;
    for (int k = 0; k < n; k++) {
        /* product over the others, not carrier / f0[k]: f0 may be zero at a Bessel zero */
        double u = f1[k];
        for (int i = 0; i < n; i++)
            if (i != k) u *= f0[i];
        out->useful[k] = u;
        sum += u;
    }
    out->intermod = 1.0 - sum;
    if (out->intermod < 0 && out->intermod > -1e-15) out->intermod = 0; /* rounding only */
    return 0;
}

/* ------------------------------------------------------------------ ranging code */

int ulk_mls_generate(const int *exps, int n_exp, uint64_t *period, uint8_t **bits)
{
    if (bits) *bits = NULL;
    if (period) *period = 0;
    if (!exps || n_exp <= 0 || !period) return ULK_EINVAL;
    int r = -1;
    for (int i = 0; i < n_exp; i++) {
        if (exps[i] < 0) return ULK_EINVAL;
        for (int j = 0; j < i; j++)
            if (exps[j] == exps[i]) return ULK_EINVAL;
        if (exps[i] > r) r = exps[i];
    }
    if (r < 2) return ULK_EINVAL;
    if (r > ULK_MLS_MAX_DEGREE) return ULK_ELIMIT;
    int has_const = 0;
    for (int i = 0; i < n_exp; i++) has_const |= exps[i] == 0;
    if (!has_const) return ULK_EPARSE; /* a_{k+r} does not depend on a_k: not invertible */
    uint32_t mask = 0;
    for (int i = 0; i < n_exp; i++)
        if (exps[i] < r) mask |= (uint32_t)1 << exps[i];
    /* Register w holds a_k .. a_{k+r-1} in bits 0 .. r-1. */
    const uint32_t ones = (r == 32) ? 0xffffffffu : (((uint32_t)1 << r) - 1);
    const uint64_t limit = (uint64_t)1 << r;
    uint8_t *b = NULL;
    if (bits) {
        b = ulk_malloc((size_t)limit);
        if (!b) return ULK_ENOMEM;
    }
    uint32_t w = ones;
    uint64_t p = 0;
    do {
        if (p >= limit) { /* never back to all ones: singular recurrence */
            ulk_free(b);
            return ULK_EPARSE;
        }
        if (b) b[p] = (uint8_t)(w & 1);
        uint32_t nb = (uint32_t)__builtin_parity(w & mask);
        w = (w >> 1) | (nb << (r - 1));
        p++;
    } while (w != ones);
    *period = p;
    if (bits) *bits = b;
    return 0;
}

/* ------------------------------------------------------------------ the model */

const char *ulk_channel_name(ulk_channel ch)
{
    switch (ch) {
    case ULK_CH_DATA: return "data";
    case ULK_CH_VOICE: return "voice";
    case ULK_CH_RANGING: return "ranging";
    default: return "?";
    }
}

void ulk_carrier_destroy(ulk_carrier *c)
{
    if (!c) return;
    for (int i = 0; i < c->n_modes; i++) {
        ulk_free(c->modes[i].name);
        ulk_free((char *)c->modes[i].loc.file);
        ulk_free((char *)c->modes[i].loc.path);
    }
    ulk_free(c->modes);
    ulk_free(c->file);
    ulk_free(c->voice_audio);
    ulk_free(c);
}

int ulk_carrier_find_mode(const ulk_carrier *c, const char *name)
{
    if (!c || !name) return -1;
    for (int i = 0; i < c->n_modes; i++)
        if (c->modes[i].name && !strcmp(c->modes[i].name, name)) return i;
    return -1;
}

static int channel_defined(const ulk_carrier *c, int ch)
{
    return ch == ULK_CH_DATA ? c->has_data : ch == ULK_CH_VOICE ? c->has_voice : c->has_ranging;
}

/* The data channel's share of the index: with a pilot, the data signal (A d c + A_p sin)/(A +
 * A_p) is two phase terms at different frequencies, so it splits into two Jacobi-Anger
 * factors of indices m A/(A+A_p) and m A_p/(A+A_p). */
static void data_terms(const ulk_carrier *c, double m, ulk_chan_term *d, ulk_chan_term *p)
{
    double a = c->data_amp, ap = c->has_pilot ? c->pilot_amp : 0.0;
    double s = a + ap > 0 ? 1.0 / (a + ap) : 1.0;
    d->kind = c->data_wave == ULK_WAVE_SQUARE ? ULK_CHAN_BINARY : ULK_CHAN_SINE;
    d->m_rad = c->has_pilot ? m * a * s : m;
    p->kind = ULK_CHAN_SINE;
    p->m_rad = c->has_pilot ? m * ap * s : 0.0;
}

static double db(double x) { return x > 0 ? 10.0 * log10(x) : -HUGE_VAL; }

int ulk_carrier_plan_indices(const ulk_carrier *c, const ulk_carrier_mode *mode, const double *m_rad,
                             double pt_n0_dbhz, ulk_carrier_plan *out)
{
    if (!c || !mode || !m_rad || !out) return ULK_EINVAL;
    memset(out, 0, sizeof *out);
    ulk_chan_term t[ULK_SPLIT_MAX];
    int idx[ULK_CH_N] = {-1, -1, -1}, pilot_idx = -1, n = 0;
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        if (!mode->on[ch]) continue;
        if (!channel_defined(c, ch)) return ULK_EINVAL;
        if (ch == ULK_CH_DATA) {
            ulk_chan_term d, p;
            data_terms(c, m_rad[ch], &d, &p);
            idx[ch] = n;
            t[n++] = d;
            if (c->has_pilot) { pilot_idx = n; t[n++] = p; }
        } else {
            idx[ch] = n;
            t[n].kind = ch == ULK_CH_VOICE ? ULK_CHAN_SINE : ULK_CHAN_BINARY;
            t[n++].m_rad = m_rad[ch];
        }
    }
    ulk_power_split s;
    ulk_power_split_compute(t, n, &s);
    out->carrier = s.carrier;
    for (int ch = 0; ch < ULK_CH_N; ch++) out->useful[ch] = idx[ch] >= 0 ? s.useful[idx[ch]] : 0.0;
    out->pilot = pilot_idx >= 0 ? s.useful[pilot_idx] : 0.0;
    out->intermod = s.intermod;
    out->min_margin_db = NAN;
    if (isnan(pt_n0_dbhz)) return 0;
    double mn = HUGE_VAL;
    if (c->has_loop) {
        out->has_loop_margin = 1;
        out->loop_snr_db = pt_n0_dbhz + db(out->carrier) - db(c->loop_bw_hz);
        out->loop_margin_db = out->loop_snr_db - c->loop_snr_req_db;
        out->n_margins++;
        if (out->loop_margin_db < mn) mn = out->loop_margin_db;
    }
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        if (!mode->on[ch]) continue;
        int has = ch == ULK_CH_DATA ? c->has_data_need : ch == ULK_CH_VOICE ? c->has_voice_need
                                                                            : c->has_ranging_need;
        if (!has) continue;
        double need = ch == ULK_CH_DATA ? c->data_ebn0_req_db
                    : ch == ULK_CH_VOICE ? c->voice_pn0_req_dbhz : c->ranging_pn0_req_dbhz;
        double avail = pt_n0_dbhz + db(out->useful[ch]);
        if (ch == ULK_CH_DATA) avail -= db(ulk_ratio_to_double(c->data_rb));
        out->has_margin[ch] = 1;
        out->avail[ch] = avail;
        out->margin_db[ch] = avail - need;
        out->n_margins++;
        if (out->margin_db[ch] < mn) mn = out->margin_db[ch];
    }
    if (out->n_margins) out->min_margin_db = mn;
    return 0;
}

/* ------------------------------------------------------------------ the solver */

#define SOLVE_STEP 0.01
#define SOLVE_MAX_POINTS 40000000.0

int ulk_carrier_solve(const ulk_carrier *c, const ulk_carrier_mode *mode, double pt_n0_dbhz,
                      double *m_out, ulk_carrier_plan *plan_out)
{
    if (!c || !mode || !m_out || isnan(pt_n0_dbhz)) return ULK_EINVAL;
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        m_out[ch] = 0;
        if (mode->on[ch] && !channel_defined(c, ch)) return ULK_EINVAL;
    }
    /* Needs in dB with the power-independent parts folded in: margin = K + fraction dB. */
    int need[ULK_CH_N] = {mode->on[0] && c->has_data_need, mode->on[1] && c->has_voice_need,
                          mode->on[2] && c->has_ranging_need};
    if (!c->has_loop && !need[0] && !need[1] && !need[2]) return ULK_EINVAL;
    double K[ULK_CH_N] = {0}, Kc = 0;
    if (c->has_loop) Kc = pt_n0_dbhz - db(c->loop_bw_hz) - c->loop_snr_req_db;
    if (need[0]) K[0] = pt_n0_dbhz - db(ulk_ratio_to_double(c->data_rb)) - c->data_ebn0_req_db;
    if (need[1]) K[1] = pt_n0_dbhz - c->voice_pn0_req_dbhz;
    if (need[2]) K[2] = pt_n0_dbhz - c->ranging_pn0_req_dbhz;

    /* Lattice of each channel: j * 0.01 rad for j in [lo_j, hi_j]; a channel that is off
     * has the single point 0 with L0 = L1 = 0 dB (it does not scale the others). */
    long lo[ULK_CH_N], cnt[ULK_CH_N];
    double total = 1;
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        if (!mode->on[ch]) { lo[ch] = 0; cnt[ch] = 1; continue; }
        long a = (long)ceil(c->bound_lo[ch] / SOLVE_STEP - 1e-9);
        long b = (long)floor(c->bound_hi[ch] / SOLVE_STEP + 1e-9);
        if (b < a) return ULK_EINVAL;
        lo[ch] = a;
        cnt[ch] = b - a + 1;
        total *= (double)cnt[ch];
    }
    if (total > SOLVE_MAX_POINTS) return ULK_ELIMIT;
    double *L0[ULK_CH_N], *L1[ULK_CH_N];
    size_t ntab = (size_t)(cnt[0] + cnt[1] + cnt[2]);
    double *tab = ulk_malloc(2 * ntab * sizeof(double));
    if (!tab) return ULK_ENOMEM;
    double *p = tab;
    for (int ch = 0; ch < ULK_CH_N; ch++) {
        L0[ch] = p; p += cnt[ch];
        L1[ch] = p; p += cnt[ch];
        for (long j = 0; j < cnt[ch]; j++) {
            if (!mode->on[ch]) { L0[ch][j] = L1[ch][j] = 0; continue; }
            double m = (double)(lo[ch] + j) * SOLVE_STEP, f0, f1;
            if (ch == ULK_CH_DATA) {
                ulk_chan_term d, pl;
                data_terms(c, m, &d, &pl);
                double d0, d1, p0 = 1;
                ulk_chan_fractions(d.kind, d.m_rad, &d0, &d1);
                if (c->has_pilot) ulk_chan_fractions(pl.kind, pl.m_rad, &p0, NULL);
                f0 = d0 * p0;
                f1 = d1 * p0; /* the pilot's residual scales the data line too */
            } else {
                ulk_chan_fractions(ch == ULK_CH_VOICE ? ULK_CHAN_SINE : ULK_CHAN_BINARY, m, &f0, &f1);
            }
            L0[ch][j] = db(f0);
            L1[ch][j] = db(f1);
        }
    }
    double best = -HUGE_VAL;
    long bj[ULK_CH_N] = {0, 0, 0};
    int found = 0;
    for (long a = 0; a < cnt[0]; a++) {
        for (long b = 0; b < cnt[1]; b++) {
            double l0ab = L0[0][a] + L0[1][b];
            for (long r = 0; r < cnt[2]; r++) {
                double mn = HUGE_VAL, v;
                if (c->has_loop) { v = Kc + l0ab + L0[2][r]; if (v < mn) mn = v; }
                if (need[0]) { v = K[0] + L1[0][a] + L0[1][b] + L0[2][r]; if (v < mn) mn = v; }
                if (need[1]) { v = K[1] + L0[0][a] + L1[1][b] + L0[2][r]; if (v < mn) mn = v; }
                if (need[2]) { v = K[2] + l0ab + L1[2][r]; if (v < mn) mn = v; }
                if (!found || mn > best) { best = mn; bj[0] = a; bj[1] = b; bj[2] = r; found = 1; }
            }
        }
    }
    ulk_free(tab);
    for (int ch = 0; ch < ULK_CH_N; ch++)
        m_out[ch] = mode->on[ch] ? (double)(lo[ch] + bj[ch]) * SOLVE_STEP : 0.0;
    if (plan_out) return ulk_carrier_plan_indices(c, mode, m_out, pt_n0_dbhz, plan_out);
    return 0;
}

/* ------------------------------------------------------------------ exact phases */

/* Cycles per sample of a frequency f at sample rate fs, as an exact fraction num/den with
 * 0 <= num < den (the whole cycles drop out of the phase). Returns 0 or ULK_ELIMIT. */
typedef struct {
    int64_t step, den, acc; /* phase = acc / den cycles, acc in [0, den) */
} phase_acc;

static int phase_init(phase_acc *p, ulk_ratio f, ulk_ratio fs)
{
    ulk_ratio q;
    memset(p, 0, sizeof *p);
    if (f.num == 0) { p->den = 1; return 0; }
    int rc = ulk_ratio_div(f, fs, &q);
    if (rc) return ULK_ELIMIT;
    int64_t s = q.num % q.den;
    if (s < 0) s += q.den;
    p->step = s;
    p->den = q.den;
    return 0;
}

static inline void phase_next(phase_acc *p)
{
    p->acc += p->step; /* both below 2^62: no overflow */
    if (p->acc >= p->den) p->acc -= p->den;
}

static inline double phase_frac(const phase_acc *p) { return (double)p->acc / (double)p->den; }

/* Phase at sample i directly: (i * step) mod den, in 128-bit arithmetic. */
static double phase_at(const phase_acc *p, uint64_t i)
{
    __int128 v = ((__int128)(i % (uint64_t)p->den) * p->step) % p->den;
    return (double)(int64_t)v / (double)p->den;
}

int ulk_voice_tone_phase(ulk_ratio fv, ulk_ratio dev, ulk_ratio fa, ulk_ratio fs, uint64_t i,
                         double *phase_rad)
{
    phase_acc pv, pa;
    if (!phase_rad || fs.num <= 0 || fa.num <= 0) return ULK_EINVAL;
    if (phase_init(&pv, fv, fs) || phase_init(&pa, fa, fs)) return ULK_ELIMIT;
    double beta = ulk_ratio_to_double(dev) / ulk_ratio_to_double(fa);
    *phase_rad = 2 * M_PI * phase_at(&pv, i) + beta * (1.0 - cos(2 * M_PI * phase_at(&pa, i)));
    return 0;
}

/* ------------------------------------------------------------------ the generator */

#define CGEN_CHUNK 4096

struct ulk_cgen {
    const ulk_carrier *c;
    const ulk_carrier_mode *mode;
    ulk_cgen_data_fn data_fn;
    void *data_user;
    uint64_t n_samples, pos;
    int done;
    /* data */
    double m_data;
    float *dbuf;
    /* voice */
    double m_voice, beta;
    phase_acc pv, pa;
    ulk_vaudio *va;   /* audio from a file (NULL: the test tone) */
    double *vcyc;     /* its phase term per sample of a chunk, cycles */
    /* ranging: chip k = floor(i * chip_rate / fs) mod N, kept as count + remainder */
    double m_ranging;
    uint8_t *chips;
    uint64_t period, chip;
    int64_t chip_num, chip_den, chip_rem;
    /* offset */
    int has_offset;
    phase_acc po;
};

void ulk_cgen_destroy(ulk_cgen *g)
{
    if (!g) return;
    ulk_free(g->dbuf);
    ulk_free(g->chips);
    ulk_vaudio_destroy(g->va);
    ulk_free(g->vcyc);
    ulk_free(g);
}

int ulk_cgen_create(const ulk_cgen_config *cfg, ulk_cgen **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!cfg || !out || !cfg->carrier || !cfg->mode)
        return ulk_fail(diag, ULK_EINVAL, "carrier generator: missing configuration");
    const ulk_carrier *c = cfg->carrier;
    const ulk_carrier_mode *mo = cfg->mode;
    if (cfg->fs.num <= 0 || cfg->fs.den <= 0)
        return ulk_fail(diag, ULK_EINVAL, "carrier generator: the sample rate must be > 0");
    for (int ch = 0; ch < ULK_CH_N; ch++)
        if (mo->on[ch] && !channel_defined(c, ch))
            return ulk_fail(diag, ULK_EINVAL, "mode %s: channel %s is not defined in the carrier section",
                            mo->name ? mo->name : "?", ulk_channel_name((ulk_channel)ch));
    if (mo->on[ULK_CH_DATA] && !cfg->data_fn)
        return ulk_fail(diag, ULK_EINVAL, "mode %s: data is on but no data source was given",
                        mo->name ? mo->name : "?");
    ulk_cgen *g = ulk_calloc(1, sizeof *g);
    if (!g) return ulk_fail(diag, ULK_ENOMEM, "carrier generator: out of memory");
    g->c = c;
    g->mode = mo;
    g->data_fn = cfg->data_fn;
    g->data_user = cfg->data_user;
    g->n_samples = cfg->n_samples;
    int rc = 0;
    if (mo->on[ULK_CH_DATA]) {
        g->m_data = mo->m_rad[ULK_CH_DATA];
        g->dbuf = ulk_malloc(CGEN_CHUNK * sizeof(float));
        if (!g->dbuf) { rc = ULK_ENOMEM; goto fail; }
    }
    if (mo->on[ULK_CH_VOICE]) {
        g->m_voice = mo->m_rad[ULK_CH_VOICE];
        if (c->voice_audio) {
            if (phase_init(&g->pv, c->voice_fv_hz, cfg->fs)) { rc = ULK_ELIMIT; goto fail; }
            int vr = ulk_vaudio_create(c->voice_audio, c->voice_audio_channel, cfg->fs,
                                       ulk_ratio_to_double(c->voice_dev_hz), &g->va, diag);
            if (vr) {
                ulk_cgen_destroy(g);
                return vr; /* the reason, naming the file, is in diag */
            }
            g->vcyc = ulk_malloc(CGEN_CHUNK * sizeof(double));
            if (!g->vcyc) { rc = ULK_ENOMEM; goto fail; }
        } else {
            g->beta = ulk_ratio_to_double(c->voice_dev_hz) / ulk_ratio_to_double(c->voice_tone_hz);
            if (phase_init(&g->pv, c->voice_fv_hz, cfg->fs) || phase_init(&g->pa, c->voice_tone_hz, cfg->fs)) {
                rc = ULK_ELIMIT;
                goto fail;
            }
        }
    }
    if (mo->on[ULK_CH_RANGING]) {
        g->m_ranging = mo->m_rad[ULK_CH_RANGING];
        ulk_ratio q;
        if (ulk_ratio_div(c->chip_rate, cfg->fs, &q)) { rc = ULK_ELIMIT; goto fail; }
        g->chip_num = q.num;
        g->chip_den = q.den;
        int mr = ulk_mls_generate(c->poly_exps, c->n_poly_exps, &g->period, &g->chips);
        if (mr) { rc = mr; goto fail; }
    }
    if (c->offset_hz.num != 0) {
        g->has_offset = 1;
        if (phase_init(&g->po, c->offset_hz, cfg->fs)) { rc = ULK_ELIMIT; goto fail; }
    }
    *out = g;
    return 0;
fail:
    ulk_cgen_destroy(g);
    if (rc == ULK_ENOMEM) return ulk_fail(diag, rc, "carrier generator: out of memory");
    if (rc == ULK_ELIMIT)
        return ulk_fail(diag, rc, "carrier generator: rates too fine for exact phase arithmetic "
                                  "(or ranging degree above %d)", ULK_MLS_MAX_DEGREE);
    return ulk_fail(diag, rc, "carrier generator: the ranging polynomial is not usable");
}

long ulk_cgen_run(ulk_cgen *g, float *iq, size_t max)
{
    if (!g || !iq) return ULK_EINVAL;
    if (g->done) return 0;
    if (max > CGEN_CHUNK) max = CGEN_CHUNK;
    if (g->n_samples && g->pos + max > g->n_samples) max = (size_t)(g->n_samples - g->pos);
    const ulk_carrier_mode *mo = g->mode;
    size_t n = max;
    if (mo->on[ULK_CH_DATA]) {
        long got = g->data_fn(g->data_user, g->dbuf, max);
        if (got < 0) return got;
        if ((size_t)got < n) n = (size_t)got;
    }
    if (n == 0) { g->done = 1; return 0; }
    if (g->va) {
        long vr = ulk_vaudio_run(g->va, g->vcyc, n);
        if (vr < 0) return vr;
    }
    for (size_t i = 0; i < n; i++) {
        double ph = 0;
        if (mo->on[ULK_CH_DATA]) ph += g->m_data * (double)g->dbuf[i];
        if (mo->on[ULK_CH_VOICE]) {
            double th = g->va ? 2 * M_PI * (phase_frac(&g->pv) + g->vcyc[i])
                              : 2 * M_PI * phase_frac(&g->pv) + g->beta * (1.0 - cos(2 * M_PI * phase_frac(&g->pa)));
            ph += g->m_voice * sin(th);
            phase_next(&g->pv);
            phase_next(&g->pa);
        }
        if (mo->on[ULK_CH_RANGING]) {
            ph += g->m_ranging * (double)ulk_mls_chip(g->chips[g->chip]);
            /* next sample: chip count advances by floor((rem + num) / den) */
            int64_t r = g->chip_rem + g->chip_num; /* both < 2^62 */
            if (r >= g->chip_den) {
                uint64_t adv = (uint64_t)(r / g->chip_den);
                r %= g->chip_den;
                g->chip = (g->chip + adv % g->period) % g->period;
            }
            g->chip_rem = r;
        }
        if (g->has_offset) {
            ph += 2 * M_PI * phase_frac(&g->po);
            phase_next(&g->po);
        }
        iq[2 * i] = (float)cos(ph);
        iq[2 * i + 1] = (float)sin(ph);
    }
    g->pos += n;
    if (g->n_samples && g->pos >= g->n_samples) g->done = 1;
    return (long)n;
}
