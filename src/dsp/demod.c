/* src/demod.c - blind demodulator of the sub-bit profile: samples in, words out; or soft
 * channel symbols out (ulk_demod_create_symbols).
 *
 * The stages (see include/ulk/demod.h and docs/decode.md):
 *   front end   DC blocker, samples kept in a ring of about 3 blocks;
 *   nominal U   each nominal sub-bit window mixed to complex baseband with the nominal
 *               subcarrier: U_m = sum x_i exp(-j 2 pi k i / sps);
 *   block       on a window of 3 blocks: DFT of U_m^2 (data stripped) zoomed on
 *               |f| <= 2 k eps_max -> clock error and subcarrier phase (mod pi) -> the
 *               sub-bit clock theta(i) = i rho + beta, known modulo one half-cycle; the
 *               half-cycle (of 2k) that starts a sub-bit is chosen by sub-bit dump energy;
 *               soft sub-bits of the block's centre are integrate-and-dump values;
 *   pattern     alignment, polarity, ML bit decisions and word synchronisation.
 *
 * Sub-bit clock: theta(i) counts sub-bits at sample i; sub-bit j covers theta in [j, j+1)
 * and the subcarrier phase is 2 pi k theta, so one linear model carries both the timing
 * and the carrier (they are locked by f_sc = k R_s).
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/demod.h"

#define ULK_DEMOD_MAX_FS_HZ 1e9
#define ULK_DEMOD_MAX_SPS 200000
#include "median.h"
#include "util.h"

#define TAB_BITS 12
#define ACQ_MIN_SNR 0.8 /* a^2 / s^2 of the soft values to acquire (see process_block) */
/* Square template: half-width of its ramp at an edge, in subcarrier cycles, once the edges are
 * placed by the block's own samples (sq_refine_edges), and the span around each edge whose
 * samples that fit reads. Square set at 8 dB, 6000-8000 words, +-200 ppm: ramp 0.005 / 0.01
 * with the fit over 0.03 / 0.05: 48 kHz WER 1.21e-2 / 1.20e-2, 50 kHz 1.10e-2 / 1.12e-2,
 * 192 kHz 9.7e-3 / 9.8e-3; a hard template (1e-4) 1.65e-2, 1.20e-2, 1.15e-2. Before the fit (the
 * squared line's clock alone, ramp 0.035) 1.63e-2, 1.42e-2, 1.12e-2. */
#define SQ_EDGE_CYCLES 0.005
#define SQ_EDGE_FIT 0.03
#define TAB_N (1 << TAB_BITS)
#define MAX_SEGS_NOTE 0

/* A sample near an edge of the square template: its value, its signed distance from the edge
 * in cycles (positive: after it, where the template takes the sign o), the half-cycle after
 * the edge and the template value the sample was first dumped with. */
typedef struct {
    float x, e, c, u, y;
    int8_t o;
    int64_t rel;
} sq_edge_smp;

struct ulk_demod {
    ulk_link l;
    double fs_hz, rs_hz, fsc_hz, sps; /* sps = samples per nominal sub-bit */
    int n, k, W;
    int nrzm, square;
    float pz[ULK_MAX_SUBBITS], po[ULK_MAX_SUBBITS], pidle[ULK_MAX_SUBBITS]; /* +-1 */
    int d_zo;                 /* Hamming distance Z-O */
    float lz[ULK_MAX_SUBBITS], lo[ULK_MAX_SUBBITS], lidle[ULK_MAX_SUBBITS]; /* nrz-m levels from +1 */
    double mden;              /* noiseless |c_O - c_Z|: the margin's unit */
    ulk_demod_options opt;
    double eps_max;
    double acq_pfa;           /* false-alarm probability per block of the acquisition test */
    float tab[TAB_N];         /* sin(2 pi i / TAB_N) */
    float tabcs[2 * TAB_N];   /* cos and sin of 2 pi i / TAB_N, side by side */
    int status;
    int finished;
    int words_out;            /* 0: no word stage output (ulk_demod_create_symbols) */

    /* front end */
    double dc, dc_alpha;
    int dc_init;
    float *xb;
    uint64_t xcap;
    uint64_t n_in;            /* samples pushed */

    /* nominal baseband windows */
    uint64_t mix_ph, mix_inc; /* mixer phase and step, cycles x 2^64 */
    size_t xw;                /* n_in % xcap, kept without a division */

    /* baseband slots (sine subcarrier without pilot): the samples mixed with the nominal
     * subcarrier and summed over slots of Ls = sps / S samples; everything after works on
     * slots, not samples */
    int slot_path;
    int Lsi;                  /* samples per slot: slot j holds samples [j Lsi, (j + 1) Lsi) */
    double Ls;                /* the same as a double */
    double inv_Lsi;           /* 1 / Lsi */
    int fill;                 /* samples in the open slot */
    float z_re, z_im, z_sx;   /* the open slot (z_sx: its samples' sum, for the DC blocker) */
    float *zre, *zim;         /* closed slots, ring of scap */
    uint64_t scap, s_cnt;     /* slots closed */
    uint64_t s_w;             /* s_cnt % scap */
    uint64_t u_next;          /* first slot of U window u_cnt */
    double dc_sx;             /* samples summed since the DC level last moved */
    int dc_n, dc_every;       /* their count, and how many between moves */
    double dc_step;           /* the one-pole step over dc_every samples */
    double dc_inv;            /* 1 / dc_every */
    double *rpre, *qpre;      /* scratch: prefix sums over the window's slots */
    uint64_t rcap;
    double u_re, u_im;
    uint64_t u_cnt;           /* windows completed */
    uint64_t u_end;           /* first sample of window u_cnt + 1 */
    uint64_t u_samples;       /* samples in the current window */
    double *ure, *uim;
    uint64_t ucap;

    /* blocks */
    int B;
    double L;                 /* samples per block */
    uint64_t blk;             /* next block to process */
    double *sre, *sim;        /* U^2 of the window */
    double *dre, *dim;        /* its sums over D sub-bits (the decimated search) */
    uint64_t n_at_edge;       /* locked blocks whose clock estimate hit the search limit */
    double *ph, *ch;          /* half-cycle partials and template energies (+1 for prefix) */
    double *qh;               /* half-cycle partials with the quadrature template */
    uint64_t hcap;
    sq_edge_smp *esm;         /* square: samples near the template's edges (block scratch) */
    size_t ecap;
    float *yblk;              /* soft values of one block */
    double *tblk;
    uint64_t ycap;
    double *qacc;             /* 2k */
    int prev_locked;
    int flying;               /* the last block was demodulated on the previous clock */
    double prev_rho, prev_beta;
    double amp;               /* running amplitude estimate of the soft values */
    double a_ref, nsr_ref;    /* reference amplitude and its noise-to-signal ratio */
    double inv_aref;          /* 1 / a_ref (1 while there is none) */
    int run_n;                /* locked blocks in the current run */
    double run_t0, run_th0, r_w, r_x, r_y, r_xx, r_xy; /* weighted fit of theta(t) */
    double fit_sum, fit_w;    /* clock error of finished runs, weighted */

    /* pilot */
    int pilot_on;
    double fp_hz;

    /* pattern stage */
    float *pv;
    float *py;                /* raw soft value of the sub-bit (for the estimates) */
    double *pt;
    uint64_t pcap, lag;
    uint64_t cnt, p;
    uint64_t min_start;       /* earliest sub-bit a next word may start at */
    double M[ULK_MAX_SUBBITS][2];
    int idle_run, after_word;
    int locked, lock_a;       /* group alignment locked by an accepted word (see lock_ok) */
    double lock_pol;
    uint64_t n_ambiguous;     /* words whose alignment could not be decided */
    double *al_ci, *al_cz, *al_co; /* the alignment test's group correlations */
    int have_last;
    double last_t;

    /* estimates */
    double s2, s4;
    uint64_t ns;
    double eps_sum, eps_w;    /* all locked blocks */
    double eps_isum, eps_iw;  /* interior blocks (both neighbours locked) */
    double eps_pend, w_pend;  /* the last block, until its successor is known */
    int pend_interior;
    int signal_found;
    uint64_t n_subbits, n_truncated, n_erasures;
    int have_emit;
    double last_emit_pos;     /* sample position of the last sub-bit start handed on */

    /* words */
    ulk_demod_word *words;
    size_t n_words, cap_words;
};

/* ---------------------------------------------------------------- helpers */

static inline float tsin(const ulk_demod *d, double cycles)
{
    /* cycles in [0, 1) */
    int i = (int)(cycles * TAB_N);
    return d->tab[i & (TAB_N - 1)];
}

static inline float tcos(const ulk_demod *d, double cycles)
{
    int i = (int)(cycles * TAB_N) + TAB_N / 4;
    return d->tab[i & (TAB_N - 1)];
}

static uint64_t blk_start(const ulk_demod *d, uint64_t b) { return (uint64_t)ceil((double)b * d->L); }

static uint64_t pow2_at_least(uint64_t x)
{
    uint64_t p = 1;
    while (p < x) p <<= 1;
    return p;
}

/* First sample of slot s, and the slot holding sample i. */
static uint64_t slot_first(const ulk_demod *d, uint64_t s) { return s * (uint64_t)d->Lsi; }
static uint64_t slot_of(const ulk_demod *d, uint64_t i)
{
    if (d->Lsi == 1) return i;
    uint64_t s = (uint64_t)((double)i * d->inv_Lsi); /* a multiply, corrected: no division */
    while (s > 0 && s * (uint64_t)d->Lsi > i) s--;
    while ((s + 1) * (uint64_t)d->Lsi <= i) s++;
    return s;
}

static int64_t floordiv(int64_t a, int64_t b)
{
    int64_t q = a / b;
    if ((a % b) && ((a < 0) != (b < 0))) q--;
    return q;
}

static void set_status(ulk_demod *d, int st)
{
    if (!d->status) d->status = st;
}

/* ---------------------------------------------------------------- word output */

static void emit_word(ulk_demod *d, const ulk_demod_word *w)
{
    if (!d->words_out) return; /* a symbol front end: its word stage only measures */
    if (d->opt.on_word) {
        d->opt.on_word(w, d->opt.user);
        return;
    }
    if (d->n_words == d->cap_words) {
        size_t nc = d->cap_words ? d->cap_words * 2 : 16;
        ulk_demod_word *nw = ulk_realloc(d->words, nc * sizeof *nw);
        if (!nw) { set_status(d, ULK_ENOMEM); return; }
        d->words = nw;
        d->cap_words = nc;
    }
    d->words[d->n_words++] = *w;
}

/* ---------------------------------------------------------------- pattern stage */

/* Soft values (coherent levels y_j) are kept raw in the ring and scaled at use by the
 * reference amplitude, taken from the most coherent block so far: a block that holds the
 * signal only in part under-estimates it, and the noise beside the signal must not be
 * inflated by that. */
static double pattern_scale(const ulk_demod *d) { return d->inv_aref; }

static void set_aref(ulk_demod *d, double a)
{
    d->a_ref = a;
    d->inv_aref = a > 0 ? 1.0 / a : 1.0;
}

/* Correlations of group g with I, Z and O.
 * nrz-l: the levels are the pattern (+-1), times the polarity.
 * nrz-m: the levels of a pattern depend on the level before the group, unknown up to sign;
 * the group's n levels and the one before it are correlated with the n + 1 levels the
 * pattern produces from level +1, and the magnitude is taken (multiple-symbol differential
 * detection over n + 1 sub-bits: it sees every transition, the first one included, and is
 * free of the polarity). */
static void group_corr(const ulk_demod *d, uint64_t g, double pol, double *ci, double *cz, double *co)
{
    double a = 0, z = 0, o = 0;
    if (d->nrzm) {
        float v0 = g > 0 ? d->pv[(g - 1) & (d->pcap - 1)] : 0.0f;
        a = z = o = v0;
        for (int t = 0; t < d->n; t++) {
            float v = d->pv[(g + (uint64_t)t) & (d->pcap - 1)];
            a += d->lidle[t] * v;
            z += d->lz[t] * v;
            o += d->lo[t] * v;
        }
        double sc = pattern_scale(d);
        *ci = sc * fabs(a);
        *cz = sc * fabs(z);
        *co = sc * fabs(o);
        return;
    }
    for (int t = 0; t < d->n; t++) {
        float v = d->pv[(g + (uint64_t)t) & (d->pcap - 1)];
        a += d->pidle[t] * v;
        z += d->pz[t] * v;
        o += d->po[t] * v;
    }
    double sc = pol * pattern_scale(d);
    *ci = sc * a;
    *cz = sc * z;
    *co = sc * o;
}

/* Log-likelihood (up to a common factor) that group g is a bit rather than idle. */
static double bitness(const ulk_demod *d, uint64_t g, double pol)
{
    double ci, cz, co;
    group_corr(d, g, pol, &ci, &cz, &co);
    return (cz > co ? cz : co) - ci;
}

/* A word starts where the stream leaves idle: the groups just before a candidate start must
 * look like idle on average (half the noiseless correlation), which keeps noise next to a
 * signal (inside a block that holds both) from starting words. */
static int idle_before_ok(const ulk_demod *d, uint64_t s, double pol)
{
    const uint64_t n = (uint64_t)d->n;
    int need = d->l.gap > 0 ? d->l.gap : 4;
    if (d->l.preamble > 0 && d->l.preamble < need) need = d->l.preamble;
    if (need > 4) need = 4;
    if (need < 1) need = 1;
    if (s < (uint64_t)need * n) return 0;
    double sum = 0;
    for (int g = 1; g <= need; g++) {
        double ci, cz, co;
        group_corr(d, s - (uint64_t)g * n, pol, &ci, &cz, &co);
        sum += ci;
    }
    return sum >= 0.5 * (double)n * need;
}

/* The word's sub-bits must carry signal energy: mean (y/a)^2 is 1 + N/S on the signal and
 * N/S on noise alone; the threshold sits half-way. */
static int word_energy_ok(const ulk_demod *d, uint64_t s)
{
    uint64_t m = (uint64_t)d->W * (uint64_t)d->n;
    double a = d->a_ref > 0 ? d->a_ref : 1.0, e = 0;
    for (uint64_t t = 0; t < m; t++) {
        double y = d->py[(s + t) & (d->pcap - 1)] / a;
        e += y * y;
    }
    return e / (double)m >= 0.5 + d->nsr_ref;
}

static void best_alignment(const ulk_demod *d, int *a_out, double *pol_out)
{
    int ba = 0, bp = 0;
    double best = -1e300;
    for (int a = 0; a < d->n; a++)
        for (int s = 0; s < (d->nrzm ? 1 : 2); s++)
            if (d->M[a][s] > best) { best = d->M[a][s]; ba = a; bp = s; }
    *a_out = ba;
    *pol_out = bp ? -1.0 : 1.0;
}

/* Soft value of sub-bit j, 0 (no evidence) outside what the ring still holds. */
static double soft_at(const ulk_demod *d, int64_t j)
{
    int64_t lo = d->cnt > d->pcap ? (int64_t)(d->cnt - d->pcap) : 0;
    if (j < lo || j >= (int64_t)d->cnt) return 0.0;
    return d->pv[(uint64_t)j & (d->pcap - 1)];
}

/* group_corr on any sub-bit index (out-of-range sub-bits count 0), for the alignment test. */
static void group_corr_at(const ulk_demod *d, int64_t g, double pol, double *ci, double *cz, double *co)
{
    double a = 0, z = 0, o = 0, sc = pattern_scale(d);
    if (d->nrzm) {
        a = z = o = soft_at(d, g - 1);
        for (int t = 0; t < d->n; t++) {
            double v = soft_at(d, g + t);
            a += d->lidle[t] * v;
            z += d->lz[t] * v;
            o += d->lo[t] * v;
        }
        *ci = sc * fabs(a);
        *cz = sc * fabs(z);
        *co = sc * fabs(o);
        return;
    }
    for (int t = 0; t < d->n; t++) {
        double v = soft_at(d, g + t);
        a += d->pidle[t] * v;
        z += d->pz[t] * v;
        o += d->po[t] * v;
    }
    *ci = pol * sc * a;
    *cz = pol * sc * z;
    *co = pol * sc * o;
}

/* Log-likelihood (times the noise-to-signal ratio) of "a word starts at sub-bit s with
 * polarity pol", over the word and ALIGN_EDGE groups on either side: idle before it (or the
 * previous word's bits when words are back to back), idle after it (or, with no gap, either).
 * Every candidate covers the same number of groups, so the values compare directly. */
#define ALIGN_EDGE 2
/* The same over the correlations precomputed for every group start x in [x0, ...) (ci, cz,
 * co indexed by x - x0). */
static double word_hyp_ll(const ulk_demod *d, int64_t s, int64_t x0, int back_to_back)
{
    const int64_t n = d->n;
    const double *ci = d->al_ci, *cz = d->al_cz, *co = d->al_co;
    double ll = 0;
    for (int g = 1; g <= ALIGN_EDGE; g++) {
        int64_t i = s - g * n - x0;
        ll += back_to_back ? (cz[i] > co[i] ? cz[i] : co[i]) : ci[i];
    }
    for (int b = 0; b < d->W; b++) {
        int64_t i = s + b * n - x0;
        ll += cz[i] > co[i] ? cz[i] : co[i];
    }
    for (int g = 0; g < ALIGN_EDGE; g++) {
        int64_t i = s + (d->W + g) * n - x0;
        double m = cz[i] > co[i] ? cz[i] : co[i];
        ll += d->l.gap > 0 ? ci[i] : (ci[i] > m ? ci[i] : m);
    }
    return ll;
}

/* Smallest log-likelihood ratio (nats) between the best alignment hypothesis and any other
 * that the decoder accepts a word on. The LLR of two hypotheses is (difference of the
 * normalised correlations) / (N/S) for soft values y/a = d + noise of variance N/S; 9.2 nats
 * puts the odds of the runner-up below 1e-4 before the check field is even looked at
 * (common practice: a sync decision needs a much lower error rate than a bit). */
#define ALIGN_MIN_LLR 9.2

/* Tries every start near s (n - 1 sub-bits either way; 2n - 1 after idle under nrz-m). Sets *s_best and
 * *pol_best to the most likely hypothesis and returns its LLR over the runner-up. The
 * polarity is not retried: it comes from the idle patterns of the stream (the validator
 * guarantees complement(I) differs from I, Z and O), while a word alone cannot tell it when
 * O = complement(Z) (the demo profile). Why the shifts: a sub-bit pattern can be shift-confusable (nrz-m 01/10: a one-sub-bit
 * slip complements every bit; nrz-l 0011/0110), and an idle pattern with no transitions
 * (00 under nrz-m, 0000 under nrz-l) says nothing about where groups start, so the grid
 * carried across a long idle run can be off; only the word itself and its edges decide. */
static double align_test(ulk_demod *d, uint64_t s, double pol, int back_to_back, uint64_t *s_best,
                         double *pol_best)
{
    double best = -1e300, second = -1e300;
    *s_best = s;
    *pol_best = pol;
    /* Under nrz-m, words with idle before them are also tried one group (and a sub-bit) either
     * way: the differential group metric marks a word's first group weakly, so the group-level
     * start search can miss by one (measured: n = 2 nrz-m 01/10, 14 dB, 2 of 2000 words
     * accepted one group off, 0 with this). Not under nrz-l: there the start search is
     * reliable and a wider test costs sensitivity (demo profile at 8 dB: WER 1.4e-2 -> 2.5e-2,
     * words flagged ambiguous when an O next to idle looks like idle). Not for back-to-back
     * words either: in a run of bits a whole-group shift is not visible at the edges. */
    const int range = d->nrzm && !back_to_back ? 2 * d->n - 1 : d->n - 1;
    {
        /* Every hypothesis reads groups starting at s + del + j n (-ALIGN_EDGE <= j < W +
         * ALIGN_EDGE): their correlations are computed once for every start in the span. */
        const int64_t n = d->n;
        int64_t x0 = (int64_t)s - range - ALIGN_EDGE * n;
        int64_t nx = 2 * (int64_t)range + (d->W + 2 * ALIGN_EDGE - 1) * n + 1;
        for (int64_t i = 0; i < nx; i++) group_corr_at(d, x0 + i, pol, &d->al_ci[i], &d->al_cz[i], &d->al_co[i]);
        double pl = pol;
        for (int del = -range; del <= range; del++) {
            int64_t c = (int64_t)s + del;
            if (c < 0) continue;
            double ll = word_hyp_ll(d, c, x0, back_to_back);
            if (ll > best) {
                second = best;
                best = ll;
                *s_best = (uint64_t)c;
                *pol_best = pl;
            } else if (ll > second) {
                second = ll;
            }
        }
    }
    double nsr = d->nsr_ref > 1e-6 ? d->nsr_ref : 1e-6;
    return second > -1e299 ? (best - second) / nsr : 1e300;
}

static void decode_word_at(ulk_demod *d, uint64_t s, double pol, int ambiguous)
{
    ulk_demod_word w;
    memset(&w, 0, sizeof w);
    w.ambiguous = ambiguous;
    w.word.n_bits = d->W;
    double margin = 1e300;
    for (int b = 0; b < d->W; b++) {
        double ci, cz, co;
        group_corr(d, s + (uint64_t)b * (uint64_t)d->n, pol, &ci, &cz, &co);
        w.word.bits[b] = co > cz;
        double m = fabs(co - cz) / d->mden;
        if (m < margin) margin = m;
    }
    w.margin = margin;
    if (ambiguous) {
        w.start_s = d->pt[s & (d->pcap - 1)];
        w.polarity = pol < 0 ? -1 : 1;
        emit_word(d, &w);
        return;
    }
    /* E_b/N_0 from the word's own sub-bits (M2M4 moments): noise next to the signal in the
     * edge blocks does not enter. */
    for (uint64_t t = 0; t < (uint64_t)d->W * (uint64_t)d->n; t++) {
        double y = d->py[(s + t) & (d->pcap - 1)];
        d->s2 += y * y;
        d->s4 += y * y * y * y;
    }
    d->ns += (uint64_t)d->W * (uint64_t)d->n;
    w.start_s = d->pt[s & (d->pcap - 1)];
    w.polarity = pol < 0 ? -1 : 1;
    emit_word(d, &w);
}

/* Decides groups from p on while enough look-ahead is buffered (flush: all that fit). */
static void pattern_decide(ulk_demod *d, int flush)
{
    const uint64_t n = (uint64_t)d->n, W = (uint64_t)d->W;
    for (;;) {
        if (d->cnt < d->p) return;
        uint64_t avail = d->cnt - d->p;
        if (!flush && avail < d->lag) return;
        if (avail < n) return;
        int a;
        double pol;
        best_alignment(d, &a, &pol);
        if (d->locked) {
            /* Once a word has fixed the grid, the grid is kept (the sub-bit count is continuous
             * while the clock is locked): an idle pattern without transitions carries no
             * alignment at all, and the metric, which looks far ahead, may by then be fed by
             * noise after the transmission. Only overwhelming evidence moves it: half the
             * noiseless metric of its whole memory (48 groups of n), far beyond what noise
             * reaches (its spread is about 5 sqrt(n N/S)). Each word is checked on its own. */
            if (d->M[a][pol < 0] - d->M[d->lock_a][d->lock_pol < 0] > 24.0 * d->n) {
                d->lock_a = a;
                d->lock_pol = pol;
            }
            a = d->lock_a;
            pol = d->lock_pol;
        }
        if (d->p % n != (uint64_t)a) {
            /* Realign: skip to the next group start of the better alignment. */
            d->p += ((uint64_t)a + n - d->p % n) % n;
            continue;
        }
        double ci, cz, co;
        group_corr(d, d->p, pol, &ci, &cz, &co);
        if (ci >= cz && ci >= co) {
            d->idle_run++;
            d->after_word = 0;
            d->p += n;
            continue;
        }
        int back_to_back = d->after_word && d->l.gap == 0;
        if (d->idle_run == 0 && !d->after_word) {
            d->p += n; /* bits with no idle before them: not a word start we can trust */
            continue;
        }
        /* ML word start: the W groups that look most like bits, among starts p .. p + K n
         * (groups before the start are idle). A start late by m <= G groups trades m of the
         * word's bits for the idle after it and loses; later ones would reach into the next
         * word, whose bits may look more bit-like (Z and O need not be equally far from I),
         * so K = G. */
        /* The first bit may also have been taken for idle (a bit pattern can be close to I),
         * so starts up to two groups back are candidates too, never inside the last word
         * nor in the idle the profile puts after it. */
        uint64_t K = back_to_back ? 0 : (uint64_t)d->l.gap < W ? (uint64_t)d->l.gap : W;
        uint64_t back = back_to_back ? 0 : 2;
        while (back > 0 && (d->p < back * n || d->p - back * n < d->min_start || d->cnt - (d->p - back * n) > d->pcap))
            back--;
        uint64_t best_s = 0, first = d->p - back * n;
        double best_ll = -1e300, ll = 0;
        int found = 0;
        for (uint64_t c = 0; c <= K + back; c++) {
            uint64_t s = first + c * n;
            if (s + W * n > d->cnt) break;
            if (c == 0) for (uint64_t b = 0; b < W; b++) ll += bitness(d, s + b * n, pol);
            else ll += bitness(d, s + (W - 1) * n, pol) - bitness(d, s - n, pol);
            if (ll > best_ll + 1e-9) { best_ll = ll; best_s = s; found = 1; }
        }
        if (!found) {
            /* A word start with no room left for its W bits: cut off by the end. */
            if (flush) {
                /* Counted only when it looks like a word start: idle before it, groups after it
                 * that look like bits rather than idle, and signal energy in them (noise or
                 * silence after a transmission is none of these). */
                double mean_b = 0, e = 0, aref = d->a_ref > 0 ? d->a_ref : 1.0;
                uint64_t ng = (d->cnt - d->p) / n;
                for (uint64_t g = 0; g < ng; g++) mean_b += bitness(d, d->p + g * n, pol);
                for (uint64_t t = 0; t < ng * n; t++) {
                    double y = d->py[(d->p + t) & (d->pcap - 1)] / aref;
                    e += y * y;
                }
                if (ng >= 4 && mean_b > 0 && e / (double)(ng * n) >= 0.5 + d->nsr_ref &&
                    idle_before_ok(d, d->p, pol))
                    d->n_truncated++;
                d->p = d->cnt;
            }
            return;
        }
        if (!(best_ll > 0) || best_s > d->p) {
            /* Either nothing here looks like a word, or it starts later: the group at p is a
             * noisy idle. Move on one group and decide again from there. */
            d->idle_run++;
            d->after_word = 0;
            d->p += n;
            continue;
        }
        if (!back_to_back && (!idle_before_ok(d, best_s, pol) || !word_energy_ok(d, best_s))) {
            d->p += n; /* no convincing idle before it, or no signal in it: noise */
            d->idle_run = 0;
            d->after_word = 0;
            continue;
        }
        {
            /* The grid and polarity this word was found on are a hypothesis: test the word
             * against every one-sub-bit shift and the other polarity, edges included, and
             * refuse to guess when they are too close (the word is handed on as ambiguous,
             * which the dictionary stage rejects). */
            uint64_t s2;
            double pol2;
            int amb = align_test(d, best_s, pol, back_to_back, &s2, &pol2) < ALIGN_MIN_LLR;
            best_s = s2;
            if (amb) {
                d->n_ambiguous++;
            } else {
                pol = pol2;
                d->locked = 1;
                d->lock_a = (int)(best_s % n);
                d->lock_pol = pol;
            }
            decode_word_at(d, best_s, amb ? pol2 : pol, amb);
        }
        d->p = best_s + W * n;
        d->min_start = d->p + (d->l.gap > 0 ? n : 0);
        d->after_word = 1;
        d->idle_run = 0;
    }
}

static void pattern_reset(ulk_demod *d)
{
    pattern_decide(d, 1);
    d->cnt = 0;
    d->p = 0;
    d->min_start = 0;
    memset(d->M, 0, sizeof d->M);
    d->idle_run = 0;
    d->after_word = 0;
    d->have_last = 0;
    d->locked = 0;
}

/* One soft sub-bit (raw dump value) with its start time. */
static void pattern_push(ulk_demod *d, float y, double t)
{
    if (d->have_last) {
        double dt = (t - d->last_t) * d->rs_hz;
        if (dt < 0.5) return;          /* same sub-bit seen from two blocks */
        if (dt > 1.5 && dt < 2.5) {
            /* One sub-bit lost where the boundary estimate moved between blocks: an erasure
             * (soft value 0) keeps the pattern grid instead of starting over. */
            d->n_erasures++;
            d->have_last = 0;
            pattern_push(d, 0.0f, t - 1.0 / d->rs_hz);
        } else if (dt >= 2.5) {
            pattern_reset(d); /* a gap: the stream is not continuous */
        }
    }
    d->have_last = 1;
    d->last_t = t;
    float v = y;
    uint64_t s = d->cnt;
    d->pv[s & (d->pcap - 1)] = v;
    d->py[s & (d->pcap - 1)] = y;
    d->pt[s & (d->pcap - 1)] = t;
    d->cnt++;
    if (d->cnt >= (uint64_t)d->n) {
        uint64_t g = d->cnt - (uint64_t)d->n;
        int a = (int)(g % (uint64_t)d->n);
        double ci, cz, co;
        group_corr(d, g, 1.0, &ci, &cz, &co);
        double mp = ci > cz ? ci : cz;
        if (co > mp) mp = co;
        double mn = -ci > -cz ? -ci : -cz;
        if (-co > mn) mn = -co;
        const double lam = 1.0 - 1.0 / 48.0;
        d->M[a][0] = lam * d->M[a][0] + mp;
        d->M[a][1] = lam * d->M[a][1] + mn;
    }
    pattern_decide(d, 0);
}

/* ---------------------------------------------------------------- block estimation */

/* |X(f)|^2 and X for the squared window at f cycles per sub-bit. */
static void dft_at(const ulk_demod *d, int M, double mc, double f, double *xr, double *xi)
{
    double wr = cos(2 * M_PI * f), wi = -sin(2 * M_PI * f);
    double zr = cos(2 * M_PI * f * mc), zi = sin(2 * M_PI * f * mc); /* e^{-j2pi f (0 - mc)} */
    double ar = 0, ai = 0;
    for (int m = 0; m < M; m++) {
        ar += d->sre[m] * zr - d->sim[m] * zi;
        ai += d->sre[m] * zi + d->sim[m] * zr;
        double nr = zr * wr - zi * wi;
        zi = zr * wi + zi * wr;
        zr = nr;
    }
    *xr = ar;
    *xi = ai;
}

/* The same on the decimated sequence (G group sums, frequency f in cycles per group). */
static void dft_dec(const ulk_demod *d, int G, double mc, double f, double *xr, double *xi)
{
    double wr = cos(2 * M_PI * f), wi = -sin(2 * M_PI * f);
    double zr = cos(2 * M_PI * f * mc), zi = sin(2 * M_PI * f * mc);
    double ar = 0, ai = 0;
    for (int m = 0; m < G; m++) {
        ar += d->dre[m] * zr - d->dim[m] * zi;
        ai += d->dre[m] * zi + d->dim[m] * zr;
        double nr = zr * wr - zi * wi;
        zi = zr * wi + zi * wr;
        zr = nr;
    }
    *xr = ar;
    *xi = ai;
}

/* Closes the clock-phase fit of a run of locked blocks (3 blocks at least). */
static void run_close(ulk_demod *d)
{
    if (d->run_n >= 3 && d->r_w > 0) {
        double mx = d->r_x / d->r_w, my = d->r_y / d->r_w;
        double sxx = d->r_xx / d->r_w - mx * mx, sxy = d->r_xy / d->r_w - mx * my;
        if (sxx > 0) {
            double eps = sxy / sxx * d->sps;
            double w = sxx * d->r_w; /* precision grows with span^2 and weight */
            d->fit_sum += eps * w;
            d->fit_w += w;
        }
    }
    d->run_n = 0;
    d->r_w = d->r_x = d->r_y = d->r_xx = d->r_xy = 0;
}

static void block_unlock(ulk_demod *d)
{
    run_close(d);
    d->prev_locked = 0;
    d->pend_interior = 0;
    for (int q = 0; q < 2 * d->k; q++) d->qacc[q] = 0;
    pattern_reset(d);
}

/* M2M4 amplitude of BPSK soft values: E y^2 = a^2 + s^2, E y^4 = a^4 + 6 a^2 s^2 + 3 s^4. */
static double m2m4_amp(double m2, double m4)
{
    double a4 = (3 * m2 * m2 - m4) / 2;
    if (a4 <= 0) return 0;
    double a2 = sqrt(a4);
    if (a2 > m2) a2 = m2;
    return sqrt(a2);
}

/* One block's working values, handed from stage to stage of process_block (each stage's
 * helper reads what the earlier ones wrote; none keeps anything across blocks). */
typedef struct {
    uint64_t b;
    uint64_t s_lo, s_hi;   /* the analysis window, samples */
    uint64_t t_lo, t_hi;   /* the block itself, samples */
    uint64_t m_lo;         /* the window's first sub-bit slot of U */
    int M;                 /* sub-bits of U in the window */
    double mc;             /* the window's centre, in sub-bits from m_lo */
    double fhat, xr, xi;   /* the squared line: frequency, cycles per sub-bit, and its DFT */
    double coh;            /* the line's coherence */
    int fly, backfill;
    double eps, rho, beta; /* the sub-bit clock */
    double hp_r, hp_i, fpn; /* the pilot: amplitude and frequency, cycles per sample */
    uint64_t i_lo, i_hi;   /* samples the matched filter reads */
    int64_t H0;            /* the first half-cycle */
    int64_t nfull;         /* half-cycles known complete: [H0, H0 + nfull) */
    int qb;                /* the half-cycle (mod 2k) that starts a sub-bit */
    uint64_t ny, y0, y1, nye; /* soft sub-bits made, and the range [y0, y1) handed on */
    double zr, zi, rq, eq; /* residual subcarrier phase sums */
} blk_state;

/* Stage 1: finds the squared line and tests it; 0 when the block is not demodulated
 * (the lock is then dropped), else st->fhat, xr, xi, coh, mc, fly and backfill are set. */
static int blk_detect(ulk_demod *d, blk_state *st)
{
    const int k = d->k;
    const uint64_t b = st->b, m_lo = st->m_lo;
    const int M = st->M;
    /* 1. squared baseband and its zoomed DFT. |U| is limited to 3x its median first: a
     * BPSK signal has a steady |U| and is not touched, while a few huge samples (clicks,
     * garbage) would otherwise make one U_m dominate and look perfectly coherent. */
    for (int m = 0; m < M; m++) {
        double r = d->ure[(m_lo + (uint64_t)m) & (d->ucap - 1)], i = d->uim[(m_lo + (uint64_t)m) & (d->ucap - 1)];
        d->sre[m] = r * r + i * i;
    }
    double med = ulk_median_copy(d->sre, d->sim, M);
    double lim2 = 9.0 * med;
    double upow = 0;
    for (int m = 0; m < M; m++) {
        double r = d->ure[(m_lo + (uint64_t)m) & (d->ucap - 1)], i = d->uim[(m_lo + (uint64_t)m) & (d->ucap - 1)];
        double p2 = r * r + i * i;
        if (p2 > lim2 && p2 > 0) {
            double g = sqrt(lim2 / p2);
            r *= g;
            i *= g;
            p2 = lim2;
        }
        d->sre[m] = r * r - i * i;
        d->sim[m] = 2 * r * i;
        upow += p2;
    }
    if (!(upow > 0)) { block_unlock(d); return 0; }
    double mc = (M - 1) / 2.0;
    double fmax = 2.0 * k * d->eps_max;
    if (fmax > 0.45) fmax = 0.45;
    double df = 1.0 / (4.0 * M);
    int nb = (int)ceil(fmax / df);
    /* The line sits at |f| <= f_max, far below the sub-bit rate (f_max = 0.005 cycles per
     * sub-bit for k = 2 at 1250 ppm), so the search runs on sums of D consecutive U_m^2: each
     * sum, referred to its group's centre, only scales the line by a real factor
     * sin(pi f D) / (D sin(pi f)) (above 0.97 for f D <= 0.1, which fixes D), so the peak stays
     * where it is and the search costs 1/D as much. On noise the sums keep E|X|^2 = M E|U|^4,
     * so the detection statistic below is unchanged; it and the phase are taken from the full
     * sequence at the frequency found. */
    int Dg = (int)floor(0.1 / fmax);
    if (Dg > M / 8) Dg = M / 8;
    if (Dg < 1) Dg = 1;
    int G = M / Dg;
    double mcd = (G - 1) / 2.0; /* in groups: group g's centre is sub-bit g D + (D - 1) / 2 */
    for (int g = 0; g < G; g++) {
        double ga = 0, gb = 0;
        for (int t = 0; t < Dg; t++) { ga += d->sre[g * Dg + t]; gb += d->sim[g * Dg + t]; }
        d->dre[g] = ga;
        d->dim[g] = gb;
    }
    /* The sub-bits past the last whole group (fewer than D) enter only the final, full
     * evaluation. Frequencies in the decimated search are in cycles per group (x D). */
    double bestp = -1, bestf = 0, xr, xi;
    for (int ib = -nb; ib <= nb; ib++) {
        dft_dec(d, G, mcd, ib * df * Dg, &xr, &xi);
        double p = xr * xr + xi * xi;
        if (p > bestp) { bestp = p; bestf = ib * df; }
    }
    /* golden-section refinement within one grid step */
    double lo = bestf - df, hi = bestf + df;
    const double gr = 0.6180339887498949;
    double x1 = hi - gr * (hi - lo), x2 = lo + gr * (hi - lo), f1, f2;
    dft_dec(d, G, mcd, x1 * Dg, &xr, &xi); f1 = xr * xr + xi * xi;
    dft_dec(d, G, mcd, x2 * Dg, &xr, &xi); f2 = xr * xr + xi * xi;
    for (int it = 0; it < 24; it++) {
        if (f1 > f2) { hi = x2; x2 = x1; f2 = f1; x1 = hi - gr * (hi - lo); dft_dec(d, G, mcd, x1 * Dg, &xr, &xi); f1 = xr * xr + xi * xi; }
        else { lo = x1; x1 = x2; f1 = f2; x2 = lo + gr * (hi - lo); dft_dec(d, G, mcd, x2 * Dg, &xr, &xi); f2 = xr * xr + xi * xi; }
    }
    double fhat = (f1 > f2) ? x1 : x2;
    if ((f1 > f2 ? f1 : f2) < bestp) fhat = bestf;
    /* On the edge of the searched range: the line may lie beyond it (said in the estimates). */
    int at_edge = fabs(fhat) > fmax - 0.5 * df;
    dft_at(d, M, mc, fhat, &xr, &xi);
    double coh = sqrt(xr * xr + xi * xi) / upow;
    /* Detection. On noise alone U_m is complex Gaussian, so X = sum U_m^2 (...) has
     * E|X|^2 = M E|U|^4 = 2 M (E|U|^2)^2 and coh^2 = |X|^2 / (sum |U|^2)^2 is about
     * exponential with mean 2/M at any one frequency: P(coh^2 > t) = exp(-t M / 2). The search
     * tries n_try = 4 x (2 f_max M) frequencies (4x oversampled; counting them all as
     * independent is conservative), so the threshold t = (2/M) ln(n_try / P_fa) holds the
     * false-alarm probability per block to P_fa: 1e-6 to acquire (a 30-minute capture of the
     * demo profile has about 700 blocks), 1e-2 to stay locked (a false continuation is only
     * a few noise blocks that the word stage rejects). Measured on a signal, coh^2 is 0.28 at
     * E_b/N_0 = 7.5 dB in the demo profile, about 8x the acquisition threshold. */
    double n_try = 8.0 * fmax * M;
    if (n_try < 1) n_try = 1;
    double thr2 = 2.0 / M * log(n_try / (d->prev_locked ? 1e-2 : d->acq_pfa));
    /* A block that fails the test right after a locked one is demodulated once more on the
     * last clock (flywheel): the end of a transmission fills only part of a block, and the
     * last word's end must not be lost with it. Its soft values go to the pattern stage (which
     * wants idle before a word and signal energy in it), but it updates no estimate. */
    int fly = 0;
    if (!(coh * coh >= thr2)) { /* NaN-safe */
        if (!d->prev_locked || d->flying) { block_unlock(d); return 0; }
        fly = 1;
    }
    d->flying = fly;
    /* Only a block that would pass the acquisition test counts towards at_search_limit: one
     * that passes only the looser test for staying locked may be the noise after a
     * transmission's end, whose peak lies anywhere in the range, the edge included (measured:
     * composite, 192 kHz, 4 of 54 captures flagged with estimates of 0 and -1000 ppm inside
     * +-1250). */
    if (at_edge && !fly && coh * coh >= 2.0 / M * log(n_try / d->acq_pfa)) d->n_at_edge++;
    /* Acquisition: the block before this one failed the test, but the signal may have begun
     * inside it (a short preamble, a transmission after a gap): its sub-bits are demodulated
     * too, on this block's clock (the window covers it), so the first word is not lost. */
    int backfill = !d->prev_locked && b > 0;
    st->mc = mc;
    st->fhat = fhat;
    st->xr = xr;
    st->xi = xi;
    st->coh = coh;
    st->fly = fly;
    st->backfill = backfill;
    return 1;
}

/* Stages 2 and 3: sets the sub-bit clock (st->eps, rho, beta) and the pilot's estimate. */
static void blk_clock_pilot(ulk_demod *d, blk_state *st)
{
    const int k = d->k, twok = 2 * k;
    const uint64_t s_lo = st->s_lo, s_hi = st->s_hi, t_lo = st->t_lo, m_lo = st->m_lo;
    const double fhat = st->fhat, xr = st->xr, xi = st->xi, mc = st->mc;
    const int fly = st->fly;
    /* 2. sub-bit clock theta(i) = i rho + beta, modulo 1/(2k) */
    double eps = fhat / (2.0 * k);
    double phic = atan2(xi, xr) / 2.0;
    double tc = ((double)m_lo + mc + 0.5) * d->sps - 0.5;
    double rho = (1.0 + eps) / d->sps;
    double beta = (phic + M_PI / 2) / (2 * M_PI * k) - eps * tc / d->sps;
    if (fly) {
        rho = d->prev_rho;
        beta = d->prev_beta;
        eps = rho * d->sps - 1.0;
    } else if (d->prev_locked) {
        double tb = (double)t_lo;
        double dth = (tb * d->prev_rho + d->prev_beta) - (tb * rho + beta);
        beta += floor(dth * twok + 0.5) / twok;
    } else {
        for (int q = 0; q < twok; q++) d->qacc[q] = 0;
    }

    /* 3. pilot (estimated on the window with the block's clock, then subtracted) */
    double hp_r = 0, hp_i = 0, fpn = 0;
    if (d->pilot_on) {
        fpn = d->fp_hz * (1.0 + eps) / d->fs_hz;
        double ph0 = fmod(fpn * (double)s_lo, 1.0);
        double ph = ph0;
        for (uint64_t i = s_lo; i < s_hi; i++) {
            float x = d->xb[i % d->xcap];
            hp_r += x * tcos(d, ph);
            hp_i -= x * tsin(d, ph);
            ph += fpn;
            if (ph >= 1) ph -= 1;
        }
        hp_r *= 2.0 / (double)(s_hi - s_lo);
        hp_i *= 2.0 / (double)(s_hi - s_lo);
    }
    st->eps = eps;
    st->rho = rho;
    st->beta = beta;
    st->hp_r = hp_r;
    st->hp_i = hp_i;
    st->fpn = fpn;
}

/* Stage 4 from the baseband slots: writes the prefix sums d->ph, qh, ch of half-cycles
 * H0 .. H0 + nh_need; 0 when the slots needed are no longer held (lock dropped). */
static int blk_dumps_slots(ulk_demod *d, const blk_state *st, uint64_t nh_need)
{
    const int k = d->k;
    const uint64_t i_lo = st->i_lo, i_hi = st->i_hi;
    const double rho = st->rho, beta = st->beta;
    const int64_t H0 = st->H0;
    /* From the baseband slots: a slot's sum z = sum x_i exp(-j 2 pi f_sc i / f_s) gives
     * sum x_i sin(2 pi k theta(i)) = -Im(exp(-j psi) z) exactly when the template's phase
     * offset psi = 2 pi k (theta(i) - i / sps) is constant over the slot; it moves by
     * 2 pi k eps / S a slot (under 1e-3 rad), so psi is taken at the slot's centre. A
     * half-cycle holds the slots whose centres fall in it; its template energy is half its
     * sample count. ph, qh and ch are written directly as prefix sums. */
    const double Ls = d->Ls;
    uint64_t sl_lo = slot_of(d, i_lo);
    if (d->s_cnt > d->scap && sl_lo < d->s_cnt - d->scap) sl_lo = d->s_cnt - d->scap;
    uint64_t sl_hi = d->s_cnt;
    if (i_hi > 0 && slot_of(d, i_hi - 1) + 1 < sl_hi) sl_hi = slot_of(d, i_hi - 1) + 1;
    if (sl_hi <= sl_lo || sl_hi - sl_lo + 1 > d->rcap) { block_unlock(d); return 0; }
    double drho = rho - 1.0 / d->sps;
    double c0 = ((double)sl_lo + 0.5) * Ls - 0.5;
    double p0 = k * (c0 * drho + beta);
    p0 -= floor(p0);
    double cr = cos(2 * M_PI * p0), sr = sin(2 * M_PI * p0);
    double wr = cos(2 * M_PI * k * drho * Ls), wi = sin(2 * M_PI * k * drho * Ls);
    double *R = d->rpre, *Qp = d->qpre;
    R[0] = Qp[0] = 0;
    uint64_t nsl = sl_hi - sl_lo, ri = sl_lo % d->scap;
    for (uint64_t t = 0; t < nsl; t++) {
        double zr = d->zre[ri], zi = d->zim[ri];
        if (++ri == d->scap) ri = 0;
        R[t + 1] = R[t] + (sr * zr - cr * zi);
        Qp[t + 1] = Qp[t] + (cr * zr + sr * zi);
        double nr = cr * wr - sr * wi;
        sr = sr * wr + cr * wi;
        cr = nr;
    }
    double twokd = 2.0 * k, n0 = 0, r0 = 0, q0 = 0;
    for (uint64_t i = 0; i <= nh_need; i++) {
        double pH = ((double)(H0 + (int64_t)i) / twokd - beta) / rho;
        /* the first slot whose centre is at or after p_H */
        uint64_t bs;
        if (!(pH > (double)slot_first(d, sl_lo))) bs = sl_lo;
        else if (!(pH < (double)slot_first(d, sl_hi))) bs = sl_hi;
        else {
            bs = slot_of(d, (uint64_t)pH);
            if (0.5 * (double)(slot_first(d, bs) + slot_first(d, bs + 1) - 1) < pH) bs++;
        }
        uint64_t fs0 = slot_first(d, bs);
        double nsmp = (double)(fs0 < d->n_in ? fs0 : d->n_in);
        uint64_t t = bs - sl_lo;
        if (i == 0) { n0 = nsmp; r0 = R[t]; q0 = Qp[t]; }
        d->ph[i] = R[t] - r0;
        d->qh[i] = Qp[t] - q0;
        d->ch[i] = 0.5 * (nsmp - n0);
    }
    return 1;
}

#define SQ_FIT_BINS 256     /* the edge fit's histogram over +-SQ_EDGE_FIT */
#define SQ_FIT_SLOPES 7     /* trial slopes of the edge offset across the span, coarse and fine */
#define SQ_FIT_SLOPE_MAX 0.02 /* cycles from one end of the span to the other */

/* One trial slope t1 of the edge fit (sq_refine_edges): the best offset for it, kept in *t0b
 * and *t1b when its score beats *best. */
static void sq_fit_slope(const sq_edge_smp *es, size_t ne, double t1, double ytot, double *best, double *t0b, double *t1b)
{
    double hist[SQ_FIT_BINS];
    const double bw = 2.0 * SQ_EDGE_FIT / SQ_FIT_BINS, ibw = 1.0 / bw;
    memset(hist, 0, sizeof hist);
    for (size_t j = 0; j < ne; j++) {
        int bi = (int)(((double)es[j].e - t1 * es[j].u + SQ_EDGE_FIT) * ibw);
        if (bi < 0) bi = 0;
        if (bi >= SQ_FIT_BINS) bi = SQ_FIT_BINS - 1;
        hist[bi] += es[j].y;
    }
    /* split at the lower side of bin b: S = ytot - 2 (sum of the bins below b); on a plateau
     * (empty bins) the edge goes to its middle */
    double acc = 0;
    int run_from = -1;
    for (int c = 0; c < SQ_FIT_BINS / 8; c++) acc += hist[c];
    for (int bi = SQ_FIT_BINS / 8; bi < SQ_FIT_BINS - SQ_FIT_BINS / 8; bi++) {
        double S = ytot - 2 * acc;
        if (S > *best) { *best = S; *t1b = t1; *t0b = bi * bw - SQ_EDGE_FIT; run_from = bi; }
        else if (run_from >= 0 && S == *best && hist[bi - 1] == 0) *t0b = 0.5 * (run_from + bi) * bw - SQ_EDGE_FIT;
        else run_from = -1;
        acc += hist[bi];
    }
}

/* Square subcarrier: places the template's edges where the block's samples put them. The
 * clock from the squared line (stage 2) is good to a few 1e-3 cycles, which costs a sine
 * template nothing but a square one a sample on the wrong side of an edge in every half-cycle
 * for as long as one sits that close (measured with the true clock and a hard template: the
 * square set at 8 dB loses 0.00 / 0.14 / 0.03 dB at 48 / 50 / 192 kHz; with the block clock and a ramp of 0.035 cycles 0.49 / 0.39 / 0.22 dB, docs/decode.md).
 * Each sample within SQ_EDGE_FIT of an edge is weighed by the dumps of the two half-cycles
 * beside it (its own value taken out): y = x o (P_before + P_after) is positive on average
 * when the sample lies after the edge and negative before it (zero where the data change
 * between the two). The edge offset t(u) = t0 + t1 u (u the sample's place in the span,
 * -1/2..1/2) maximising sum_{e > t} y - sum_{e < t} y is where the block puts the edges
 * (t1 tried on a grid, t0 from a histogram of e - t1 u); every noted sample is dumped again
 * with the template at t. */
static void sq_refine_edges(ulk_demod *d, size_t ne)
{
    double *P = d->ph + 1, *C = d->ch + 1;
    sq_edge_smp *es = d->esm;
    double ytot = 0;
    for (size_t j = 0; j < ne; j++) {
        double D = P[es[j].rel - 1] + P[es[j].rel] - (double)es[j].x * (double)es[j].c;
        es[j].y = (float)((double)es[j].x * es[j].o * D);
        ytot += es[j].y;
    }
    double best = -1e300, t0b = 0, t1b = 0;
    /* slopes: a coarse grid over +-SQ_FIT_SLOPE_MAX, then a finer one around the best */
    const double step = 2.0 * SQ_FIT_SLOPE_MAX / (SQ_FIT_SLOPES - 1);
    for (int pass = 0; pass < 2; pass++) {
        double c1 = t1b;
        for (int q = 0; q < SQ_FIT_SLOPES; q++) {
            double t1 = pass == 0 ? -SQ_FIT_SLOPE_MAX + q * step : c1 + (q - (SQ_FIT_SLOPES - 1) / 2) * step / (SQ_FIT_SLOPES - 1);
            if (pass == 1 && t1 == c1) continue;
            sq_fit_slope(es, ne, t1, ytot, &best, &t0b, &t1b);
        }
    }
    const double w = SQ_EDGE_CYCLES;
    for (size_t j = 0; j < ne; j++) {
        double e = (double)es[j].e - t0b - t1b * es[j].u, a = fabs(e) < w ? fabs(e) / w : 1.0;
        int64_t h1 = e > 0 ? es[j].rel : es[j].rel - 1, h0 = es[j].e > 0 ? es[j].rel : es[j].rel - 1;
        double c1 = (e > 0 ? 1.0 : -1.0) * es[j].o * a, x = es[j].x, c0 = es[j].c;
        P[h0] -= x * c0;
        C[h0] -= c0 * c0;
        P[h1] += x * c1;
        C[h1] += c1 * c1;
    }
}

/* Stage 4 from the samples: writes the prefix sums d->ph, qh, ch of half-cycles
 * H0 .. H0 + nh_need, the pilot subtracted; cyc0 and phs are the clock at i_lo. */
static void blk_dumps_samples(ulk_demod *d, const blk_state *st, uint64_t nh_need, double cyc0, double phs)
{
    const uint64_t i_lo = st->i_lo, i_hi = st->i_hi;
    const int64_t H0 = st->H0;
    const double hp_r = st->hp_r, hp_i = st->hp_i, fpn = st->fpn, inc = d->k * st->rho;
    memset(d->ph, 0, (nh_need + 1) * sizeof *d->ph);
    memset(d->ch, 0, (nh_need + 1) * sizeof *d->ch);
    memset(d->qh, 0, (nh_need + 1) * sizeof *d->qh);
    size_t ne = 0; /* samples noted near the square template's edges */
    {
        int64_t cyc = 0; /* cycles since cyc0 */
        double pp = d->pilot_on ? fmod(fpn * (double)i_lo, 1.0) : 0;
        double *P = d->ph + 1, *C = d->ch + 1, *Q = d->qh + 1;
        int64_t hbase = 2 * (int64_t)cyc0 - H0; /* 0 or -1 */
        const double spc = 1.0 / inc;           /* samples per subcarrier cycle */
        const double sq_w = SQ_EDGE_CYCLES * spc; /* the square template's ramp, samples */
        const double fit_w = SQ_EDGE_FIT * spc;   /* samples noted for the edge fit */
        const double inv_span = 1.0 / (double)(i_hi - i_lo);
        for (uint64_t i = i_lo; i < i_hi; i++) {
            float x = d->xb[i % d->xcap];
            if (d->pilot_on) {
                x -= (float)(hp_r * tcos(d, pp) - hp_i * tsin(d, pp));
                pp += fpn;
                if (pp >= 1) pp -= 1;
            }
            int half = phs >= 0.5;
            int64_t rel = hbase + 2 * cyc + half;
            float c, cq;
            if (d->square) {
                /* The square's edges are where the sampled values jump (see SQ_EDGE_CYCLES and
                 * sq_refine_edges): the template ramps to 0 within sq_w of an edge, and a
                 * sample within SQ_EDGE_FIT of one is noted for the edge fit. */
                double e0 = phs < 0.5 ? phs : phs - 0.5;            /* from the last edge */
                double dist = (e0 < 0.25 ? e0 : 0.5 - e0) * spc;   /* to the nearest, samples */
                c = (float)((half ? -1.0 : 1.0) * (dist < sq_w ? dist / sq_w : 1.0));
                double pq = phs + 0.25;
                pq -= floor(pq);
                double f0 = pq < 0.5 ? pq : pq - 0.5;
                double dq = (f0 < 0.25 ? f0 : 0.5 - f0) * spc;
                cq = (float)((pq < 0.5 ? 1.0 : -1.0) * (dq < sq_w ? dq / sq_w : 1.0));
                if (dist < fit_w && ne < d->ecap) {
                    sq_edge_smp *es = &d->esm[ne];
                    int after = e0 < 0.25;                   /* past the last edge */
                    es->x = x;
                    es->c = c;
                    es->u = (float)((double)(i - i_lo) * inv_span - 0.5);
                    es->e = (float)(after ? e0 : e0 - 0.5);
                    es->rel = after ? rel : rel + 1;
                    /* the half after the edge: the first of a cycle (+) or the second (-) */
                    es->o = (int8_t)(((es->rel - hbase) & 1) ? -1 : 1);
                    if (es->rel - 1 >= 0 && (uint64_t)es->rel < nh_need) ne++;
                }
            } else {
                c = tsin(d, phs);
                cq = tcos(d, phs);
            }
            if (rel >= 0 && (uint64_t)rel < nh_need) {
                P[rel] += x * c;
                C[rel] += c * c;
                Q[rel] += x * cq;
            }
            phs += inc;
            if (phs >= 1) { phs -= 1; cyc++; }
        }
    }
    if (d->square && ne > 0) sq_refine_edges(d, ne);
    /* prefix sums: ph[i] = sum of partials before half-cycle i */
    for (uint64_t i = 1; i <= nh_need; i++) {
        d->ph[i] += d->ph[i - 1];
        d->ch[i] += d->ch[i - 1];
        d->qh[i] += d->qh[i - 1];
    }
}

/* Stage 4: half-cycle dumps over [st->i_lo, i_hi), st->H0 and st->nfull; 0 when there
 * are too few (the lock is then dropped). */
static int blk_dumps(ulk_demod *d, blk_state *st)
{
    const int k = d->k, twok = 2 * k;
    const uint64_t s_lo = st->s_lo, s_hi = st->s_hi, t_lo = st->t_lo, t_hi = st->t_hi;
    const double rho = st->rho, beta = st->beta;
    /* Samples the matched filter needs: the whole window on acquisition (the half-cycle
     * choice below has no history yet, and the block before is backfilled), else the block
     * itself with two sub-bits either side (the choice is carried over from earlier blocks). */
    uint64_t i_lo = s_lo, i_hi = s_hi;
    if (d->prev_locked) {
        uint64_t mg = (uint64_t)ceil(2 * d->sps) + 2;
        if (t_lo > s_lo + mg) i_lo = t_lo - mg;
        if (t_hi + mg < s_hi) i_hi = t_hi + mg;
    }
    /* 4. half-cycle integrate-and-dump with the recovered template */
    double th0 = (double)i_lo * rho + beta;
    double kth = k * th0;
    double cyc0 = floor(kth);
    double phs = kth - cyc0;
    int64_t H0 = 2 * (int64_t)cyc0 + (phs >= 0.5);
    double inc = k * rho;
    uint64_t nh_need = (uint64_t)((double)(i_hi - i_lo) * 2 * inc) + 8;
    if (nh_need + 1 > d->hcap) { block_unlock(d); return 0; } /* cannot happen: sized at create */
    st->i_lo = i_lo;
    st->i_hi = i_hi;
    st->H0 = H0;
    if (d->slot_path) {
        if (!blk_dumps_slots(d, st, nh_need)) return 0;
    } else {
        blk_dumps_samples(d, st, nh_need, cyc0, phs);
    }
    uint64_t nh = nh_need;
    int64_t Hlast = (int64_t)floor(twok * ((double)(i_hi - 1) * rho + beta)); /* last (maybe partial) */
    if (d->finished && i_hi == d->n_in) {
        /* End of the capture: the file holds ceil(L f_s / R_s) samples, so the last sub-bit's
         * last half-cycle lacks less than one sample interval; it counts as complete (half a
         * sample of slack for the clock estimate). Without this a word that ends with the
         * file (postamble 0) loses its last sub-bit. */
        Hlast = (int64_t)floor(twok * (((double)i_hi + 0.5) * rho + beta));
    }
    int64_t nfull = Hlast - H0;  /* half-cycles known complete: [H0, Hlast) */
    if (nfull > (int64_t)nh) nfull = (int64_t)nh;
    if (nfull < twok) { block_unlock(d); return 0; }
    st->nfull = nfull;
    return 1;
}

/* Stage 5: sets st->qb, the half-cycle that starts a sub-bit; 0 when the dumps hold no
 * energy (the lock is then dropped). */
static int blk_subbit_phase(ulk_demod *d, blk_state *st)
{
    const int twok = 2 * d->k;
    const int64_t H0 = st->H0, nfull = st->nfull;
    /* 5. which half-cycle starts a sub-bit: energy of the sub-bit dumps, accumulated */
    double mtot = 0;
    double *mq = d->qacc + twok; /* scratch: second half of the qacc allocation */
    for (int q = 0; q < twok; q++) {
        int64_t s0 = ((q - H0) % twok + twok) % twok;
        double e = 0;
        for (int64_t s = s0; s + twok <= nfull; s += twok) {
            double D = d->ph[s + twok] - d->ph[s];
            e += D * D;
        }
        mq[q] = e;
        mtot += e;
    }
    if (!(mtot > 0)) { block_unlock(d); return 0; }
    int qb = 0;
    for (int q = 0; q < twok; q++) {
        d->qacc[q] = (d->prev_locked ? 0.6 * d->qacc[q] : 0) + mq[q] * twok / mtot;
        if (d->qacc[q] > d->qacc[qb]) qb = q;
    }
    st->qb = qb;
    return 1;
}

/* Stage 6: the soft sub-bits into d->yblk / tblk (st->ny of them) and the residual
 * phase sums; 0 when there are none (the lock is then dropped). */
static int blk_soft(ulk_demod *d, blk_state *st)
{
    const int twok = 2 * d->k;
    const uint64_t s_lo = st->s_lo, s_hi = st->s_hi, t_lo = st->t_lo, t_hi = st->t_hi;
    const double rho = st->rho, beta = st->beta;
    const int64_t H0 = st->H0, nfull = st->nfull;
    const int qb = st->qb, backfill = st->backfill;
    /* 6. soft sub-bits whose start falls in [t_lo, t_hi) */
    /* Continue right after the last sub-bit handed on (the previous block's clock and this
     * one's may differ by a fraction of a half-cycle at the seam: going by sample ranges
     * alone could skip or repeat the sub-bit that starts there). */
    uint64_t t_em = backfill ? s_lo : t_lo;
    int64_t hA = t_em ? (int64_t)floor(twok * ((double)(t_em - 1) * rho + beta)) + 1 : H0;
    if (d->prev_locked && d->have_emit) {
        double from = d->last_emit_pos + 0.5 / rho;
        hA = (int64_t)floor(twok * (from * rho + beta)) + 1;
    }
    /* On acquisition the whole window is demodulated (for the trim below); only sub-bits
     * starting before t_hi are handed on. */
    const uint64_t t_end = backfill ? s_hi : t_hi;
    int64_t hB = (int64_t)floor(twok * ((double)(t_end - 1) * rho + beta));
    if (hA < H0) hA = H0;
    int64_t j0 = floordiv(hA - qb + twok - 1, twok);
    double sgn = (qb & 1) ? -1.0 : 1.0;
    uint64_t ny = 0;
    /* Residual subcarrier phase on the block's own sub-bits, from exactly aligned in-phase and
     * quadrature dumps (no image leakage, no data straddling): it refines the clock phase at
     * the block centre for the clock-error fit. */
    double zr = 0, zi = 0, rq = 0, eq = 0;
    for (int64_t j = j0;; j++) {
        int64_t Hj = j * twok + qb;
        if (Hj > hB) break;
        int64_t idx = Hj - H0;
        if (idx < 0) continue;
        if (idx + twok > nfull) break;
        double e = d->ch[idx + twok] - d->ch[idx];
        if (!(e > 0)) continue;
        if (ny >= d->ycap) break;
        d->yblk[ny] = (float)(sgn * (d->ph[idx + twok] - d->ph[idx]) / e);
        {
            double I = d->ph[idx + twok] - d->ph[idx], Qv = d->qh[idx + twok] - d->qh[idx];
            zr += I * I - Qv * Qv;
            zi += 2 * I * Qv;
            rq += I >= 0 ? Qv : -Qv;
            eq += fabs(I) + fabs(Qv);
        }
        d->tblk[ny] = (((double)Hj / twok) - beta) / rho / d->fs_hz;
        d->last_emit_pos = (((double)Hj / twok) - beta) / rho;
        d->have_emit = 1;
        ny++;
    }
    if (ny == 0) { block_unlock(d); return 0; }
    st->ny = ny;
    st->zr = zr;
    st->zi = zi;
    st->rq = rq;
    st->eq = eq;
    return 1;
}

/* Trim and level test: sets the range [st->y0, y1) of soft sub-bits handed on; 0 when an
 * acquisition fails the level test (the lock is then dropped). */
static int blk_trim(ulk_demod *d, blk_state *st)
{
    const uint64_t t_hi = st->t_hi, ny = st->ny;
    const int backfill = st->backfill, fly = st->fly;
    /* On acquisition the block before is backfilled, but the window that passed the test
     * may hold the transmission's start anywhere, even after this block; after a locked run
     * a flywheel block holds its end. Noise handed on there would give a unit decoder that
     * scans for a start sequence (the telecommand profile) false ones. So the sub-bits are
     * trimmed at the change point of their power: y^2 has mean a^2 + s^2 on the signal and
     * s^2 on noise, levels unknown, and the split j maximises the Gaussian log-likelihood gain
     *   G(j) = N ln P(0, N) - j ln P(0, j) - (N - j) ln P(j, N)   (twice nats; P the mean y^2)
     * over the window's sub-bits (acquisition: the later part the stronger) or the block's
     * (flywheel: the earlier part the stronger). A split is taken when G exceeds 2 x 10
     * nats, with 2n + 2 sub-bits of margin; otherwise the power is even and all is kept. */
    uint64_t y0 = 0, y1 = ny;
    if (backfill) {
        y1 = 0;
        while (y1 < ny && d->tblk[y1] * d->fs_hz < (double)t_hi) y1++;
    }
    if ((backfill || fly) && ny >= 32) {
        double *cs = d->dre; /* scratch: prefix sums of y^2 (4B + 64 doubles; ny <= 3.03 B + 48) */
        cs[0] = 0;
        for (uint64_t i = 0; i < ny; i++) cs[i + 1] = cs[i] + (double)d->yblk[i] * d->yblk[i];
        const double tot = cs[ny], N = (double)ny;
        double bestg = 20.0;
        uint64_t jb = 0;
        for (uint64_t j = 8; j + 8 <= ny; j++) {
            double p1 = cs[j] / (double)j, p2 = (tot - cs[j]) / (N - (double)j);
            if (!(p1 > 0) || !(p2 > 0)) continue;
            if (backfill ? !(p2 > p1) : !(p1 > p2)) continue;
            double g = N * log(tot / N) - (double)j * log(p1) - (N - (double)j) * log(p2);
            if (g > bestg) { bestg = g; jb = j; }
        }
        const uint64_t mg = 2 * (uint64_t)d->n + 2;
        if (jb) {
            if (backfill) y0 = jb > mg ? jb - mg : 0;
            else y1 = jb + mg < ny ? jb + mg : ny;
        }
    }
    if (backfill || fly) {
        /* the next block continues after the last sub-bit handed on */
        if (y1 > y0) d->last_emit_pos = d->tblk[y1 - 1] * d->fs_hz;
        else if (backfill) d->have_emit = 0;
    }
    uint64_t nye = y1 > y0 ? y1 - y0 : 0;
    if (backfill) {
        /* Level test on acquisition: a false lock (the coherence test passes noise with
         * probability P_fa = 1e-6 a block) has soft values without a BPSK level, and the
         * word stage, which scales by the level found, would take its noise for a signal.
         * M2M4 on the sub-bits handed on: a^2 / s^2 is about 0 on noise (its spread over 256
         * values puts 3 sigma near 0.8) and 2 E_s/N_0 on a signal (1.4 for the n = 7 set at
         * E_b/N_0 = 7 dB, 2.2 for the demo set at 7.5 dB). Below ACQ_MIN_SNR, or with fewer
         * than 32 sub-bits, the block is not acquired; the next one tries again (and
         * backfills this one). Measured with P_fa raised to 1e-2 (ulk_demod_set_acq_pfa),
         * 600 s of noise per set: 44 / 2 / 40 words from false locks without this test (demo,
         * n = 7 and square sets), 0 with it; the benchmark's WER, acquisition failures and
         * absent words at 7 - 8 dB unchanged. */
        double q2 = 0, q4 = 0;
        for (uint64_t i = y0; i < y1; i++) {
            double y = d->yblk[i];
            q2 += y * y;
            q4 += y * y * y * y;
        }
        double aq = nye >= 32 ? m2m4_amp(q2 / (double)nye, q4 / (double)nye) : 0;
        double sq = nye >= 32 ? q2 / (double)nye - aq * aq : 0;
        if (!(aq > 0) || !(aq * aq >= ACQ_MIN_SNR * sq)) {
            d->have_emit = 0;
            block_unlock(d);
            return 0;
        }
    }
    st->y0 = y0;
    st->y1 = y1;
    st->nye = nye;
    return 1;
}

/* Stage 7: amplitude and estimates from the block, then the soft sub-bits [st->y0, y1)
 * go to the pattern stage. */
static void blk_hand_on(ulk_demod *d, const blk_state *st)
{
    const int k = d->k;
    const uint64_t t_lo = st->t_lo, t_hi = st->t_hi, y0 = st->y0, y1 = st->y1, nye = st->nye;
    const double eps = st->eps, rho = st->rho, beta = st->beta, coh = st->coh;
    const double zr = st->zr, zi = st->zi, rq = st->rq, eq = st->eq;
    const int fly = st->fly;
    /* 7. amplitude (M2M4 on the block), estimates, hand-over to the pattern stage */
    double m2 = 0, m4 = 0, m1 = 0;
    for (uint64_t i = y0; i < y1; i++) {
        double y = d->yblk[i];
        m1 += fabs(y);
        m2 += y * y;
        m4 += y * y * y * y;
    }
    if (nye) { m1 /= (double)nye; m2 /= (double)nye; m4 /= (double)nye; }
    double a = nye >= 16 ? m2m4_amp(m2, m4) : 0;
    if (!(a > 0)) a = m1;
    if (!(a > 0)) a = 1e-30;
    if (!fly) {
        d->amp = d->prev_locked && d->amp > 0 ? 0.7 * d->amp + 0.3 * a : a;
        /* Reference amplitude: a block that holds the signal only in part under-estimates it
         * (never over), so keep a slowly decaying maximum. */
        if (a > 0.9 * d->a_ref || !(d->a_ref > 0)) {
            set_aref(d, a > 0.9 * d->a_ref ? a : 0.9 * d->a_ref);
            d->nsr_ref = m2 > a * a ? (m2 - a * a) / (a * a) : 0;
        } else {
            set_aref(d, 0.9 * d->a_ref);
        }
        /* Clock error over the run: linear fit of the unwrapped clock phase at block centres. */
        {
            double tm = 0.5 * ((double)t_lo + (double)t_hi);
            /* Received phase 2 pi k theta_true = template phase + delta: I ~ cos delta, Q ~ sin
             * delta for a sine; for a square the dumps are triangular in delta, so
             * delta = (pi/2) Q / (|I| + |Q|) there. */
            double delta = d->square ? (eq > 0 ? M_PI / 2 * rq / eq : 0) : atan2(zi, zr) / 2;
            double thm = tm * rho + beta + delta / (2 * M_PI * k);
            if (!d->run_n) { d->run_t0 = tm; d->run_th0 = thm; }
            /* Weight: coherence, and the share of the block's own sub-bits that hold signal (a
             * block at the start or end of a transmission measures its phase on a few sub-bits). */
            double fsig = d->a_ref > 0 ? (m2 / (d->a_ref * d->a_ref) - d->nsr_ref) : 0;
            if (fsig < 0) fsig = 0;
            if (fsig > 1) fsig = 1;
            double x = tm - d->run_t0, y = thm - d->run_th0 - x / d->sps;
            double w = coh * coh * coh * coh * fsig * fsig * fsig * fsig * (double)nye;
            d->run_n++;
            d->r_w += w; d->r_x += w * x; d->r_y += w * y; d->r_xx += w * x * x; d->r_xy += w * x * y;
        }
        /* Blocks that only partly hold the signal have a lower coherence and a poorer clock
         * estimate: weight by coh^2 (about the block's signal-to-noise share). */
        d->eps_sum += eps * (double)nye * coh * coh;
        d->eps_w += (double)nye * coh * coh;
        if (d->pend_interior) { d->eps_isum += d->eps_pend; d->eps_iw += d->w_pend; }
        d->pend_interior = d->prev_locked;
        d->eps_pend = eps * (double)nye * coh * coh;
        d->w_pend = (double)nye * coh * coh;
        d->signal_found = 1;
    }
    d->prev_locked = 1;
    d->prev_rho = rho;
    d->prev_beta = beta;
    for (uint64_t i = y0; i < y1; i++) {
        float y = (float)(d->yblk[i] / d->amp);
        if (d->opt.on_soft) d->opt.on_soft(d->tblk[i], y, d->opt.user);
        d->n_subbits++;
        pattern_push(d, d->yblk[i], d->tblk[i]);
    }
}

/* Demodulates block b (the last one when final): each stage returns 0 when the block
 * ends there. */
static void process_block(ulk_demod *d, uint64_t b, int final)
{
    const int B = d->B;
    uint64_t s_lo = b ? blk_start(d, b - 1) : 0;
    uint64_t s_hi = blk_start(d, b + 2);
    if (s_hi > d->n_in) s_hi = d->n_in;
    uint64_t t_lo = blk_start(d, b), t_hi = final ? d->n_in : blk_start(d, b + 1);
    if (t_hi > d->n_in) t_hi = d->n_in;
    if (t_lo >= t_hi || s_hi <= s_lo) return;
    uint64_t m_lo = b ? (b - 1) * (uint64_t)B : 0;
    uint64_t m_hi = (b + 2) * (uint64_t)B;
    if (m_hi > d->u_cnt) m_hi = d->u_cnt;
    if (m_hi <= m_lo || m_hi - m_lo < 12) { block_unlock(d); return; }
    blk_state st = {0};
    st.b = b;
    st.s_lo = s_lo;
    st.s_hi = s_hi;
    st.t_lo = t_lo;
    st.t_hi = t_hi;
    st.m_lo = m_lo;
    st.M = (int)(m_hi - m_lo);
    if (!blk_detect(d, &st)) return;
    blk_clock_pilot(d, &st);
    if (!blk_dumps(d, &st) || !blk_subbit_phase(d, &st) || !blk_soft(d, &st) || !blk_trim(d, &st)) return;
    blk_hand_on(d, &st);
}

/* ---------------------------------------------------------------- public */

/* The sub-bit patterns of zero, one and idle as +-1 chips and as the line levels they
 * give, and the decision denominator (d->mden) those levels imply. */
static void demod_set_patterns(ulk_demod *d, const ulk_link *cfg)
{
    for (int t = 0; t < d->n; t++) {
        d->pz[t] = cfg->zero[t] ? 1.0f : -1.0f;
        d->po[t] = cfg->one[t] ? 1.0f : -1.0f;
        d->pidle[t] = cfg->idle[t] ? 1.0f : -1.0f;
        d->d_zo += cfg->zero[t] != cfg->one[t];
    }
    if (d->d_zo == 0) d->d_zo = 1;
    {
        float lz = 1, lo = 1, li = 1;
        double czo = 1; /* correlation of the n + 1 levels of Z and O (the leading +1 shared) */
        for (int t = 0; t < d->n; t++) {
            if (cfg->zero[t]) lz = -lz;
            if (cfg->one[t]) lo = -lo;
            if (cfg->idle[t]) li = -li;
            d->lz[t] = lz;
            d->lo[t] = lo;
            d->lidle[t] = li;
            czo += lz * lo;
        }
        d->mden = d->nrzm ? (d->n + 1) - fabs(czo) : 2.0 * d->d_zo;
        if (!(d->mden > 0)) d->mden = 1;
    }
}

/* Allocates the demodulator's buffers at the capacities set; -1 when memory is short
 * (the caller destroys d, which frees what was allocated). */
static int demod_alloc(ulk_demod *d)
{
    const int B = d->B, k = d->k;
    if (d->slot_path) {
        d->zre = ulk_malloc(d->scap * sizeof *d->zre);
        d->zim = ulk_malloc(d->scap * sizeof *d->zim);
        d->rpre = ulk_malloc(d->rcap * sizeof *d->rpre);
        d->qpre = ulk_malloc(d->rcap * sizeof *d->qpre);
        if (!d->zre || !d->zim || !d->rpre || !d->qpre) return -1;
        d->xcap = 1; /* the samples themselves are not kept */
    }
    d->xb = ulk_malloc(d->xcap * sizeof *d->xb);
    d->ure = ulk_malloc(d->ucap * sizeof *d->ure);
    d->uim = ulk_malloc(d->ucap * sizeof *d->uim);
    d->sre = ulk_malloc(3 * (size_t)B * sizeof *d->sre + 64);
    d->sim = ulk_malloc(3 * (size_t)B * sizeof *d->sim + 64);
    d->dre = ulk_malloc((4 * (size_t)B + 64) * sizeof *d->dre); /* also the trim's scratch */
    d->dim = ulk_malloc(3 * (size_t)B * sizeof *d->dim + 64);
    d->ph = ulk_malloc((d->hcap + 1) * sizeof *d->ph);
    if (d->square) {
        /* a half-cycle has at most 2 SQ_EDGE_FIT spc + 2 samples within SQ_EDGE_FIT of its edges */
        d->ecap = (size_t)d->hcap * ((size_t)ceil(2 * SQ_EDGE_FIT * d->fs_hz / d->fsc_hz) + 3) + 64;
        d->esm = ulk_malloc(d->ecap * sizeof *d->esm);
        if (!d->esm) return -1;
    }
    d->ch = ulk_malloc((d->hcap + 1) * sizeof *d->ch);
    d->qh = ulk_malloc((d->hcap + 1) * sizeof *d->qh);
    d->yblk = ulk_malloc(d->ycap * sizeof *d->yblk);
    d->tblk = ulk_malloc(d->ycap * sizeof *d->tblk);
    d->qacc = ulk_calloc(4 * (size_t)k, sizeof *d->qacc);
    d->pv = ulk_malloc(d->pcap * sizeof *d->pv);
    d->pt = ulk_malloc(d->pcap * sizeof *d->pt);
    d->py = ulk_malloc(d->pcap * sizeof *d->py);
    {
        size_t nal = (size_t)(4 * d->n + (d->W + 4) * d->n + 8);
        d->al_ci = ulk_malloc(nal * sizeof *d->al_ci);
        d->al_cz = ulk_malloc(nal * sizeof *d->al_cz);
        d->al_co = ulk_malloc(nal * sizeof *d->al_co);
    }
    if (!d->xb || !d->ure || !d->uim || !d->sre || !d->sim || !d->dre || !d->dim || !d->ph || !d->ch || !d->qh || !d->yblk ||
        !d->tblk || !d->qacc || !d->pv || !d->pt || !d->py || !d->al_ci || !d->al_cz || !d->al_co)
        return -1;
    return 0;
}

/* What ulk_demod_create and ulk_demod_create_symbols share: everything but the checks of
 * the word fields. words: 1 when the word stage hands its words on. */
static int demod_new(const ulk_link *cfg, double fs_hz, const ulk_demod_options *opt, int words, ulk_demod **out,
                     ulk_diag *diag)
{
    double rb = ulk_ratio_to_double(cfg->bit_rate);
    double rs = rb * cfg->n_subbits;
    double fsc = ulk_ratio_to_double(cfg->fsc);
    if (!(rb > 0) || !(fsc > 0))
        return ulk_fail(diag, ULK_EINVAL, "demodulator: bit rate and subcarrier frequency must be positive");
    double kd = fsc / rs;
    int k = (int)floor(kd + 0.5);
    if (k < 1 || fabs(kd - k) > 1e-9 * kd)
        return ulk_fail(diag, ULK_EINVAL, "demodulator: subcarrier %g Hz is not a whole multiple of the sub-bit rate %g Hz", fsc, rs);
    /* The data signal's main lobe reaches f_sc + R_s; it must lie below Nyquist. */
    if (!(fs_hz >= 2.0 * (fsc + rs) * (1 - 1e-12)))
        return ulk_fail(diag, ULK_EINVAL,
                        "demodulator: sample rate %g Hz is too low for this link (needs at least 2 (f_sc + R_s) = %g Hz, "
                        "the main lobe's Nyquist rate)",
                        fs_hz, 2.0 * (fsc + rs));
    /* The block buffers scale with the samples per sub-bit; bound them (about 200 bytes a
     * sample per sub-bit) so a hostile rate is refused before anything is allocated. */
    if (fs_hz > ULK_DEMOD_MAX_FS_HZ || fs_hz / rs > ULK_DEMOD_MAX_SPS)
        return ulk_fail(diag, ULK_ELIMIT,
                        "demodulator: sample rate %g Hz is beyond the decoder's limit (at most %g Hz and %g samples "
                        "per sub-bit; this link's sub-bit rate is %g Hz): resample the capture to a lower rate",
                        fs_hz, ULK_DEMOD_MAX_FS_HZ, (double)ULK_DEMOD_MAX_SPS, rs);

    ulk_demod *d = ulk_calloc(1, sizeof *d);
    if (!d) return ulk_fail(diag, ULK_ENOMEM, "demodulator: out of memory");
    d->l = *cfg;
    d->words_out = words;
    d->fs_hz = fs_hz;
    d->rs_hz = rs;
    d->fsc_hz = fsc;
    d->sps = fs_hz / rs;
    d->n = cfg->n_subbits;
    d->k = k;
    d->W = cfg->word_bits;
    d->nrzm = cfg->line_code == ULK_LINE_NRZM;
    d->square = cfg->waveform == ULK_WAVE_SQUARE;
    d->inv_aref = 1.0;
    if (opt) d->opt = *opt;
    d->eps_max = (d->opt.max_ppm > 0 ? d->opt.max_ppm : ULK_DEMOD_DEFAULT_PPM) * 1e-6;
    d->acq_pfa = 1e-6;
    demod_set_patterns(d, cfg);
    for (int i = 0; i < TAB_N; i++) {
        d->tab[i] = (float)sin(2 * M_PI * i / TAB_N);
        d->tabcs[2 * i] = (float)cos(2 * M_PI * i / TAB_N);
        d->tabcs[2 * i + 1] = d->tab[i];
    }

    /* Block size: 256 sub-bits, fewer when a sub-bit is very long so memory stays small. */
    int B = d->opt.block_subbits > 0 ? d->opt.block_subbits : 256;
    while (B > 16 && (double)B * d->sps > (double)(1 << 21)) B /= 2;
    d->B = B;
    d->L = B * d->sps;
    d->dc_alpha = 1.0 / (8.0 * d->sps);
    d->xcap = (uint64_t)ceil(3 * d->L + 6 * d->sps) + 64;
    d->ucap = pow2_at_least(4 * (uint64_t)B + 16); /* rings of 2^j: indices by mask */
    d->hcap = (uint64_t)((3 * d->L + 8 * d->sps) * 2.0 * (fsc / fs_hz) * 1.01) + 64;
    d->ycap = 3 * (uint64_t)(d->L / d->sps * 1.01) + 48; /* the window on acquisition */
    /* mixer step in cycles x 2^64 (f_sc / f_s < 1/2) */
    d->mix_inc = (uint64_t)llroundl((long double)(fsc / fs_hz) * 18446744073709551616.0L);
    d->u_end = (uint64_t)ceil(d->sps);
    if (cfg->has_pilot && cfg->pilot_amplitude > 0) {
        double fp = ulk_ratio_to_double(cfg->fp);
        /* A pilot on the subcarrier itself (or, for a square subcarrier, on an odd harmonic)
         * cannot be told from the data by a tone estimate; it is left in (docs/decode.md). */
        double r = fp / fsc;
        int on_sc = fabs(r - floor(r + 0.5)) < 1e-9 && ((int)floor(r + 0.5) == 1 || (d->square && ((int)floor(r + 0.5) % 2) == 1));
        d->pilot_on = !on_sc && fp < fs_hz / 2;
        d->fp_hz = fp;
    }
    /* Baseband slots: whole samples, at most an eighth of a subcarrier cycle (one sample at
     * low rates: exactly what the sample-domain filter does).
     * A sub-bit boundary then falls at most half a slot from a slot boundary, where the sine
     * template is within 1/16 cycle of its zero crossing: at most 0.6 % of one cycle's
     * template energy lands in the neighbouring sub-bit. (Quarter-cycle slots, 2.3 %, cost
     * the demo profile about 0.1 dB at 48 kHz with slots of one or two samples.) Not for a square subcarrier (its harmonics are part of the
     * matched filter) nor with a pilot to remove: those take the samples as they are. */
    {
        int Lsi = (int)floor(d->sps / (8.0 * k));
        if (Lsi < 1) Lsi = 1;
        d->slot_path = !d->square && !d->pilot_on && (3 * d->L + 8 * d->sps) / Lsi <= 262144.0;
        d->Lsi = Lsi;
        d->Ls = Lsi;
        d->inv_Lsi = 1.0 / Lsi;
        d->scap = (uint64_t)((3 * d->L + 8 * d->sps) / Lsi) + 64;
        d->rcap = d->scap + 1;
        /* the DC level moves every quarter of a nominal sub-bit (its time constant is 8 of
         * them), by the one-pole step of that many samples */
        int ev = Lsi * (int)floor(d->sps / (4.0 * Lsi)); /* whole slots */
        if (ev < Lsi) ev = Lsi;
        d->dc_every = ev;
        d->dc_inv = 1.0 / ev;
        d->dc_step = 1.0 - pow(1.0 - d->dc_alpha, ev);
    }
    d->lag = (uint64_t)d->n * (uint64_t)(2 * d->W + 20);
    d->pcap = pow2_at_least(d->lag + 4 * (uint64_t)d->n + 16);

    if (demod_alloc(d) != 0) {
        ulk_demod_destroy(d);
        return ulk_fail(diag, ULK_ENOMEM, "demodulator: out of memory");
    }
    *out = d;
    return 0;
}

int ulk_demod_create(const ulk_link *cfg, double fs_hz, const ulk_demod_options *opt,
                     ulk_demod **out, ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!cfg) return ulk_fail(diag, ULK_EINVAL, "demodulator: no link profile given");
    if (cfg->word_bits == 0)
        return ulk_fail(diag, ULK_EINVAL, "demodulator: the link has no words (its units are decoded from the soft "
                                          "symbols: ulk_demod_create_symbols)");
    if (cfg->n_subbits < 1 || cfg->n_subbits > ULK_MAX_SUBBITS || cfg->word_bits < 1 ||
        cfg->word_bits > ULK_MAX_WORD_BITS)
        return ulk_fail(diag, ULK_EINVAL, "demodulator: link has %d sub-bits per bit and %d-bit words (expected 1..16 and 1..128)",
                        cfg->n_subbits, cfg->word_bits);
    return demod_new(cfg, fs_hz, opt, 1, out, diag);
}

/* The symbol front end is the block stage of ulk_demod_create on n = 1. Its estimates keep
 * what the word stage measured on such a link before there was a symbol path, so decode's
 * figures stay the same: E_b/N_0 and the amplitude from the symbols of one-bit "words"
 * (Z "0", O "1", idle "0", no gap, the line code as given), and the truncated and ambiguous
 * counts of those words. These are decisions of the word stage on values that are not the
 * link's; the words themselves are dropped. A symbol-level estimator would change the
 * golden decode outputs, so it is a change of its own. */
int ulk_demod_create_symbols(const ulk_demod_symbols *sym, double fs_hz, const ulk_demod_options *opt,
                             ulk_demod **out, ulk_diag *diag)
{
    if (!out) return ULK_EINVAL;
    *out = NULL;
    if (!sym) return ulk_fail(diag, ULK_EINVAL, "demodulator: no symbol description given");
    ulk_link l;
    memset(&l, 0, sizeof l);
    l.bit_rate = sym->symbol_rate;
    l.n_subbits = 1;
    l.one[0] = 1;
    l.line_code = sym->line_code;
    l.fsc = sym->fsc;
    l.waveform = sym->waveform;
    l.amplitude = sym->amplitude;
    l.has_pilot = sym->has_pilot;
    l.fp = sym->fp;
    l.pilot_amplitude = sym->pilot_amplitude;
    l.opcode_bits = 1;
    l.word_bits = 1;
    return demod_new(&l, fs_hz, opt, 0, out, diag);
}

static void close_u_window(ulk_demod *d)
{
    d->ure[d->u_cnt & (d->ucap - 1)] = d->u_re;
    d->uim[d->u_cnt & (d->ucap - 1)] = d->u_im;
    d->u_cnt++;
    d->u_re = d->u_im = 0;
    d->u_samples = 0;
    d->u_end = (uint64_t)ceil((double)(d->u_cnt + 1) * d->sps);
}

/* Stores a slot; the DC level moves every dc_every samples toward their mean (the blocker
 * works on slots here: each slot had the level of its time subtracted as it came). */
static inline void store_slot(ulk_demod *d, float zr, float zi, float sx, int nsmp)
{
    d->zre[d->s_w] = zr;
    d->zim[d->s_w] = zi;
    if (++d->s_w == d->scap) d->s_w = 0;
    d->s_cnt++;
    d->dc_sx += sx;
    d->dc_n += nsmp;
    if (d->dc_n >= d->dc_every) {
        d->dc += d->dc_step * (d->dc_sx / d->dc_n - d->dc);
        d->dc_sx = 0;
        d->dc_n = 0;
    }
}

/* U_m over nominal sub-bit m = the slots whose centres lie in [m sps, (m + 1) sps), for every
 * m whose slots are all closed (at the end: every m with at least one). */
static void u_update(ulk_demod *d, int final)
{
    const double L = d->Ls, h = (L - 1) / 2;
    for (;;) {
        double p1 = (double)(d->u_cnt + 1) * d->sps;
        double j1f = ceil((p1 - h) / L);
        uint64_t j0 = d->u_next, j1 = j1f > 0 ? (uint64_t)j1f : 0;
        if (j1 > d->s_cnt) {
            if (!final || j0 >= d->s_cnt) return;
            j1 = d->s_cnt;
        }
        if (d->s_cnt > d->scap && j0 < d->s_cnt - d->scap) j0 = d->s_cnt - d->scap;
        float ur = 0, ui = 0;
        uint64_t r = j0 % d->scap;
        for (uint64_t j = j0; j < j1; j++) {
            ur += d->zre[r];
            ui += d->zim[r];
            if (++r == d->scap) r = 0;
        }
        d->ure[d->u_cnt & (d->ucap - 1)] = ur;
        d->uim[d->u_cnt & (d->ucap - 1)] = ui;
        d->u_cnt++;
        d->u_next = j1 > j0 ? j1 : j0;
    }
}

/* Non-finite samples count as 0 and magnitudes are limited far above any real level (full
 * scale is 1), so a corrupt sample cannot poison every later estimate. One test on the
 * common path. */
static inline float sane(float v)
{
    if (!(fabsf(v) <= 1e6f)) v = v != v ? 0.0f : v > 0 ? 1e6f : -1e6f;
    return v;
}

#define PH_SHIFT (64 - TAB_BITS)

int ulk_demod_push(ulk_demod *d, const float *x, size_t n)
{
    if (!d) return ULK_EINVAL;
    if (d->status) return d->status;
    if (d->finished) return ULK_EINVAL;
    if (n && !x) return ULK_EINVAL;
    if (n && !d->dc_init) { d->dc = sane(x[0]); d->dc_init = 1; }
    uint64_t ready = blk_start(d, d->blk + 2) + (uint64_t)ceil(2 * d->sps) + 2;
    const float *tab = d->tab;
    const uint64_t inc = d->mix_inc;
    size_t t = 0;
    while (t < n) {
        size_t avail = n - t;
        if (ready - d->n_in < avail) avail = (size_t)(ready - d->n_in);
        uint64_t ph = d->mix_ph;
        if (d->slot_path) {
            const int Lsi = d->Lsi;
            if (d->fill == 0 && avail >= (size_t)Lsi) {
                /* whole slots: the DC level is constant between its moves */
                size_t ns = avail / (size_t)Lsi;
                const float *cs = d->tabcs;
                float *ZR = d->zre, *ZI = d->zim;
                uint64_t w = d->s_w;
                const uint64_t cap = d->scap;
                double dcd = d->dc, csx = d->dc_sx;
                float dc = (float)dcd;
                int cn = d->dc_n;
                size_t q = 0;
                if (Lsi == 1) {
                    /* Slots of one sample (a high subcarrier, or a decimated complex
                     * capture): runs of slots up to the DC level's next move, without the
                     * inner loop and the test after each slot. The same operations in the
                     * same order as below (the sums start from +0 as there), so the same
                     * values. */
                    while (q < ns) {
                        size_t run = cn < d->dc_every ? (size_t)(d->dc_every - cn) : 1;
                        if (run > ns - q) run = ns - q;
                        for (size_t e = 0; e < run; e++, t++) {
                            float v = sane(x[t]), y = v - dc;
                            const float *c = cs + 2 * (ph >> PH_SHIFT);
                            ZR[w] = 0.0f + y * c[0];
                            ZI[w] = 0.0f - y * c[1];
                            if (++w == cap) w = 0;
                            csx += 0.0f + v;
                            ph += inc;
                        }
                        q += run;
                        cn += (int)run;
                        if (cn >= d->dc_every) {
                            dcd += d->dc_step * (csx * d->dc_inv - dcd);
                            dc = (float)dcd;
                            csx = 0;
                            cn = 0;
                        }
                    }
                }
                for (; q < ns; q++) {
                    float zr = 0, zi = 0, sx = 0;
                    for (int e = 0; e < Lsi; e++, t++) {
                        float v = sane(x[t]), y = v - dc;
                        const float *c = cs + 2 * (ph >> PH_SHIFT);
                        sx += v;
                        zr += y * c[0];
                        zi -= y * c[1];
                        ph += inc;
                    }
                    ZR[w] = zr;
                    ZI[w] = zi;
                    if (++w == cap) w = 0;
                    csx += sx;
                    cn += Lsi;
                    if (cn >= d->dc_every) {
                        dcd += d->dc_step * (csx * d->dc_inv - dcd);
                        dc = (float)dcd;
                        csx = 0;
                        cn = 0;
                    }
                }
                d->s_w = w;
                d->s_cnt += ns;
                d->dc = dcd;
                d->dc_sx = csx;
                d->dc_n = cn;
                d->n_in += ns * (uint64_t)Lsi;
            } else {
                /* one sample into the open slot */
                float v = sane(x[t]), y = v - (float)d->dc;
                d->z_sx += v;
                d->z_re += y * tab[((ph >> PH_SHIFT) + TAB_N / 4) & (TAB_N - 1)];
                d->z_im -= y * tab[ph >> PH_SHIFT];
                ph += inc;
                t++;
                d->n_in++;
                if (++d->fill == Lsi) {
                    store_slot(d, d->z_re, d->z_im, d->z_sx, Lsi);
                    d->z_re = d->z_im = d->z_sx = 0;
                    d->fill = 0;
                }
            }
        } else {
            /* the samples are kept for the matched filter; the DC blocker runs per sample */
            uint64_t stop = d->u_end - d->n_in;
            size_t run = stop < avail ? (size_t)stop : avail;
            if (run < 1) run = 1;
            size_t xw = d->xw;
            double dc = d->dc, zr = 0, zi = 0;
            const double al = d->dc_alpha;
            for (size_t e = t + run; t < e; t++) {
                double v = sane(x[t]);
                dc += al * (v - dc);
                float y = (float)(v - dc);
                d->xb[xw] = y;
                if (++xw == d->xcap) xw = 0;
                zr += y * tab[((ph >> PH_SHIFT) + TAB_N / 4) & (TAB_N - 1)];
                zi -= y * tab[ph >> PH_SHIFT];
                ph += inc;
            }
            d->dc = dc;
            d->xw = xw;
            d->u_re += zr;
            d->u_im += zi;
            d->u_samples += run;
            d->n_in += run;
            if (d->n_in >= d->u_end) close_u_window(d);
        }
        d->mix_ph = ph;
        if (d->n_in >= ready) {
            if (d->slot_path) u_update(d, 0);
            process_block(d, d->blk, 0);
            d->blk++;
            ready = blk_start(d, d->blk + 2) + (uint64_t)ceil(2 * d->sps) + 2;
            if (d->status) return d->status;
        }
    }
    return d->status;
}

int ulk_demod_set_acq_pfa(ulk_demod *d, double p)
{
    if (!d || !(p > 0 && p < 1) || d->n_in > 0 || d->finished) return ULK_EINVAL;
    d->acq_pfa = p;
    return 0;
}

int ulk_demod_finish(ulk_demod *d)
{
    if (!d) return ULK_EINVAL;
    if (d->finished) return d->status;
    d->finished = 1;
    if (d->slot_path) {
        if (d->fill > 0) store_slot(d, d->z_re, d->z_im, d->z_sx, d->fill);
        d->fill = 0;
        u_update(d, 1);
    } else if (d->u_samples > 0) {
        close_u_window(d);
    }
    while (!d->status && blk_start(d, d->blk) < d->n_in) {
        int last = blk_start(d, d->blk + 1) >= d->n_in;
        process_block(d, d->blk, last);
        d->blk++;
    }
    pattern_reset(d);
    run_close(d);
    return d->status;
}

void ulk_demod_get_estimates(const ulk_demod *d, ulk_demod_estimates *e)
{
    memset(e, 0, sizeof *e);
    e->signal_found = d->signal_found;
    e->n_subbits = d->n_subbits;
    e->n_truncated = d->n_truncated;
    e->n_ambiguous = d->n_ambiguous;
    double eps = d->eps_iw > 0 ? d->eps_isum / d->eps_iw : d->eps_w > 0 ? d->eps_sum / d->eps_w : 0;
    if (d->fit_w > 0) eps = d->fit_sum / d->fit_w;
    else if (d->run_n >= 3 && d->r_w > 0) {
        double mx = d->r_x / d->r_w, my = d->r_y / d->r_w;
        double sxx = d->r_xx / d->r_w - mx * mx, sxy = d->r_xy / d->r_w - mx * my;
        if (sxx > 0) eps = sxy / sxx * d->sps;
    }
    /* Reported only when locked, and never outside the searched range (a fit over a run
     * can step a little past it). */
    double lim = d->eps_max;
    if (2.0 * d->k * lim > 0.45) lim = 0.45 / (2.0 * d->k);
    e->search_limit_ppm = lim * 1e6;
    if (!d->signal_found) eps = 0;
    e->at_search_limit = d->signal_found && (d->n_at_edge > 0 || fabs(eps) >= lim);
    if (eps > lim) eps = lim;
    if (eps < -lim) eps = -lim;
    e->rate_error_ppm = eps * 1e6;
    e->subcarrier_hz = d->fsc_hz * (1 + eps);
    if (d->ns >= 16) {
        double m2 = d->s2 / (double)d->ns, m4 = d->s4 / (double)d->ns;
        double a = m2m4_amp(m2, m4);
        double s2 = m2 - a * a;
        e->amplitude = a;
        /* soft values are dump / template energy: a^2 / (2 var) = E_s/N_0; E_b = n E_s */
        if (a > 0 && s2 > 0) e->ebn0_db = 10 * log10(d->n * a * a / (2 * s2));
        else if (a > 0) e->ebn0_db = 99.0;
        else e->ebn0_db = -99.0;
    } else {
        e->ebn0_db = -99.0;
    }
}

size_t ulk_demod_n_words(const ulk_demod *d) { return d ? d->n_words : 0; }

const ulk_demod_word *ulk_demod_word_at(const ulk_demod *d, size_t i)
{
    return d && i < d->n_words ? &d->words[i] : NULL;
}

void ulk_demod_destroy(ulk_demod *d)
{
    if (!d) return;
    ulk_free(d->xb);
    ulk_free(d->zre);
    ulk_free(d->zim);
    ulk_free(d->rpre);
    ulk_free(d->qpre);
    ulk_free(d->ure);
    ulk_free(d->uim);
    ulk_free(d->sre);
    ulk_free(d->sim);
    ulk_free(d->dre);
    ulk_free(d->dim);
    ulk_free(d->ph);
    ulk_free(d->ch);
    ulk_free(d->qh);
    ulk_free(d->esm);
    ulk_free(d->yblk);
    ulk_free(d->tblk);
    ulk_free(d->qacc);
    ulk_free(d->pv);
    ulk_free(d->pt);
    ulk_free(d->py);
    ulk_free(d->al_ci);
    ulk_free(d->al_cz);
    ulk_free(d->al_co);
    ulk_free(d->words);
    ulk_free(d);
}
