/* src/impair.c - channel simulator: resampling for clock error (windowed sinc), lead-in
 * delay, gain, inversion, DC and seeded white Gaussian noise (see include/ulk/impair.h). */
#include <math.h>
#include <string.h>

#include "ulk/impair.h"
#include "ulk/limits.h"
#include "util.h"

#define HALF 16                /* taps each side */
#define PHASES 512
#define OUTBUF 4096

struct ulk_impair {
    ulk_impair_config c;
    double ratio;              /* input samples per output sample */
    double gain, sigma;
    ulk_impair_sink sink;
    void *user;
    float *tab;                /* (PHASES + 1) x (2 HALF) */
    float *ring;               /* input history */
    uint64_t rcap, n_in;       /* samples pushed */
    uint64_t m;                /* next output index (signal part) */
    uint64_t delay_left;
    float out[OUTBUF];
    size_t nout;
    uint64_t rng;
    int have_spare;
    double spare;
    int status, finished;
};

static uint64_t next_u64(ulk_impair *p)
{
    /* splitmix64: a fixed, documented generator so a seed gives the same noise everywhere */
    uint64_t z = (p->rng += 0x9E3779B97F4A7C15ULL);
    z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ULL;
    z = (z ^ (z >> 27)) * 0x94D049BB133111EBULL;
    return z ^ (z >> 31);
}

static double gauss(ulk_impair *p)
{
    if (p->have_spare) { p->have_spare = 0; return p->spare; }
    double u1 = ((next_u64(p) >> 11) + 0.5) * (1.0 / 9007199254740992.0);
    double u2 = ((next_u64(p) >> 11) + 0.5) * (1.0 / 9007199254740992.0);
    double r = sqrt(-2 * log(u1));
    p->spare = r * sin(2 * M_PI * u2);
    p->have_spare = 1;
    return r * cos(2 * M_PI * u2);
}

static int emit(ulk_impair *p, double s)
{
    double v = s + p->c.dc + (p->sigma > 0 ? p->sigma * gauss(p) : 0);
    p->out[p->nout++] = (float)v;
    if (p->nout == OUTBUF) {
        int rc = p->sink(p->out, p->nout, p->user);
        p->nout = 0;
        if (rc < 0 && !p->status) p->status = rc;
    }
    return p->status;
}

int ulk_impair_create(const ulk_impair_config *cfg, ulk_impair_sink sink, void *user, ulk_impair **out,
                      ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!cfg || !sink) return ulk_fail(diag, ULK_EINVAL, "impair: no configuration or output");
    if (!(cfg->fs_hz > 0) || !isfinite(cfg->fs_hz)) return ulk_fail(diag, ULK_EINVAL, "impair: the sample rate must be positive");
    if (!(fabs(cfg->ppm) <= ULK_IMPAIR_MAX_PPM))
        return ulk_fail(diag, ULK_EINVAL, "impair: clock error %g ppm is outside +-%d ppm (by %g ppm)", cfg->ppm,
                        ULK_IMPAIR_MAX_PPM, fabs(cfg->ppm) - ULK_IMPAIR_MAX_PPM);
    if (!(cfg->delay_s >= 0) || cfg->delay_s > 86400) return ulk_fail(diag, ULK_EINVAL, "impair: delay must be 0..86400 s");
    if (cfg->amplitude < 0 || !isfinite(cfg->amplitude)) return ulk_fail(diag, ULK_EINVAL, "impair: amplitude must be >= 0");
    if (!isfinite(cfg->dc)) return ulk_fail(diag, ULK_EINVAL, "impair: DC offset must be a number");
    if (cfg->add_noise) {
        if (!isfinite(cfg->ebn0_db)) return ulk_fail(diag, ULK_EINVAL, "impair: E_b/N_0 must be a number of dB");
        if (!(cfg->pd > 0) || !isfinite(cfg->pd)) return ulk_fail(diag, ULK_EINVAL, "impair: data power P_d must be positive");
        if (!(cfg->bit_rate > 0) || !isfinite(cfg->bit_rate)) return ulk_fail(diag, ULK_EINVAL, "impair: bit rate must be positive");
    }
    ulk_impair *p = ulk_calloc(1, sizeof *p);
    if (!p) return ulk_fail(diag, ULK_ENOMEM, "impair: out of memory");
    p->c = *cfg;
    p->sink = sink;
    p->user = user;
    p->ratio = 1.0 + cfg->ppm * 1e-6;
    p->gain = (cfg->amplitude > 0 ? cfg->amplitude : 1.0) * (cfg->invert ? -1.0 : 1.0);
    if (cfg->add_noise) {
        double pd_out = cfg->pd * p->gain * p->gain;
        /* E_b/N_0 = P_d f_s / (2 sigma^2 R_b): common practice: real samples at rate f_s carry a two-sided density N_0/2 over f_s, so
         * sigma^2 = N_0 f_s / 2 and E_b = P_d / R_b (e.g. Proakis, Digital Communications, 4th ed.,
         * chapter 5, from memory; docs/spec/subbit.md section 5) */
        p->sigma = sqrt(pd_out * cfg->fs_hz / (2 * cfg->bit_rate * pow(10, cfg->ebn0_db / 10)));
    }
    p->rng = cfg->seed * 0xD1B54A32D192ED03ULL + 1;
    p->delay_left = (uint64_t)llround(cfg->delay_s * cfg->fs_hz);
    p->rcap = 4096;
    p->tab = ulk_malloc((size_t)(PHASES + 1) * 2 * HALF * sizeof *p->tab);
    p->ring = ulk_calloc(p->rcap, sizeof *p->ring);
    if (!p->tab || !p->ring) {
        ulk_impair_destroy(p);
        return ulk_fail(diag, ULK_ENOMEM, "impair: out of memory");
    }
    /* tab[ph][k]: weight of input sample (base - HALF + 1 + k) for fractional position ph/PHASES */
    for (int ph = 0; ph <= PHASES; ph++) {
        double fr = (double)ph / PHASES;
        for (int k = 0; k < 2 * HALF; k++) {
            double x = (double)(k - HALF + 1) - fr; /* distance from the wanted position */
            double s = fabs(x) < 1e-12 ? 1.0 : sin(M_PI * x) / (M_PI * x);
            double u = (x + HALF) / (2.0 * HALF); /* 0..1 across the window */
            double w = (u <= 0 || u >= 1) ? 0 : 0.42 - 0.5 * cos(2 * M_PI * u) + 0.08 * cos(4 * M_PI * u);
            p->tab[ph * 2 * HALF + k] = (float)(s * w);
        }
    }
    *out = p;
    return 0;
}

/* Input sample i (0 outside the pushed range). */
static inline float in_at(const ulk_impair *p, int64_t i)
{
    if (i < 0 || (uint64_t)i >= p->n_in) return 0.0f;
    return p->ring[(uint64_t)i % p->rcap];
}

/* Produces the signal-part outputs whose window lies below `limit` input samples. */
static void produce(ulk_impair *p, uint64_t limit, int final)
{
    while (p->delay_left > 0 && !p->status) { emit(p, 0.0); p->delay_left--; }
    uint64_t total = final ? (uint64_t)ceil((double)p->n_in / p->ratio - 1e-9) : UINT64_MAX;
    while (!p->status && p->m < total) {
        double pos = (double)p->m * p->ratio;
        int64_t base = (int64_t)floor(pos);
        if (!final && (uint64_t)(base + HALF) >= limit) break;
        double fr = (pos - (double)base) * PHASES;
        int ph = (int)fr;
        double a = fr - ph;
        const float *t0 = p->tab + ph * 2 * HALF, *t1 = t0 + 2 * HALF;
        double acc = 0;
        for (int k = 0; k < 2 * HALF; k++) {
            double wgt = t0[k] + a * (t1[k] - t0[k]);
            acc += wgt * in_at(p, base - HALF + 1 + k);
        }
        emit(p, p->gain * acc);
        p->m++;
    }
}

int ulk_impair_push(ulk_impair *p, const float *x, size_t n)
{
    if (!p || (n && !x)) return ULK_EINVAL;
    if (p->finished) return ULK_EINVAL;
    for (size_t i = 0; i < n && !p->status; i++) {
        p->ring[p->n_in % p->rcap] = isfinite(x[i]) ? x[i] : 0.0f;
        p->n_in++;
        /* keep the ring from overrunning the window still needed: produce as we go */
        if ((p->n_in & 1023) == 0) produce(p, p->n_in, 0);
    }
    produce(p, p->n_in, 0);
    return p->status;
}

int ulk_impair_finish(ulk_impair *p)
{
    if (!p) return ULK_EINVAL;
    if (p->finished) return p->status;
    p->finished = 1;
    produce(p, p->n_in, 1);
    if (!p->status && p->nout) {
        int rc = p->sink(p->out, p->nout, p->user);
        p->nout = 0;
        if (rc < 0) p->status = rc;
    }
    return p->status;
}

double ulk_impair_sigma(const ulk_impair *p) { return p ? p->sigma : 0; }

void ulk_impair_destroy(ulk_impair *p)
{
    if (!p) return;
    ulk_free(p->tab);
    ulk_free(p->ring);
    ulk_free(p);
}
