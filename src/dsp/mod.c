/* src/mod.c - PSK on a subcarrier, sample-exact (docs/spec/subbit.md section 4).
 *
 *     s_i = A * d_j * c(t_i) + A_p * sin(2 pi f_p t_i),   t_i = i / f_s,  j = floor(t_i R_s)
 *
 * Everything that decides *which* value a sample takes is integer arithmetic on i:
 *   - sub-bit runs: sub-bit j covers samples [ceil(j b/a), ceil((j+1) b/a)) where
 *     a/b = R_s/f_s reduced; the boundary is advanced with a quotient/remainder pair, so a
 *     sample exactly on a sub-bit start falls in the new sub-bit;
 *   - tone phases: a tone of frequency f has phase i*c/d cycles with c/d = f/f_s reduced;
 *     the square half is "2 * (i*c mod d) < d", so a sample exactly on an edge takes the
 *     new half.
 * The values come from one of two generators per tone:
 *   - table: the tone is periodic in the sample index with period d; when d is small the
 *     table holds d + MOD_BLOCK consecutive samples, so any block is one contiguous slice;
 *   - rotation: for long periods, each block is anchored at its exact phase p0 (one sin and
 *     one cos per block) and sample k is sin(th0) cos(ph_k) + cos(th0) sin(ph_k), with
 *     ph_k = 2 pi (k c mod d)/d precomputed once: no error accumulates across blocks, and
 *     within one block the error is a few units of double rounding (far below 1e-6).
 * The hot loop is then a multiply-add over contiguous float arrays, which the compiler
 * vectorises. The modulator holds O(MOD_BLOCK + table) memory whatever the upload's length.
 */
/* The hot loops below are written to be vectorised; the project builds with -O2, where GCC 12
 * vectorises only loops of known trip count, so this file asks for GCC's full vectoriser. */
#if defined(__GNUC__) && !defined(__clang__)
#pragma GCC optimize("O3")
#endif

#include <math.h>
#include <string.h>

#include "ulk/mod.h"
#include "ulk/subbit.h"
#include "util.h"

#define MOD_BLOCK 4096               /* samples per inner block; buffers stay in cache */
#define MOD_SUBBITS 4096             /* sub-bits pulled from the stream at a time */
#define MOD_TABLE_MAX ((uint64_t)1 << 20) /* longest period kept as a table (4 MiB of floats) */
#define LIM62 ((__int128)1 << 62)
#define LVL_PAD 8                    /* floats per level store; lvl has this much slack */

typedef float v8f __attribute__((vector_size(32)));

static const double TWO_PI = 6.283185307179586476925286766559;

typedef struct {
    int on;
    int square;
    uint64_t c, d;   /* phase advance c/d cycles per sample, 0 <= c < d */
    float *table;    /* table mode: d + MOD_BLOCK samples, amplitude included */
    uint64_t off;    /* table mode: next sample index mod d */
    uint64_t p;      /* rotation mode: phase numerator of the next sample, i*c mod d */
    double amp;
    double *rs, *rc; /* rotation mode (sine): amp*sin and amp*cos of 2 pi (k c mod d)/d */
    float *scratch;  /* rotation mode: the block's samples */
} tone;

struct ulk_mod {
    const ulk_upload *u;
    ulk_stream *st;
    uint64_t n_subbits;   /* L */
    uint64_t n_samples;   /* ceil(L b / a) */
    uint64_t pos;         /* next sample index */
    uint64_t a, b;        /* R_s / f_s = a / b, reduced */
    uint64_t bq, br;      /* b = bq * a + br */
    uint64_t j;           /* current sub-bit */
    uint64_t nq, nr;      /* (j+1) * b = nq * a + nr */
    uint64_t next_start;  /* first sample of sub-bit j+1 */
    int nrzm;
    float dprev;          /* nrz-m: d_{j-1}; d_{-1} = +1 */
    float level;          /* d_j */
    uint8_t *sb;          /* sub-bit buffer */
    float *sbl;           /* line levels of the sub-bits in sb */
    size_t sb_n, sb_k;
    float *lvl;           /* per-sample level of the block (+ LVL_PAD slack) */
    tone car, pil;
};

static unsigned __int128 gcd_u128(unsigned __int128 x, unsigned __int128 y)
{
    while (y) { unsigned __int128 t = x % y; x = y; y = t; }
    return x ? x : 1;
}

/* x / y as a reduced fraction of two integers below 2^62. */
static int ratio_quot(ulk_ratio x, ulk_ratio y, uint64_t *num, uint64_t *den)
{
    if (x.num < 0 || x.den <= 0 || y.num <= 0 || y.den <= 0) return ULK_EINVAL;
    unsigned __int128 n = (unsigned __int128)x.num * (uint64_t)y.den;
    unsigned __int128 d = (unsigned __int128)x.den * (uint64_t)y.num;
    unsigned __int128 g = gcd_u128(n, d);
    n /= g;
    d /= g;
    if (n >= (unsigned __int128)LIM62 || d >= (unsigned __int128)LIM62) return ULK_ELIMIT;
    *num = (uint64_t)n;
    *den = (uint64_t)d;
    return 0;
}

/* Compares x and y exactly: -1, 0, 1. Both positive with 62-bit parts. */
static int ratio_cmp(ulk_ratio x, ulk_ratio y)
{
    __int128 l = (__int128)x.num * y.den, r = (__int128)y.num * x.den;
    return l < r ? -1 : l > r;
}

/* 2 * (x + y) reduced, or ULK_ELIMIT. y.num == 0 means just 2 * x. */
static int ratio_twice_sum(ulk_ratio x, ulk_ratio y, ulk_ratio *out)
{
    __int128 n = (__int128)x.num * y.den + (__int128)y.num * x.den;
    __int128 d = (__int128)x.den * y.den;
    n *= 2;
    __int128 gx = n, gy = d;
    while (gy) { __int128 t = gx % gy; gx = gy; gy = t; }
    if (gx) { n /= gx; d /= gx; }
    if (n >= LIM62 || d >= LIM62) return ULK_ELIMIT;
    out->num = (int64_t)n;
    out->den = (int64_t)d;
    return 0;
}

double ulk_mod_peak(const ulk_link *l)
{
    return l->amplitude + (l->has_pilot ? l->pilot_amplitude : 0.0);
}

int ulk_mod_check_rate(const ulk_link *l, ulk_ratio fs, ulk_ratio *lowest, ulk_diag *diag)
{
    if (!l || fs.num <= 0 || fs.den <= 0) return ulk_fail(diag, ULK_EINVAL, "sample rate must be > 0");
    ulk_ratio rs = ulk_link_subbit_rate(l), lo, lp;
    /* The data signal's main lobe reaches f_sc + R_s: it must lie below Nyquist. */
    if (ratio_twice_sum(l->fsc, rs, &lo) < 0)
        return ulk_fail(diag, ULK_ELIMIT, "subcarrier and sub-bit rates are too fine for exact arithmetic");
    const char *why = "2 x (subcarrier + sub-bit rate)";
    if (l->has_pilot) {
        ulk_ratio zero = {0, 1};
        if (ratio_twice_sum(l->fp, zero, &lp) < 0)
            return ulk_fail(diag, ULK_ELIMIT, "pilot frequency is too fine for exact arithmetic");
        if (ratio_cmp(lp, lo) > 0) { lo = lp; why = "2 x pilot frequency"; }
    }
    if (lowest) *lowest = lo;
    ulk_ratio hi = {ULK_MOD_MAX_RATE_HZ, 1};
    if (ratio_cmp(fs, hi) > 0) {
        char a[64];
        ulk_ratio_format(fs, a, sizeof a);
        return ulk_fail(diag, ULK_ELIMIT,
                        "sample rate %s Hz is above the highest this tool writes, %d Hz (a mistyped rate "
                        "would start an enormous file)",
                        a, ULK_MOD_MAX_RATE_HZ);
    }
    if (ratio_cmp(fs, lo) < 0) {
        char a[64], b[64], c[64], d[64];
        ulk_ratio_format(fs, a, sizeof a);
        ulk_ratio_format(lo, b, sizeof b);
        ulk_ratio_format(l->fsc, c, sizeof c);
        ulk_ratio_format(rs, d, sizeof d);
        return ulk_fail(diag, ULK_ELIMIT,
                        "sample rate %s Hz is too low for a %s Hz subcarrier at %s sub-bit/s: the lowest "
                        "acceptable rate is %s Hz (%s)",
                        a, c, d, b, why);
    }
    return 0;
}

int ulk_mod_first_sample(const ulk_link *l, ulk_ratio fs, uint64_t j, uint64_t *out)
{
    uint64_t a, b;
    int rc = ratio_quot(ulk_link_subbit_rate(l), fs, &a, &b);
    if (rc < 0) return rc;
    unsigned __int128 x = (unsigned __int128)j * b;
    unsigned __int128 q = x / a + (x % a != 0);
    if (q > UINT64_MAX) return ULK_ELIMIT;
    *out = (uint64_t)q;
    return 0;
}

static void tone_free(tone *t)
{
    ulk_free(t->table);
    ulk_free(t->rs);
    ulk_free(t->rc);
    ulk_free(t->scratch);
}

/* Sets up a tone of frequency f at rate fs: square (+-amp halves) or sine. */
static int tone_init(tone *t, ulk_ratio f, ulk_ratio fs, int square, double amp)
{
    memset(t, 0, sizeof *t);
    t->on = 1;
    t->square = square;
    t->amp = amp;
    int rc = ratio_quot(f, fs, &t->c, &t->d);
    if (rc < 0) return rc;
    t->c %= t->d; /* whole cycles per sample do not change the phase */
    if (t->d <= MOD_TABLE_MAX) {
        size_t len = (size_t)t->d + MOD_BLOCK;
        t->table = ulk_malloc(len * sizeof(float));
        if (!t->table) return ULK_ENOMEM;
        uint64_t q = 0; /* k * c mod d */
        for (size_t k = 0; k < len; k++) {
            if (square) t->table[k] = (float)(2 * q < t->d ? amp : -amp);
            else t->table[k] = (float)(amp * sin(TWO_PI * (double)q / (double)t->d));
            q += t->c;
            if (q >= t->d) q -= t->d;
        }
        return 0;
    }
    t->scratch = ulk_malloc(MOD_BLOCK * sizeof(float));
    if (!t->scratch) return ULK_ENOMEM;
    if (square) return 0;
    t->rs = ulk_malloc(MOD_BLOCK * sizeof(double));
    t->rc = ulk_malloc(MOD_BLOCK * sizeof(double));
    if (!t->rs || !t->rc) return ULK_ENOMEM;
    uint64_t q = 0;
    for (size_t k = 0; k < MOD_BLOCK; k++) {
        double ph = TWO_PI * (double)q / (double)t->d;
        t->rs[k] = amp * sin(ph);
        t->rc[k] = amp * cos(ph);
        q = (uint64_t)(((unsigned __int128)q + t->c) % t->d);
    }
    return 0;
}

/* The tone's next n samples (n <= MOD_BLOCK). */
static const float *tone_block(tone *t, size_t n)
{
    if (t->table) {
        const float *r = t->table + t->off;
        t->off = (t->off + n) % t->d;
        return r;
    }
    float *o = t->scratch;
    const uint64_t c = t->c, d = t->d;
    if (t->square) {
        uint64_t q = t->p;
        const float hi = (float)t->amp, lo = (float)-t->amp;
        for (size_t k = 0; k < n; k++) {
            o[k] = 2 * q < d ? hi : lo;
            q += c;
            if (q >= d) q -= d;
        }
    } else {
        /* anchor at the exact phase p/d; ph_k carries the exact offsets k*c mod d */
        double th = TWO_PI * ((double)t->p / (double)d);
        const double s0 = sin(th), c0 = cos(th);
        const double *restrict rs = t->rs, *restrict rc = t->rc;
        for (size_t k = 0; k < n; k++) o[k] = (float)(s0 * rc[k] + c0 * rs[k]);
    }
    t->p = (uint64_t)(((unsigned __int128)t->p + (unsigned __int128)n * c) % d);
    return o;
}

/* Pulls the next batch of sub-bits and turns them into line levels (section 4). */
static void refill_levels(ulk_mod *m)
{
    m->sb_n = ulk_stream_read(m->st, m->sb, NULL, MOD_SUBBITS);
    m->sb_k = 0;
    const uint8_t *restrict sb = m->sb;
    float *restrict d = m->sbl;
    if (m->nrzm) {
        float prev = m->dprev;
        for (size_t k = 0; k < m->sb_n; k++) {
            if (sb[k]) prev = -prev;
            d[k] = prev;
        }
        m->dprev = prev;
    } else {
        for (size_t k = 0; k < m->sb_n; k++) d[k] = sb[k] ? 1.0f : -1.0f;
    }
}

/* Next sub-bit's line level into m->level (caller ensures j < L). */
static inline void load_level(ulk_mod *m)
{
    if (m->sb_k == m->sb_n) {
        refill_levels(m);
        if (m->sb_n == 0) { m->level = 0; return; } /* cannot happen: L counts the stream */
    }
    m->level = m->sbl[m->sb_k++];
}

void ulk_mod_destroy(ulk_mod *m)
{
    if (!m) return;
    ulk_stream_destroy(m->st);
    ulk_free(m->sb);
    ulk_free(m->sbl);
    ulk_free(m->lvl);
    tone_free(&m->car);
    tone_free(&m->pil);
    ulk_free(m);
}

int ulk_mod_create(const ulk_mod_config *cfg, ulk_mod **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!cfg || !cfg->upload || !out) return ulk_fail(diag, ULK_EINVAL, "modulator: missing configuration");
    const ulk_link *l = &cfg->upload->link;
    if (l->n_subbits < 1 || l->n_subbits > ULK_MAX_SUBBITS || l->bit_rate.num <= 0 || l->fsc.num <= 0)
        return ulk_fail(diag, ULK_EINVAL, "modulator: the upload's link parameters are not valid");
    if (l->has_pilot && l->fp.num <= 0)
        return ulk_fail(diag, ULK_EINVAL, "modulator: the pilot frequency must be > 0");
    int rc = ulk_mod_check_rate(l, cfg->fs, NULL, diag);
    if (rc < 0) return rc;
    if (l->waveform == ULK_WAVE_SQUARE) {
        /* A square subcarrier's odd harmonics are part of its waveform; the third (a third of
         * the fundamental's amplitude) spans 3 f_sc +- R_s. Sampled below twice its top they
         * fold back below Nyquist: the samples are still the square wave's own values, but a
         * receiver that filters to the main lobe sees the folded harmonics as distortion. */
        double fsc = ulk_ratio_to_double(l->fsc), rsd = ulk_ratio_to_double(ulk_link_subbit_rate(l));
        double fsd = ulk_ratio_to_double(cfg->fs);
        if (fsd < 2 * (3 * fsc + rsd))
            ulk_diag_add(diag, ULK_SEV_WARNING, NULL,
                         "square subcarrier: its harmonics alias at this rate (the third harmonic reaches "
                         "3 f_sc + R_s = %g Hz, above f_s / 2 = %g Hz, and folds back); use a sine subcarrier or "
                         "at least %g Hz to keep it below Nyquist",
                         3 * fsc + rsd, fsd / 2, 2 * (3 * fsc + rsd));
    }
    double peak = ulk_mod_peak(l);
    if (cfg->format == ULK_FMT_S16 && peak > 1.0 + 1e-12)
        return ulk_fail(diag, ULK_ELIMIT,
                        "16-bit output would clip: the peak amplitude A + A_p = %g exceeds full scale 1.0 "
                        "(write float output with --format f32, or lower the amplitudes in the dictionary)",
                        peak);

    ulk_mod *m = ulk_calloc(1, sizeof *m);
    if (!m) return ulk_fail(diag, ULK_ENOMEM, "modulator: out of memory");
    m->u = cfg->upload;
    rc = ratio_quot(ulk_link_subbit_rate(l), cfg->fs, &m->a, &m->b);
    if (rc < 0) {
        ulk_mod_destroy(m);
        return ulk_fail(diag, ULK_ELIMIT, "modulator: sample and sub-bit rates are too fine for exact arithmetic");
    }
    m->st = ulk_stream_create(cfg->upload);
    m->sb = ulk_malloc(MOD_SUBBITS);
    m->sbl = ulk_malloc(MOD_SUBBITS * sizeof(float));
    m->lvl = ulk_malloc((MOD_BLOCK + LVL_PAD) * sizeof(float));
    if (!m->st || !m->sb || !m->sbl || !m->lvl) { ulk_mod_destroy(m); return ulk_fail(diag, ULK_ENOMEM, "modulator: out of memory"); }
    m->n_subbits = ulk_stream_length(m->st);
    unsigned __int128 ns = (unsigned __int128)m->n_subbits * m->b;
    ns = ns / m->a + (ns % m->a != 0);
    if (ns > (unsigned __int128)INT64_MAX) {
        ulk_mod_destroy(m);
        return ulk_fail(diag, ULK_ELIMIT, "modulator: the upload is too long for 64-bit sample counts");
    }
    m->n_samples = (uint64_t)ns;
    m->bq = m->b / m->a;
    m->br = m->b % m->a;
    m->nq = m->bq;
    m->nr = m->br;
    m->next_start = m->nq + (m->nr != 0);
    m->nrzm = l->line_code == ULK_LINE_NRZM;
    m->dprev = 1.0f;
    rc = tone_init(&m->car, l->fsc, cfg->fs, l->waveform == ULK_WAVE_SQUARE, l->amplitude);
    if (rc == 0 && l->has_pilot) rc = tone_init(&m->pil, l->fp, cfg->fs, 0, l->pilot_amplitude);
    if (rc < 0) {
        ulk_mod_destroy(m);
        if (rc == ULK_ENOMEM) return ulk_fail(diag, rc, "modulator: out of memory");
        return ulk_fail(diag, rc, "modulator: tone and sample rates are too fine for exact arithmetic");
    }
    if (m->n_subbits > 0) load_level(m);
    *out = m;
    return 0;
}

uint64_t ulk_mod_n_samples(const ulk_mod *m) { return m ? m->n_samples : 0; }
uint64_t ulk_mod_position(const ulk_mod *m) { return m ? m->pos : 0; }

/* Fills lvl[0..n) with the line level of samples pos .. pos+n-1, advancing the sub-bits.
 * A run of one level is stored LVL_PAD floats at a time, overshooting its end into slack
 * that the next run (or nothing) overwrites: runs are ~10 samples, so this beats a
 * per-sample loop by the vector width. */
static void fill_levels(ulk_mod *m, float *restrict lvl, size_t n)
{
    size_t k = 0;
    const uint64_t i0 = m->pos;
    while (k < n) {
        uint64_t end = m->next_start - i0; /* block-relative start of sub-bit j+1 */
        size_t stop = end < n ? (size_t)end : n;
        const float v = m->level;
        const v8f vv = {v, v, v, v, v, v, v, v};
        for (size_t q = k; q < stop; q += LVL_PAD) memcpy(lvl + q, &vv, sizeof vv);
        k = stop;
        if (k == end) {
            m->j++;
            m->nq += m->bq;
            m->nr += m->br;
            if (m->nr >= m->a) { m->nr -= m->a; m->nq++; }
            m->next_start = m->nq + (m->nr != 0);
            if (m->j < m->n_subbits) load_level(m);
        }
    }
}

long ulk_mod_run(ulk_mod *m, float *out, size_t max)
{
    if (!m || !out) return ULK_EINVAL;
    size_t done = 0;
    while (done < max && m->pos < m->n_samples) {
        size_t n = max - done;
        if (n > MOD_BLOCK) n = MOD_BLOCK;
        if ((uint64_t)n > m->n_samples - m->pos) n = (size_t)(m->n_samples - m->pos);
        float *restrict lvl = m->lvl;
        fill_levels(m, lvl, n);
        const float *restrict c = tone_block(&m->car, n);
        float *restrict o = out + done;
        if (m->pil.on) {
            const float *restrict p = tone_block(&m->pil, n);
            for (size_t k = 0; k < n; k++) o[k] = lvl[k] * c[k] + p[k];
        } else {
            for (size_t k = 0; k < n; k++) o[k] = lvl[k] * c[k];
        }
        m->pos += n;
        done += n;
    }
    return (long)done;
}
