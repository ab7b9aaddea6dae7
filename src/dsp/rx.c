/* src/rx.c - the receiver (include/ulk/rx.h): carrier recovery for I/Q, then the link
 * profile's unit decoder (ulk_profile_ops, "receiver": blind front end and words or frames),
 * as one streaming object whose results are queued as events and released as they are
 * pulled. The profile reports through the sink of rx_sink.h. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "rx_sink.h"
#include "ulk/limits.h"
#include "ulk/profile.h"
#include "ulk/rx.h"
#include "ulk/sampleio.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define CHUNK 65536    /* real samples read per block by ulk_rx_run_file */
#define CX_CHUNK 32768 /* complex samples per block after acquisition */
#define CX_LANES 8     /* the decimator's taps are padded to a multiple of this (cx_dot) */

/* One queued event with the storage its pointers refer to. */
typedef struct rx_node {
    struct rx_node *next;
    ulk_rx_event ev;
    ulk_decoded dec;
    char *owned;              /* CLTU data hex, or warning text */
    ulk_rx_estimates est;
} rx_node;

struct ulk_rx {
    const ulk_dict *dict;
    ulk_rx_options o;
    char name[512];
    ulk_diag *diag;
    int err;                  /* sticky failure status */
    int finished;
    const ulk_profile_ops *prof; /* the link profile: its unit decoder */
    void *unit;               /* the unit decoder's state */
    struct ulk_rx_sink sink;  /* what the unit decoder reports through */
    rx_node *head, *tail, *cur; /* queue; cur = the event last pulled (freed at the next pull) */
    ulk_rx_counts counts;
    ulk_rx_estimates est;
    /* complex captures: */
    ulk_crec *crec;
    ulk_rcorr *rc;
    ulk_vdemod *vd;
    ulk_writer *vw;
    ulk_carrier rcar;         /* copy of the section with f_o = 0: the loop removed the offset */
    float *acq, *derot, *phi, *audio, *data;
    size_t n_acq, want, cap;  /* acquisition block collected / wanted; buffer capacity */
    int acquired;
    double inv_m;             /* 1 / m_data, 0 when data is off */
    /* decimating front end (cx_decim_plan): low-pass and keep every D-th sample */
    int D;                    /* 1: none */
    int nh;                   /* taps, 2 D K + 1 */
    int nhp;                  /* nh rounded up to a multiple of CX_LANES */
    float *h;                 /* the taps, zeros after them (nhp) */
    float *zr, *zi;           /* I and Q: the last nh - 1 inputs, then those of one push */
    int ph;                   /* inputs since the last output */
    size_t skip;              /* first outputs dropped: the filter's delay, K outputs */
    float *dbuf;              /* decimated samples of one push */
    double fs_in;             /* the capture's rate (o.fs_hz is the decimated one) */
    ulk_ratio fs_q;           /* the carrier recovery's rate, exact (the capture's over D) */
};

/* ---- the event queue ---- */

static rx_node *rx_node_new(ulk_rx *rx, ulk_rx_event_kind kind)
{
    rx_node *n = ulk_calloc(1, sizeof *n);
    if (!n) {
        if (!rx->err) rx->err = ULK_ENOMEM;
        return NULL;
    }
    n->ev.kind = kind;
    n->ev.dec = &n->dec;
    n->ev.hex = "";
    if (rx->tail) rx->tail->next = n;
    else rx->head = n;
    rx->tail = n;
    return n;
}

static void rx_node_free(rx_node *n)
{
    if (!n) return;
    ulk_free(n->owned);
    ulk_free(n);
}

static void rx_warn(ulk_rx *rx, const char *fmt, ...)
{
    char buf[1024];
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(buf, sizeof buf, fmt, ap);
    va_end(ap);
    rx_node *n = rx_node_new(rx, ULK_RX_WARNING);
    if (!n) return;
    n->owned = ulk_strdup(buf);
    if (!n->owned && !rx->err) rx->err = ULK_ENOMEM;
    n->ev.text = n->owned ? n->owned : "";
}

/* sec_refused: a secured frame the security check refused (counted apart from damage). */
static void rx_count(ulk_rx *rx, const ulk_decoded *d, int sec_refused)
{
    rx->counts.n_units++;
    if (d->status == ULK_WORD_ACCEPTED) {
        rx->counts.n_accepted++;
    } else {
        rx->counts.n_rejected++;
        if (d->reject == ULK_REJ_VEHICLE || d->reject == ULK_REJ_SYSTEM) rx->counts.n_rejected_address++;
        else if (sec_refused) rx->counts.n_rejected_security++;
        else if (d->reject == ULK_REJ_LENGTH || d->reject == ULK_REJ_ALIGNMENT || d->reject == ULK_REJ_CHECK)
            rx->counts.n_rejected_damaged++;
    }
}

/* ---- the sink: what the profile's unit decoder reports through ---- */

static int sink_unit(void *user, const ulk_rx_event *ev, const ulk_decoded *dec, const char *hex, int sec_refused)
{
    ulk_rx *rx = user;
    if (rx->err) return rx->err;
    rx_node *n = rx_node_new(rx, ev->kind);
    if (!n) return ULK_ENOMEM;
    n->dec = *dec;
    n->ev = *ev;
    n->ev.dec = &n->dec;
    n->ev.hex = n->dec.hex;
    if (hex) {
        n->owned = ulk_strdup(hex);
        if (!n->owned) return rx->err = ULK_ENOMEM;
        n->ev.hex = n->owned;
    }
    rx_count(rx, &n->dec, sec_refused);
    return 0;
}

static int sink_notice(void *user, const char *line)
{
    ulk_rx *rx = user;
    rx_node *n = rx_node_new(rx, ULK_RX_NOTICE);
    if (n && !(n->owned = ulk_strdup(line))) rx->err = ULK_ENOMEM;
    if (n && n->owned) n->ev.text = n->owned;
    return rx->err ? ULK_ENOMEM : 0;
}

static void sink_fail(void *user, int status)
{
    ulk_rx *rx = user;
    if (!rx->err) rx->err = status;
}

/* ---- complex captures: carrier recovery in front of the link decoder ---- */

static ulk_ratio ratio_of_rate(const ulk_rx_options *o)
{
    ulk_ratio q;
    if (o->fs_exact && ulk_ratio_parse(o->fs_exact, &q) == 0 && q.num > 0) return q;
    char buf[64];
    snprintf(buf, sizeof buf, "%.6f", o->fs_hz);
    if (ulk_ratio_parse(buf, &q) == 0 && q.num > 0) return q;
    return ulk_ratio_make((int64_t)llround(o->fs_hz), 1);
}

/* The carrier mode: checked, and the loop, ranging correlator and voice demodulator set up. */
static int cx_mode(ulk_rx *rx, const ulk_carrier *c, const ulk_carrier_mode **out)
{
    const char *path = rx->name;
    const char *mname = rx->o.mode ? rx->o.mode : (c->n_modes == 1 ? c->modes[0].name : NULL);
    if (!mname) {
        char list[256] = "";
        for (int k = 0; k < c->n_modes; k++)
            snprintf(list + strlen(list), sizeof list - strlen(list), "%s%s", k ? ", " : "", c->modes[k].name);
        return ulk_fail(rx->diag, ULK_EINVAL, "%s: which carrier mode? give --mode NAME (the dictionary has: %s)", path, list);
    }
    int mi = ulk_carrier_find_mode(c, mname);
    if (mi < 0) return ulk_fail(rx->diag, ULK_EINVAL, "%s: the dictionary's carrier section has no mode '%s'", path, mname);
    const ulk_carrier_mode *mo = &c->modes[mi];
    ulk_carrier_plan plan;
    if (ulk_carrier_plan_indices(c, mo, mo->m_rad, NAN, &plan) == 0 && plan.carrier < 1e-3)
        return ulk_fail(rx->diag, ULK_EINVAL,
                        "%s: mode '%s' leaves no residual carrier (P_c/P_T = %.1f dB: an index near a zero of J0, "
                        "2.405, or of cos, pi/2), so there is no line to recover the carrier from",
                        path, mo->name, 10 * log10(plan.carrier > 0 ? plan.carrier : 1e-30));
    double msum = 0;
    for (int ch = 0; ch < ULK_CH_N; ch++)
        if (mo->on[ch]) msum += mo->m_rad[ch];
    if (msum >= M_PI)
        rx_warn(rx, "%s: mode '%s' has peak phase deviations summing to %.3f rad >= pi: the phase wraps at "
                    "its peaks and the channels will be distorted there", path, mo->name, msum);
    if (rx->o.ranging && !mo->on[ULK_CH_RANGING])
        return ulk_fail(rx->diag, ULK_EINVAL, "%s: --ranging: mode '%s' has no ranging channel", path, mo->name);
    if (rx->o.voice_path && !mo->on[ULK_CH_VOICE])
        return ulk_fail(rx->diag, ULK_EINVAL, "%s: --voice: mode '%s' has no voice channel", path, mo->name);
    *out = mo;
    return 0;
}

static int cx_voice(ulk_rx *rx, const ulk_carrier *c)
{
    int rc = ulk_vdemod_create(rx->o.fs_hz, ulk_ratio_to_double(c->voice_fv_hz), ulk_ratio_to_double(c->voice_dev_hz),
                               ulk_ratio_to_double(c->voice_tone_hz), &rx->vd, rx->diag);
    if (rc < 0) return rc;
    rx->audio = ulk_malloc((rx->cap + 1) * sizeof *rx->audio);
    if (!rx->audio) return ulk_fail(rx->diag, ULK_ENOMEM, "%s: out of memory", rx->name);
    ulk_sample_info vi;
    memset(&vi, 0, sizeof vi);
    vi.fs_hz = ulk_vdemod_rate(rx->vd);
    vi.format = ULK_FMT_F32;
    vi.container = ULK_CONTAINER_WAV;
    vi.channels = 1;
    rc = ulk_writer_open(rx->o.voice_path, &vi, &rx->vw, rx->diag);
    if (rc < 0) return rc;
    rx->est.voice_rate_hz = ulk_vdemod_rate(rx->vd);
    return 0;
}

/* Decimation of a complex capture before the carrier recovery: the carrier recovery and the
 * data decoder cost per sample (the loop is a chain of dependent steps), so at 192 kHz most of
 * the time went to samples far above what the data needs. Only the data channel is decoded
 * (no --ranging, no --voice: their channels may lie far out) and only for a sine subcarrier
 * without pilot (a square one's harmonics carry a quarter of its energy, which the demodulator's
 * square template uses). B = max_offset + f_sc + R_s bounds the data's main lobe around the
 * carrier; D is the largest factor (<= 8) leaving f_s / D >= 2.5 B. The low-pass is a
 * Kaiser-windowed sinc cut at f_s / (2 D), of 2 D K + 1 taps, K = ceil(3.62 / (2 D dw)) with
 * dw = (f_s / D - 2 B) / f_s the transition band: Kaiser's design rule for 60 dB of
 * attenuation, beta = 0.1102 (A - 8.7) = 5.65 and N = (A - 7.95) / (14.36 dw) (Oppenheim and
 * Schafer, Discrete-Time Signal Processing, section 7.5.3; from memory): flat over |f| <= B,
 * and what folds onto |f| <= B (from |f| >= f_s / D - B) 60 dB down, so folded noise adds
 * 1e-6 of the in-band noise. (A Blackman window, -74 dB, needed 5.5 / dw taps: 60 % more for
 * nothing measurable.) Its delay, K D input samples, is removed by dropping the first K
 * outputs, so output m is input sample m D and every time reported stays exact. */
#define CX_KAISER_BETA 5.65

/* I0(x), the modified Bessel function of order 0: its power series sum ((x/2)^k / k!)^2, to
 * the last term below 1e-17 of the sum (x <= 6 here: about 25 terms) */
static double cx_bessel_i0(double x)
{
    double sum = 1, term = 1, q = x * x / 4;
    for (int k = 1; k < 100 && term > 1e-17 * sum; k++) {
        term *= q / ((double)k * k);
        sum += term;
    }
    return sum;
}

static int cx_decim_plan(ulk_rx *rx)
{
    rx->D = 1;
    const ulk_link *l = &rx->dict->link;
    const ulk_carrier *c = ulk_dict_carrier(rx->dict);
    if (rx->o.voice_path || l->waveform != ULK_WAVE_SINE || l->has_pilot) return 0;
    double fs = rx->o.fs_hz;
    double rs = ulk_ratio_to_double(ulk_profile_of(l)->symbol_rate(l)); /* R_s on the subcarrier */
    double mo = rx->o.max_offset_hz > 0 ? rx->o.max_offset_hz : ULK_CARRIER_DEFAULT_MAX_OFFSET_HZ;
    double edge = ulk_ratio_to_double(l->fsc) + rs;
    if (rx->o.ranging) edge = fmax(edge, 8 * ulk_ratio_to_double(c->chip_rate));
    double b = mo + edge;
    int d = (int)floor(fs / (2.5 * b));
    if (d > 8) d = 8;
    if (rx->o.ranging && rx->fs_q.den > INT64_MAX / 8) d = 1; /* its exact rate, fs / D, must fit */
    if (d < 2) return 0;
    double dw = (fs / d - 2 * b) / fs;
    int k = (int)ceil(3.62 / (2.0 * d * dw));
    rx->D = d;
    rx->nh = 2 * d * k + 1;
    rx->nhp = (rx->nh + CX_LANES - 1) / CX_LANES * CX_LANES;
    rx->skip = (size_t)k;
    rx->ph = d - 1; /* outputs at inputs 0, D, 2 D, ...: output j is centred on input (j - K) D */
    size_t len = (size_t)rx->nhp + CX_CHUNK;
    rx->h = ulk_calloc((size_t)rx->nhp, sizeof *rx->h);
    rx->zr = ulk_calloc(len, sizeof *rx->zr);
    rx->zi = ulk_calloc(len, sizeof *rx->zi);
    rx->dbuf = ulk_malloc(2 * (CX_CHUNK / (size_t)d + 2) * sizeof *rx->dbuf);
    if (!rx->h || !rx->zr || !rx->zi || !rx->dbuf) return ulk_fail(rx->diag, ULK_ENOMEM, "%s: out of memory", rx->name);
    double sum = 0, fc = 0.5 / d;
    double *t = ulk_malloc((size_t)rx->nh * sizeof *t);
    if (!t) return ulk_fail(rx->diag, ULK_ENOMEM, "%s: out of memory", rx->name);
    for (int i = 0; i < rx->nh; i++) {
        double m = i - (rx->nh - 1) / 2.0;
        double s = m == 0 ? 2 * fc : sin(2 * M_PI * fc * m) / (M_PI * m);
        double u = 2.0 * m / (rx->nh - 1); /* -1 .. 1 */
        t[i] = s * cx_bessel_i0(CX_KAISER_BETA * sqrt(1 - u * u)) / cx_bessel_i0(CX_KAISER_BETA);
        sum += t[i];
    }
    for (int i = 0; i < rx->nh; i++) rx->h[i] = (float)(t[i] / sum);
    ulk_free(t);
    rx->fs_in = fs;
    rx->o.fs_hz = fs / d;
    return 0;
}

/* y = sum h[t] x[t] over nhp taps for I and Q at once (nhp a multiple of 8, zero taps after
 * nh), in vectors of four (GNU C vector extensions: SSE on x86-64, NEON on aarch64). */
typedef float cx_v4 __attribute__((vector_size(16)));
static inline cx_v4 cx_ld(const float *p)
{
    cx_v4 v;
    memcpy(&v, p, sizeof v);
    return v;
}

static inline void cx_dot(const float *h, const float *xr, const float *xi, int nhp, float *yr, float *yi)
{
    cx_v4 a0 = {0, 0, 0, 0}, a1 = a0, b0 = a0, b1 = a0;
    for (int t = 0; t < nhp; t += 8) {
        cx_v4 h0 = cx_ld(h + t), h1 = cx_ld(h + t + 4);
        a0 += h0 * cx_ld(xr + t);
        a1 += h1 * cx_ld(xr + t + 4);
        b0 += h0 * cx_ld(xi + t);
        b1 += h1 * cx_ld(xi + t + 4);
    }
    cx_v4 a = a0 + a1, b = b0 + b1;
    *yr = (a[0] + a[2]) + (a[1] + a[3]);
    *yi = (b[0] + b[2]) + (b[1] + b[3]);
}

/* Four outputs of one channel, at x, x + d, x + 2 d, x + 3 d, into y[0], y[2], y[4], y[6]:
 * each output's lanes summed exactly as cx_dot sums them (the same products in the same
 * order, so the same floats), but the four final lane sums done at once on the transposed
 * lanes: cx_dot's horizontal sums were a quarter of the decimator's time. */
static inline void cx_dot4(const float *h, const float *x, int d, int nhp, float *y)
{
    cx_v4 a0 = {0, 0, 0, 0}, a1 = a0, b0 = a0, b1 = a0, c0 = a0, c1 = a0, e0 = a0, e1 = a0;
    const float *xb = x + d, *xc = x + 2 * d, *xe = x + 3 * d;
    for (int t = 0; t < nhp; t += 8) {
        cx_v4 h0 = cx_ld(h + t), h1 = cx_ld(h + t + 4);
        a0 += h0 * cx_ld(x + t);
        a1 += h1 * cx_ld(x + t + 4);
        b0 += h0 * cx_ld(xb + t);
        b1 += h1 * cx_ld(xb + t + 4);
        c0 += h0 * cx_ld(xc + t);
        c1 += h1 * cx_ld(xc + t + 4);
        e0 += h0 * cx_ld(xe + t);
        e1 += h1 * cx_ld(xe + t + 4);
    }
    cx_v4 a = a0 + a1, b = b0 + b1, c = c0 + c1, e = e0 + e1;
    cx_v4 l0 = {a[0], b[0], c[0], e[0]}, l1 = {a[1], b[1], c[1], e[1]};
    cx_v4 l2 = {a[2], b[2], c[2], e[2]}, l3 = {a[3], b[3], c[3], e[3]};
    cx_v4 r = (l0 + l2) + (l1 + l3);
    y[0] = r[0];
    y[2] = r[1];
    y[4] = r[2];
    y[6] = r[3];
}

/* 1 when x is finite (exponent not all ones), by its bits: no floating-point compare, so the
 * loop around it vectorises */
static inline int cx_finite(float x)
{
    uint32_t u;
    memcpy(&u, &x, sizeof u);
    return (u & 0x7f800000u) != 0x7f800000u;
}

/* n (<= CX_CHUNK) complex samples through the low-pass; every D-th output (after the first
 * skip) into rx->dbuf. The inputs follow the last nh - 1 ones in zr / zi, so the output for
 * input i is one contiguous dot product (the taps are symmetric: no reversal). Returns the
 * outputs written (n / D + 1 at most). */
static size_t cx_decimate(ulk_rx *rx, const float *iq, size_t n)
{
    const int nh = rx->nh, d = rx->D;
    float *zr = rx->zr + nh - 1, *zi = rx->zi + nh - 1;
    for (size_t i = 0; i < n; i++) {
        float re = iq[2 * i], im = iq[2 * i + 1];
        int ok = cx_finite(re) & cx_finite(im);
        zr[i] = ok ? re : 0;
        zi[i] = ok ? im : 0;
    }
    /* the next output comes at input d - 1 - ph of this push */
    size_t m = 0, i = (size_t)(d - 1 - rx->ph);
    for (; i < n && rx->skip; i += (size_t)d) rx->skip--;
    /* input i is the newest of the nh taps: they start nh - 1 before it */
    for (; i + 3 * (size_t)d < n; i += 4 * (size_t)d, m += 4) {
        cx_dot4(rx->h, rx->zr + i, d, rx->nhp, &rx->dbuf[2 * m]);
        cx_dot4(rx->h, rx->zi + i, d, rx->nhp, &rx->dbuf[2 * m + 1]);
    }
    for (; i < n; i += (size_t)d, m++)
        cx_dot(rx->h, rx->zr + i, rx->zi + i, rx->nhp, &rx->dbuf[2 * m], &rx->dbuf[2 * m + 1]);
    rx->ph = (int)((size_t)rx->ph + n) % d; /* inputs since the last output */
    memmove(rx->zr, rx->zr + n, (size_t)(nh - 1) * sizeof *rx->zr);
    memmove(rx->zi, rx->zi + n, (size_t)(nh - 1) * sizeof *rx->zi);
    return m;
}

static int cx_setup(ulk_rx *rx)
{
    const ulk_carrier *c = ulk_dict_carrier(rx->dict);
    if (!c)
        return ulk_fail(rx->diag, ULK_EINVAL,
                        "%s is a complex (I/Q) capture but the dictionary has no carrier section to decode it with "
                        "(docs/carrier.md)", rx->name);
    const ulk_carrier_mode *mo = NULL;
    int rc = cx_mode(rx, c, &mo);
    if (rc < 0) return rc;
    rx->fs_q = ratio_of_rate(&rx->o);
    rc = cx_decim_plan(rx);
    if (rc < 0) return rc;
    if (rx->D > 1) rx->fs_q = ulk_ratio_make(rx->fs_q.num, rx->fs_q.den * rx->D);
    snprintf(rx->est.mode, sizeof rx->est.mode, "%s", mo->name);
    rx->est.complex_ = 1;
    rx->est.m_data = mo->on[ULK_CH_DATA] ? mo->m_rad[ULK_CH_DATA] : 0;
    rx->inv_m = rx->est.m_data > 0 ? 1.0 / rx->est.m_data : 0;
    /* delayed outputs: the search looks ahead by a short window, so a transmission found after
     * noise or a gap is de-rotated from its first sample (its first word is kept) */
    ulk_crec_config cc = {.fs_hz = rx->o.fs_hz, .max_offset_hz = rx->o.max_offset_hz,
                          .loop_bw_hz = c->has_loop ? c->loop_bw_hz : 0, .delayed = 1};
    rx->est.loop_bw_hz = cc.loop_bw_hz > 0 ? cc.loop_bw_hz : 20;
    rc = ulk_crec_create(&cc, &rx->crec, rx->diag);
    if (rc < 0) return rc;
    rx->want = ulk_crec_block(rx->crec);
    rx->cap = rx->want < CX_CHUNK ? CX_CHUNK : rx->want;
    if (rx->cap < ulk_crec_delay(rx->crec)) rx->cap = ulk_crec_delay(rx->crec); /* the drain's outputs */
    rx->acq = ulk_malloc(2 * rx->want * sizeof *rx->acq);
    rx->phi = ulk_malloc(rx->cap * sizeof *rx->phi);
    rx->derot = ulk_malloc(2 * rx->cap * sizeof *rx->derot);
    rx->data = ulk_malloc(rx->cap * sizeof *rx->data);
    if (!rx->acq || !rx->phi || !rx->derot || !rx->data) return ulk_fail(rx->diag, ULK_ENOMEM, "%s: out of memory", rx->name);
    if (rx->o.ranging) {
        rx->rcar = *c;
        rx->rcar.offset_hz = ulk_ratio_make(0, 1);
        rc = ulk_rcorr_create(&rx->rcar, rx->fs_q, &rx->rc, rx->diag);
        if (rc < 0) return rc;
    }
    return rx->o.voice_path ? cx_voice(rx, c) : 0;
}

/* The profile's unit decoder for the dictionary's link, at the rate of the data samples. */
static int rx_setup_unit(ulk_rx *rx)
{
    rx->prof = ulk_profile_of(&rx->dict->link);
    rx->sink.opt = &rx->o;
    rx->sink.est = &rx->est;
    rx->sink.rx = rx;
    rx->sink.unit = sink_unit;
    rx->sink.notice = sink_notice;
    rx->sink.fail = sink_fail;
    int rc = rx->prof->rx_create(rx->dict, rx->o.fs_hz, &rx->sink, &rx->unit, rx->diag);
    if (rc < 0) return rc;
    /* keys and state on a link without a security association (the profile set up any) */
    if ((rx->o.keys_path || rx->o.state_path) && !rx->prof->security(&rx->dict->link))
        return ulk_fail(rx->diag, ULK_EINVAL, "%s: the dictionary has no link.tc.security: --keys and --state have "
                                              "nothing to do", rx->name);
    return 0;
}

int ulk_rx_create(const ulk_dict *dict, const ulk_rx_options *opt, ulk_rx **out, ulk_diag *diag)
{
    *out = NULL;
    if (!dict || !opt || !(opt->fs_hz > 0) || !isfinite(opt->fs_hz))
        return ulk_fail(diag, ULK_EINVAL, "receiver: a dictionary and a positive sample rate are required");
    ulk_rx *rx = ulk_calloc(1, sizeof *rx);
    if (!rx) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    rx->dict = dict;
    rx->o = *opt;
    rx->diag = diag;
    snprintf(rx->name, sizeof rx->name, "%s", opt->name ? opt->name : "capture");
    rx->o.name = rx->name;
    rx->est.fs_hz = opt->fs_hz;
    int rc = opt->complex_ ? cx_setup(rx) : 0;
    if (rc >= 0) rc = rx_setup_unit(rx);
    if (rc < 0) {
        ulk_rx_destroy(rx);
        return rc;
    }
    *out = rx;
    return 0;
}

/* A failed push or finish: the reason into diag, the receiver unusable from now on. */
static int rx_fail(ulk_rx *rx, int rc)
{
    rx->err = ulk_fail(rx->diag, rc < 0 ? rc : rx->err < 0 ? rx->err : ULK_ENOMEM, "%s: out of memory while decoding",
                       rx->name);
    return rx->err;
}

static int rx_demod(ulk_rx *rx, const float *x, size_t n)
{
    int rc = rx->prof->rx_push(rx->unit, x, n);
    if (rc < 0 || rx->err) return rx_fail(rx, rc);
    return 0;
}

int ulk_rx_push(ulk_rx *rx, const float *x, size_t n)
{
    if (rx->err) return rx->err;
    if (rx->o.complex_ || rx->finished) return ulk_fail(rx->diag, ULK_EINVAL, "%s: real samples pushed to a complex receiver, or after finish", rx->name);
    rx->est.n_samples += n;
    return rx_demod(rx, x, n);
}

/* The n de-rotated outputs in rx->derot / rx->phi (in order from the capture's first sample)
 * to the ranging correlator, the voice demodulator and, as data samples (quadrature /
 * m_data), the demodulator. */
static int cx_outputs(ulk_rx *rx, size_t n)
{
    if (rx->rc && ulk_rcorr_feed(rx->rc, rx->derot, n) < 0)
        return rx->err = ulk_fail(rx->diag, ULK_EINVAL, "%s: ranging failed", rx->name);
    if (rx->vd) {
        long m = ulk_vdemod_push(rx->vd, rx->phi, n, rx->audio);
        if (m < 0) return rx->err = ulk_fail(rx->diag, (int)m, "%s: voice demodulation failed", rx->name);
        if (m > 0) {
            int rc = ulk_writer_write(rx->vw, rx->audio, (size_t)m);
            if (rc < 0)
                return rx->err = ulk_fail(rx->diag, rc, "%s: writing the voice WAV failed (%s)", rx->name, ulk_status_str(rc));
            rx->est.voice_samples += (uint64_t)m;
        }
    }
    if (!(rx->inv_m > 0)) return 0; /* data off in this mode: nothing to decode */
    /* Data: the quadrature of the de-rotated signal, Im(y) = sin(phi) + noise, not phi itself:
     * its noise stays additive and Gaussian at any per-sample SNR, while atan2 has a threshold
     * (measured at 200 kHz: E_b/N_0 estimated 8.1 dB for 10 dB set and a word lost with phi,
     * 9.9 dB and none lost with Im). The data lines in Im carry exactly the planner's P_d, so
     * the decoder's E_b/N_0 estimate is the planner's figure. sin() folds the other channels
     * in as intermodulation products at f_v +- f_sc and 2 f_sc +- the chip rate, outside the
     * data band; the level does not matter to the blind decoder. */
    for (size_t k = 0; k < n; k++) rx->data[k] = (float)(rx->derot[2 * k + 1] * rx->inv_m);
    return rx_demod(rx, rx->data, n);
}

/* Runs n complex samples (n <= rx->cap) through the carrier recovery (delayed by
 * ulk_crec_delay) and its outputs on. */
static int cx_process(ulk_rx *rx, const float *iq, size_t n)
{
    long k = ulk_crec_push(rx->crec, iq, n, rx->derot, rx->phi);
    if (k < 0) return rx->err = ulk_fail(rx->diag, (int)k, "%s: carrier recovery failed", rx->name);
    return k > 0 ? cx_outputs(rx, (size_t)k) : 0;
}

/* Coarse carrier search on the acquisition block, then that block through the loop. */
static int cx_acquire(ulk_rx *rx)
{
    if (rx->n_acq < 64)
        return rx->err = ulk_fail(rx->diag, ULK_EFORMAT, "%s: %zu complex samples are too few to find the carrier",
                                  rx->name, rx->n_acq);
    int rc = ulk_crec_acquire(rx->crec, rx->acq, rx->n_acq);
    if (rc < 0) return rx->err = ulk_fail(rx->diag, rc, "%s: carrier acquisition failed (%s)", rx->name, ulk_status_str(rc));
    rx->acquired = 1;
    /* a block without a clear line is searched on as it is tracked (a lead-in of noise); only
     * a capture in which no line was found anywhere gets the warning, at finish */
    return cx_process(rx, rx->acq, rx->n_acq);
}

/* Samples at the carrier recovery's rate (decimated, or the capture's). */
static int cx_push(ulk_rx *rx, const float *iq, size_t n)
{
    while (n > 0 && !rx->acquired) {
        size_t k = rx->want - rx->n_acq < n ? rx->want - rx->n_acq : n;
        memcpy(rx->acq + 2 * rx->n_acq, iq, 2 * k * sizeof *iq);
        rx->n_acq += k;
        iq += 2 * k;
        n -= k;
        if (rx->n_acq == rx->want) {
            int rc = cx_acquire(rx);
            if (rc < 0) return rc;
        }
    }
    while (n > 0) {
        size_t k = n < CX_CHUNK ? n : CX_CHUNK;
        int rc = cx_process(rx, iq, k);
        if (rc < 0) return rc;
        iq += 2 * k;
        n -= k;
    }
    return 0;
}

int ulk_rx_push_complex(ulk_rx *rx, const float *iq, size_t n)
{
    if (rx->err) return rx->err;
    if (!rx->o.complex_ || rx->finished) return ulk_fail(rx->diag, ULK_EINVAL, "%s: I/Q samples pushed to a real receiver, or after finish", rx->name);
    rx->est.n_samples += n;
    if (rx->D < 2) return cx_push(rx, iq, n);
    while (n > 0) {
        size_t k = n < CX_CHUNK ? n : CX_CHUNK;
        int rc = cx_push(rx, rx->dbuf, cx_decimate(rx, iq, k));
        if (rc < 0) return rc;
        iq += 2 * k;
        n -= k;
    }
    return 0;
}

/* Ranging result and voice file at the end of a complex capture. */
static int cx_finish(ulk_rx *rx)
{
    ulk_crec_get_status(rx->crec, &rx->est.crec);
    const ulk_crec_status *st = &rx->est.crec;
    double range = rx->o.max_offset_hz > 0 ? rx->o.max_offset_hz : ULK_CARRIER_DEFAULT_MAX_OFFSET_HZ;
    rx->est.max_offset_hz = range;
    if (st->n_acquired == 0)
        rx_warn(rx, "%s: no residual carrier line found anywhere in the capture (searched +-%g Hz; the first "
                    "block's strongest bin %.1f dB over the mean, at %+.3f Hz): nothing could be de-rotated or decoded",
                rx->name, range, st->line_db, st->coarse_hz);
    else if (st->at_limit)
        rx_warn(rx, "%s: carrier offset estimate %+.3f Hz reached the search limit of +-%g Hz: the carrier may lie "
                    "further off and this line be another one; nothing beyond it is searched (widen --max-offset)",
                rx->name, st->coarse_hz, range);
    if (rx->rc) {
        int rc = ulk_rcorr_result(rx->rc, &rx->est.ranging);
        if (rc < 0)
            return ulk_fail(rx->diag, rc, "%s: --ranging: %s", rx->name,
                            rc == ULK_ELIMIT ? "the capture is shorter than one code period, so the code phase is ambiguous"
                                             : "out of memory");
        rx->est.has_ranging = 1;
        if (rx->D > 1) rx->est.ranging.n_samples *= (uint64_t)rx->D; /* capture samples: one folded per D */
    }
    if (rx->vw) {
        int rc = ulk_writer_commit(rx->vw, rx->diag);
        rx->vw = NULL;
        if (rc < 0) return rc;
    }
    return 0;
}

int ulk_rx_finish(ulk_rx *rx)
{
    if (rx->err) return rx->err;
    if (rx->finished) return ulk_fail(rx->diag, ULK_EINVAL, "%s: the receiver was finished already", rx->name);
    rx->finished = 1;
    int rc;
    if (rx->o.complex_) {
        if (rx->D > 1) {
            /* the filter's delay: zeros until the last sample's output is out */
            static const float zero[2 * 64];
            for (size_t left = (size_t)(rx->nh - 1) / 2; left > 0;) {
                size_t k = left < 64 ? left : 64;
                if ((rc = cx_push(rx, rx->dbuf, cx_decimate(rx, zero, k))) < 0) return rc;
                left -= k;
            }
        }
        if (!rx->acquired && (rc = cx_acquire(rx)) < 0) return rc;
        long k = ulk_crec_drain(rx->crec, rx->derot, rx->phi); /* the last delay's outputs */
        if (k < 0) return rx->err = ulk_fail(rx->diag, (int)k, "%s: carrier recovery failed", rx->name);
        if (k > 0 && (rc = cx_outputs(rx, (size_t)k)) < 0) return rc;
    }
    rc = rx->prof->rx_finish(rx->unit); /* the last units; est.demod */
    if (rc < 0 || rx->err) return rx_fail(rx, rc);
    const ulk_demod_estimates *de = &rx->est.demod;
    if (de->signal_found && de->at_search_limit)
        rx_warn(rx, "%s: clock error estimate reached the search limit of +-%g ppm (mean estimate %+.1f ppm): the "
                    "capture's clock may be further off; nothing beyond it is searched", rx->name,
                de->search_limit_ppm, de->rate_error_ppm);
    rx->est.duration_s = (double)rx->est.n_samples / (rx->D > 1 ? rx->fs_in : rx->o.fs_hz);
    if (rx->o.complex_ && (rc = cx_finish(rx)) < 0) return rx->err = rc;
    /* what the profile keeps across captures (a receive window) moves only when the whole
     * capture was decoded */
    if (rx->prof->rx_commit && (rc = rx->prof->rx_commit(rx->unit)) < 0) return rx->err = rc;
    rx_node *n = rx_node_new(rx, ULK_RX_ESTIMATES);
    if (n) {
        n->est = rx->est;
        n->ev.est = &n->est;
    }
    n = rx_node_new(rx, ULK_RX_END);
    if (n) n->ev.counts = rx->counts;
    if (rx->err) return rx_fail(rx, rx->err);
    return 0;
}

int ulk_rx_next_event(ulk_rx *rx, ulk_rx_event *ev)
{
    rx_node_free(rx->cur);
    rx->cur = NULL;
    if (rx->head) {
        rx->cur = rx->head;
        rx->head = rx->head->next;
        if (!rx->head) rx->tail = NULL;
        *ev = rx->cur->ev;
        return 1;
    }
    return rx->err < 0 ? rx->err : 0;
}

void ulk_rx_get_counts(const ulk_rx *rx, ulk_rx_counts *c)
{
    *c = rx->counts;
}

void ulk_rx_destroy(ulk_rx *rx)
{
    if (!rx) return;
    rx_node_free(rx->cur);
    while (rx->head) {
        rx_node *n = rx->head;
        rx->head = n->next;
        rx_node_free(n);
    }
    if (rx->prof) rx->prof->rx_destroy(rx->unit);
    ulk_crec_destroy(rx->crec);
    ulk_rcorr_destroy(rx->rc);
    ulk_vdemod_destroy(rx->vd);
    ulk_writer_abort(rx->vw);
    ulk_free(rx->acq);
    ulk_free(rx->derot);
    ulk_free(rx->phi);
    ulk_free(rx->audio);
    ulk_free(rx->data);
    ulk_free(rx->h);
    ulk_free(rx->zr);
    ulk_free(rx->zi);
    ulk_free(rx->dbuf);
    ulk_free(rx);
}

/* ---- capture files ---- */

int ulk_rx_sniff_meta(const char *path, int *complex_, char *mode, size_t mode_len)
{
    *complex_ = 0;
    mode[0] = 0;
    size_t n = strlen(path);
    size_t cut = 0;
    if (n > 5 && (!strcmp(path + n - 5, ".cf32") || !strcmp(path + n - 5, ".ci16"))) { cut = 5; *complex_ = 1; }
    else if (n > 11 && !strcmp(path + n - 11, ".sigmf-data")) cut = 11;
    else if (n > 11 && !strcmp(path + n - 11, ".sigmf-meta")) cut = 11;
    else return 0;
    char *mp = ulk_malloc(n - cut + 12);
    if (!mp) return ULK_ENOMEM;
    memcpy(mp, path, n - cut);
    memcpy(mp + n - cut, ".sigmf-meta", 12);
    char *txt = NULL;
    size_t len = 0;
    int rc = ulk_read_file(mp, 1 << 20, &txt, &len, NULL);
    if (rc == 0) {
        cJSON *root = cJSON_Parse(txt);
        const cJSON *g = cJSON_GetObjectItemCaseSensitive(root, "global");
        const cJSON *dt = cJSON_GetObjectItemCaseSensitive(g, "core:datatype");
        if (cJSON_IsString(dt) && dt->valuestring[0] == 'c') *complex_ = 1;
        const cJSON *cm = cJSON_GetObjectItemCaseSensitive(g, "ulk:carrier");
        const cJSON *mo = cJSON_GetObjectItemCaseSensitive(cm, "mode");
        if (cJSON_IsString(mo)) snprintf(mode, mode_len, "%s", mo->valuestring);
        cJSON_Delete(root);
    }
    ulk_free(txt);
    ulk_free(mp);
    return rc == ULK_ENOMEM ? ULK_ENOMEM : 0;
}

typedef struct {
    ulk_reader *ri;           /* the capture (a complex one: I and Q, read as frames) */
    float *buf;
    int is_cx;
} rf_src;

/* Opens the reader: complex when no channel is picked and the file is complex raw, or a
 * two-channel file with fo->iq; its frames are then I, Q pairs, read in one pass. */
static int rf_open(rf_src *s, const char *path, const ulk_rx_file_options *fo, int meta_cplx, ulk_diag *diag)
{
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    hint.fs_hz = fo->rate_hz;
    hint.format = fo->format == ULK_FMT_S16 ? ULK_FMT_S16 : ULK_FMT_F32;
    /* a named format must agree with the extension; without one the extension decides */
    hint.format_given = fo->format >= 0;
    hint.container = ULK_CONTAINER_RAW;
    hint.channels = fo->format >= 0 && fo->format_complex ? 2 : 1;
    const ulk_sample_info *h = fo->rate_hz > 0 ? &hint : NULL;
    int rc = ulk_reader_open(path, h, fo->channel >= 0 ? fo->channel : 0, &s->ri, diag);
    if (rc < 0) return rc;
    const ulk_sample_info *info = ulk_reader_info(s->ri);
    if (fo->channel < 0 && info->channels == 2 && (meta_cplx || fo->iq || (fo->format >= 0 && fo->format_complex))) {
        s->is_cx = 1;
        return 0;
    }
    if (fo->channel < 0 && info->channels != 1) {
        ulk_reader_close(s->ri); /* not I/Q: the reader's refusal, with its message */
        s->ri = NULL;
        return ulk_reader_open(path, h, -1, &s->ri, diag);
    }
    if (fo->iq && info->channels != 2)
        return ulk_fail(diag, ULK_EINVAL, "%s: --iq: the capture has %d channel%s; I/Q needs exactly two (left I, right Q)",
                        path, info->channels, info->channels == 1 ? "" : "s");
    return 0;
}

static void rf_close(rf_src *s)
{
    ulk_reader_close(s->ri);
    ulk_free(s->buf);
}

static int rx_drain(ulk_rx *rx, ulk_rx_event_fn fn, void *user)
{
    ulk_rx_event ev;
    int r;
    while ((r = ulk_rx_next_event(rx, &ev)) > 0) {
        int rc = fn(&ev, user);
        if (rc < 0) return rc;
    }
    return r;
}

/* Reads up to n complex samples, I and Q interleaved as the file holds them, into s->buf:
 * one pass over the file (reading I and Q with a reader each read it twice: about 15 % of a
 * 192 kHz decode). */
static long rf_read_cx(rf_src *s, size_t n, const char *path, ulk_diag *diag)
{
    long a = ulk_reader_read_frames(s->ri, s->buf, n);
    if (a < 0) return ulk_fail(diag, (int)a, "%s: read error: %s", path, ulk_reader_error(s->ri));
    return a;
}

/* The read loop: blocks through the receiver, events drained after each. While the carrier is
 * not acquired a complex read asks for what the acquisition block still lacks. */
static int rf_loop(ulk_rx *rx, rf_src *s, const char *path, ulk_rx_event_fn fn, void *user, ulk_diag *diag)
{
    uint64_t total = 0;
    for (;;) {
        long got;
        int rc;
        if (s->is_cx) {
            size_t need = (rx->want - rx->n_acq) * (size_t)(rx->D > 1 ? rx->D : 1); /* capture samples */
            size_t ask = !rx->acquired && need < CX_CHUNK ? need : CX_CHUNK;
            got = rf_read_cx(s, ask ? ask : CX_CHUNK, path, diag);
            if (got < 0) return (int)got;
            if (got == 0) break;
            rc = ulk_rx_push_complex(rx, s->buf, (size_t)got);
        } else {
            got = ulk_reader_read(s->ri, s->buf, CHUNK);
            if (got < 0) return ulk_fail(diag, (int)got, "%s: read error after %llu samples", path, (unsigned long long)total);
            if (got == 0) break;
            rc = ulk_rx_push(rx, s->buf, (size_t)got);
        }
        total += (uint64_t)got;
        int dr = rx_drain(rx, fn, user);
        if (rc < 0) return rc;
        if (dr < 0) return dr;
    }
    int rc = ulk_rx_finish(rx);
    int dr = rx_drain(rx, fn, user);
    return rc < 0 ? rc : dr < 0 ? dr : 0;
}

int ulk_rx_run_file(const ulk_dict *dict, const char *path, const ulk_rx_file_options *fo, const ulk_rx_options *opt,
                    ulk_rx_event_fn on_event, void *user, ulk_diag *diag)
{
    ulk_rx_file_options fdef = {0, -1, -1, 0, 0};
    ulk_rx_options odef;
    memset(&odef, 0, sizeof odef);
    if (!fo) fo = &fdef;
    ulk_rx_options o = opt ? *opt : odef;
    int meta_cplx = 0;
    char meta_mode[64];
    if (ulk_rx_sniff_meta(path, &meta_cplx, meta_mode, sizeof meta_mode) < 0)
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    rf_src s;
    memset(&s, 0, sizeof s);
    ulk_rx *rx = NULL;
    int rc = rf_open(&s, path, fo, meta_cplx, diag);
    if (rc >= 0) {
        const ulk_sample_info *info = ulk_reader_info(s.ri);
        o.fs_hz = info->fs_hz;
        o.fs_exact = info->fs_exact;
        o.complex_ = s.is_cx;
        o.name = path;
        if (!o.mode && meta_mode[0]) o.mode = meta_mode;
        rc = ulk_rx_create(dict, &o, &rx, diag);
    }
    if (rc >= 0) {
        s.buf = ulk_malloc(2 * (CHUNK > CX_CHUNK ? CHUNK : CX_CHUNK) * sizeof *s.buf);
        rc = s.buf ? 0 : ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    }
    if (rc >= 0) rc = rx_drain(rx, on_event, user); /* warnings from create */
    if (rc >= 0) rc = rf_loop(rx, &s, path, on_event, user, diag);
    ulk_rx_destroy(rx);
    rf_close(&s);
    return rc;
}
