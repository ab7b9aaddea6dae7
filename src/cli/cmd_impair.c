/* src/cli/cmd_impair.c - `ulk impair IN -o OUT --ebn0 DB [--seed N] [--ppm X] [--delay S]
 * [--amplitude A] [--dc X] [--invert] [--dict D | --pd P --bit-rate R]`: a channel
 * simulator for receiver tests (include/ulk/impair.h). Seeded and deterministic.
 * Exit 0 written; 1 refused (e.g. 16-bit output would clip); 2 usage or I/O error. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/impair.h"
#include "ulk/limits.h"
#include "ulk/rx.h"
#include "ulk/sampleio.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define CHUNK 65536

static int g_quiet;       /* -q: no "wrote" line (the caution is always printed) */
static int g_fmt_complex; /* --format cf32 / ci16 */

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk impair IN -o OUT --ebn0 DB [--seed N] [--ppm X] [--delay S] [--amplitude A]\n"
            "                  [--dc X] [--invert] [--dict DICT | --pd P --bit-rate R]\n"
            "                  [--rate HZ --format f32|s16] [--channel N]\n"
            "\n"
            "Makes a test capture from a clean one: white Gaussian noise at E_b/N_0 as the sub-bit\n"
            "profile defines it (E_b/N_0 = P_d f_s / (2 sigma^2 R_b)), a clock error, a noise-only\n"
            "lead-in, a gain, a DC offset and inversion. The same seed gives the same output.\n"
            "\n"
            "  IN, -o OUT         WAV or raw .f32/.s16 (OUT's type from its extension; a raw OUT\n"
            "                     gets a .sigmf-meta beside it); `ulk impair IN OUT` also works;\n"
            "                     OUT may not be IN\n"
            "options:\n"
            "  --ebn0 DB          noise level (required unless --no-noise)\n"
            "  --no-noise         add no noise\n"
            "  --dict DICT        take P_d (A^2/2 sine, A^2 square) and R_b from the dictionary\n"
            "  --pd P --bit-rate R  or give them (P_d in full-scale units of IN); R_b may also come\n"
            "                     from IN's SigMF metadata\n"
            "  --seed N           noise seed (default 1)\n"
            "  --ppm X            clock error: the signal's clock runs X ppm fast (|X| <= " ULK_STR(ULK_IMPAIR_MAX_PPM) ");\n"
            "                     by windowed-sinc resampling (32 taps, Blackman window)\n"
            "  --delay S          seconds of noise-only samples before the signal\n"
            "  --amplitude A      gain on the signal (0.01 = -40 dB)\n"
            "  --dc X             DC offset added to every sample\n"
            "  --invert           invert the signal (180 degrees)\n"
            "  --rate HZ, --format f32|s16|cf32|ci16, --channel N   for a raw or multi-channel IN\n"
            "                     (the extension .f32/.s16/.cf32/.ci16 gives the format)\n"
            "  -q, --quiet        no line saying what was written (the caution stays)\n"
            "complex IN (.cf32/.ci16 with SigMF, or a two-channel WAV with --iq; OUT .cf32, .ci16\n"
            "or .wav): complex noise of total variance sigma^2, half in I and half in Q, with\n"
            "N_0 = sigma^2 / f_s and E_b/N_0 = P_d / (N_0 R_b), P_d = the data channel's useful\n"
            "power P_k/P_T of the mode (the planner's, docs/spec/carrier.md) times the full-scale\n"
            "envelope 1 (and --amplitude^2); R_b the carrier section's information rate:\n"
            "  --iq               a two-channel IN is I (left) and Q (right)\n"
            "  --mode NAME        the carrier mode (default: from IN's SigMF metadata)\n"
            "  --offset HZ        rotate by exp(j 2 pi F t): an extra carrier offset F = HZ\n"
            "  --delay S          also delays the ranging code by S * chip_rate chips\n"
            "\nexit: 0 written, 1 refused (16-bit output would clip, a broken dictionary), 2 usage or I/O\n"
            "      error\n\n%s",
            ULK_CAUTION);
}

static int sink(const float *x, size_t n, void *user) { return ulk_writer_write(user, x, n); }

/* ---- complex captures: one simulator per component, interleaved and rotated ---- */

typedef struct {
    float *v;
    size_t n, cap;
} fifo;

static int fifo_sink(const float *x, size_t n, void *user)
{
    fifo *f = user;
    if (f->n + n > f->cap) {
        size_t nc = (f->n + n) * 2;
        float *nv = ulk_realloc(f->v, nc * sizeof *nv);
        if (!nv) return ULK_ENOMEM;
        f->v = nv;
        f->cap = nc;
    }
    memcpy(f->v + f->n, x, n * sizeof *x);
    f->n += n;
    return 0;
}

typedef struct {
    fifo fi, fq;
    float *out;
    size_t out_cap;
    double ph, dph;   /* rotation, cycles */
    ulk_writer *w;
} cx_out;

/* Writes the samples both components have produced, rotated by the offset. */
static int cx_drain(cx_out *o)
{
    size_t n = o->fi.n < o->fq.n ? o->fi.n : o->fq.n;
    if (!n) return 0;
    if (n > o->out_cap) {
        float *nv = ulk_realloc(o->out, 2 * n * sizeof *nv);
        if (!nv) return ULK_ENOMEM;
        o->out = nv;
        o->out_cap = n;
    }
    for (size_t k = 0; k < n; k++) {
        double re = o->fi.v[k], im = o->fq.v[k];
        if (o->dph != 0) {
            double a = 2 * M_PI * o->ph, c = cos(a), s = sin(a);
            double t = re * c - im * s;
            im = re * s + im * c;
            re = t;
            o->ph += o->dph;
            o->ph -= floor(o->ph);
        }
        o->out[2 * k] = (float)re;
        o->out[2 * k + 1] = (float)im;
    }
    memmove(o->fi.v, o->fi.v + n, (o->fi.n - n) * sizeof *o->fi.v);
    memmove(o->fq.v, o->fq.v + n, (o->fq.n - n) * sizeof *o->fq.v);
    o->fi.n -= n;
    o->fq.n -= n;
    return ulk_writer_write(o->w, o->out, n);
}

/* What --rate and --format say about a raw IN (used only with a rate). */
static ulk_sample_info reader_hint(double rate, int fmt)
{
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    hint.fs_hz = rate;
    hint.format = fmt == ULK_FMT_S16 ? ULK_FMT_S16 : ULK_FMT_F32;
    hint.format_given = fmt >= 0;
    hint.channels = g_fmt_complex ? 2 : 1;
    hint.container = ULK_CONTAINER_RAW;
    return hint;
}

/* P_d and R_b of a complex capture from the dictionary's carrier section: the data channel's
 * useful power in the mode (named, from the metadata, or the only one) and the section's
 * information rate, unless given. Returns 0 (the dictionary in *dict, the mode's name in
 * *mname) or the exit status (message printed). */
static int carrier_pd(const char *in, const char *dict_path, int add_noise, ulk_dict **dict, const char **mname,
                      double *pd, double *rb)
{
    int ret;
    if ((ret = cli_load_dict("impair", dict_path, dict))) return ret; /* the same exit as every command */
    const ulk_carrier *car = ulk_dict_carrier(*dict);
    if (!car) {
        fprintf(stderr, "ulk impair: %s is complex (I/Q) but %s has no carrier section to take P_d from; give "
                        "--pd P --bit-rate R\n", in, dict_path);
        return CLI_EXIT_USAGE_IO;
    }
    if (!*mname && car->n_modes == 1) *mname = car->modes[0].name;
    int mi = *mname ? ulk_carrier_find_mode(car, *mname) : -1;
    if (mi < 0) {
        fprintf(stderr, "ulk impair: %s: %s%s%s; give --mode NAME of %s's carrier section\n", in,
                *mname ? "no carrier mode '" : "which carrier mode?", *mname ? *mname : "", *mname ? "'" : "", dict_path);
        return CLI_EXIT_USAGE_IO;
    }
    const ulk_carrier_mode *mo = &car->modes[mi];
    ulk_carrier_plan plan;
    if (ulk_carrier_plan_indices(car, mo, mo->m_rad, NAN, &plan) == 0 && !(*pd > 0)) *pd = plan.useful[ULK_CH_DATA];
    if (!(*rb > 0) && car->has_data) *rb = ulk_ratio_to_double(car->data_rb);
    if (add_noise && !(*pd > 0)) {
        fprintf(stderr, "ulk impair: mode '%s' has no data channel, so E_b/N_0 has no P_d: give --pd P (power "
                        "relative to the full-scale envelope) and --bit-rate R\n", mo->name);
        return CLI_EXIT_USAGE_IO;
    }
    *mname = mo->name;
    return 0;
}

/* The SigMF member "ulk:carrier": {"mode": NAME} without braces (ulk_malloc'd), NULL when
 * out of memory. */
static char *mode_extra(const char *mname)
{
    char *extra = NULL;
    cJSON *j = cJSON_CreateObject(), *cm = j ? cJSON_AddObjectToObject(j, "ulk:carrier") : NULL;
    if (cm && cJSON_AddStringToObject(cm, "mode", mname)) {
        char *t = cJSON_PrintUnformatted(j);
        if (t) {
            size_t n = strlen(t);
            extra = ulk_strdup(t);
            if (extra && n >= 2) { memmove(extra, extra + 1, n - 2); extra[n - 2] = 0; }
            cJSON_free(t);
        }
    }
    cJSON_Delete(j);
    return extra;
}

/* Reads I and Q in step, impairs each and writes the rotated pairs. Returns 0 or a status
 * (a read error is reported here; ULK_ELIMIT and write failures are the caller's to say). */
static int cx_run(const char *in, ulk_reader *ri, ulk_reader *rq, ulk_impair *pi, ulk_impair *pq, float *bi, float *bq,
                  cx_out *o)
{
    int rc = 0;
    for (;;) {
        long a = ulk_reader_read(ri, bi, CHUNK), b = ulk_reader_read(rq, bq, CHUNK);
        if (a < 0 || b < 0 || a != b) {
            fprintf(stderr, "ulk impair: %s: %s\n", in, a != b && a >= 0 && b >= 0 ? "I and Q end at different lengths" : "read error");
            return ULK_EIO;
        }
        if (a == 0) break;
        if ((rc = ulk_impair_push(pi, bi, (size_t)a)) < 0 || (rc = ulk_impair_push(pq, bq, (size_t)b)) < 0 ||
            (rc = cx_drain(o)) < 0)
            return rc;
    }
    if ((rc = ulk_impair_finish(pi)) == 0 && (rc = ulk_impair_finish(pq)) == 0) rc = cx_drain(o);
    return rc;
}

/* IN is complex: P_d from the carrier plan of the mode, two simulators (I with the seed, Q
 * with the seed XOR 0x9E3779B97F4A7C15, so the components' noises are independent), then the
 * rotation. Returns the exit status. */
static int impair_complex(const char *in, const char *outp, const char *dict_path, const char *mode_name,
                          const char *meta_mode, ulk_impair_config c, double pd, double rb, double rate, int fmt,
                          double off_hz)
{
    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_reader *ri = NULL, *rq = NULL;
    ulk_impair *pi = NULL, *pq = NULL;
    float *bi = NULL, *bq = NULL;
    char *extra = NULL;
    cx_out o;
    memset(&o, 0, sizeof o);
    if (!diag) { fprintf(stderr, "ulk impair: out of memory\n"); return 2; }
    const char *mname = mode_name ? mode_name : meta_mode[0] ? meta_mode : NULL;
    if (dict_path && (ret = carrier_pd(in, dict_path, c.add_noise, &dict, &mname, &pd, &rb))) goto out;
    ret = 2;
    ulk_sample_info hint = reader_hint(rate, fmt);
    if (ulk_reader_open(in, rate > 0 ? &hint : NULL, 0, &ri, diag) < 0 ||
        ulk_reader_open(in, rate > 0 ? &hint : NULL, 1, &rq, diag) < 0) {
        ulk_diag_print(diag, stderr);
        goto out;
    }
    const ulk_sample_info *info = ulk_reader_info(ri);
    if (c.add_noise && (!(pd > 0) || !(rb > 0))) {
        fprintf(stderr, "ulk impair: the E_b/N_0 definition needs the data power P_d and the bit rate R_b: give "
                        "--dict DICT (with a carrier section) and --mode, or --pd P and --bit-rate R\n");
        goto out;
    }
    /* Per component the simulator's sigma_c^2 = P_d f_s / (2 R_b E_b/N_0), which is half the
     * total sigma^2 = P_d f_s / (R_b E_b/N_0) that N_0 = sigma^2 / f_s asks for. */
    c.fs_hz = info->fs_hz;
    c.pd = pd;
    c.bit_rate = rb;
    ulk_sample_info oi;
    memset(&oi, 0, sizeof oi);
    oi.fs_hz = info->fs_hz;
    oi.channels = 2;
    oi.fs_exact = info->fs_exact;
    size_t ol = strlen(outp);
    oi.format = (ol > 5 && !strcmp(outp + ol - 5, ".ci16")) ? ULK_FMT_S16
                : (ol > 5 && !strcmp(outp + ol - 5, ".cf32")) ? ULK_FMT_F32 : info->format;
    char desc[256];
    snprintf(desc, sizeof desc, "ulk impair of %s (complex): Eb/N0 %s%g dB (P_d %.6g, R_b %g), seed %llu, %g ppm, "
             "delay %g s, offset %g Hz", in, c.add_noise ? "" : "inf ", c.add_noise ? c.ebn0_db : 0, pd, rb,
             (unsigned long long)c.seed, c.ppm, c.delay_s, off_hz);
    oi.description = desc;
    if (mname) {
        if (!(extra = mode_extra(mname))) { fprintf(stderr, "ulk impair: out of memory\n"); goto out; }
        oi.extra_json = extra;
    }
    if (ulk_writer_open(outp, &oi, &o.w, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
    o.dph = off_hz / info->fs_hz;
    ulk_impair_config cq = c;
    cq.seed = c.seed ^ 0x9E3779B97F4A7C15ull;
    if (ulk_impair_create(&c, fifo_sink, &o.fi, &pi, diag) < 0 || ulk_impair_create(&cq, fifo_sink, &o.fq, &pq, diag) < 0) {
        ulk_diag_print(diag, stderr);
        goto out;
    }
    bi = ulk_malloc(CHUNK * sizeof *bi);
    bq = ulk_malloc(CHUNK * sizeof *bq);
    if (!bi || !bq) { fprintf(stderr, "ulk impair: out of memory\n"); goto out; }
    int rc = cx_run(in, ri, rq, pi, pq, bi, bq, &o);
    if (rc < 0) {
        if (rc == ULK_ELIMIT) {
            ulk_writer_commit(o.w, diag); /* refuses, with the writer's figures: which sample, by how much */
            o.w = NULL;
            ulk_diag_print(diag, stderr);
            fprintf(stderr, "ulk impair: %s: noise, gain or DC too large for 16-bit samples; lower --amplitude or "
                            "write .cf32 / float WAV\n", outp);
            ret = 1;
        } else if (rc != ULK_EIO) {
            fprintf(stderr, "ulk impair: %s: write failed (%s)\n", outp, ulk_status_str(rc));
        }
        goto out;
    }
    if (ulk_writer_commit(o.w, diag) < 0) { o.w = NULL; ulk_diag_print(diag, stderr); goto out; }
    o.w = NULL;
    if (!g_quiet) fprintf(stderr, "wrote %s: complex, %g Hz, noise sigma %.6g per component (total variance %.6g), P_d %.6g, R_b %g\n",
            outp, info->fs_hz, ulk_impair_sigma(pi), 2 * ulk_impair_sigma(pi) * ulk_impair_sigma(pi), pd, rb);
    fprintf(stderr, "%s", ULK_CAUTION);
    ret = 0;
out:
    ulk_free(bi);
    ulk_free(bq);
    ulk_free(extra);
    ulk_free(o.fi.v);
    ulk_free(o.fq.v);
    ulk_free(o.out);
    ulk_writer_abort(o.w);
    ulk_impair_destroy(pi);
    ulk_impair_destroy(pq);
    ulk_reader_close(ri);
    ulk_reader_close(rq);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}

enum { O_OUTPUT = 'o', O_QUIET = 'q', O_INVERT = CLI_LONG, O_NONOISE, O_IQ, O_EBN0, O_SEED, O_PPM, O_DELAY, O_AMPL,
       O_DC, O_DICT, O_PD, O_BITRATE, O_RATE, O_FORMAT, O_CHANNEL, O_MODE, O_OFFSET };
static const struct option opts[] = {
    {"output", required_argument, 0, O_OUTPUT},  {"invert", no_argument, 0, O_INVERT},
    {"no-noise", no_argument, 0, O_NONOISE},     {"iq", no_argument, 0, O_IQ},
    {"ebn0", required_argument, 0, O_EBN0},      {"seed", required_argument, 0, O_SEED},
    {"ppm", required_argument, 0, O_PPM},        {"delay", required_argument, 0, O_DELAY},
    {"amplitude", required_argument, 0, O_AMPL}, {"dc", required_argument, 0, O_DC},
    {"dict", required_argument, 0, O_DICT},      {"pd", required_argument, 0, O_PD},
    {"bit-rate", required_argument, 0, O_BITRATE}, {"rate", required_argument, 0, O_RATE},
    {"format", required_argument, 0, O_FORMAT},  {"channel", required_argument, 0, O_CHANNEL},
    {"mode", required_argument, 0, O_MODE},      {"offset", required_argument, 0, O_OFFSET},
    {"quiet", no_argument, 0, O_QUIET},          {"help", no_argument, 0, 'h'},
    {0, 0, 0, 0}};
static const cli_command command = {"impair", opts, usage};

typedef struct {
    ulk_impair_config c;
    const char *outp, *dict_path, *mode_name;
    int have_ebn0, no_noise, channel, fmt, fmt_complex, iq, quiet;
    double rate, pd, rb, off_hz;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    double x = 0;
    unsigned long long u;
    int r;
    switch (v) {
    case O_OUTPUT: a->outp = arg; return 0;
    case O_INVERT: a->c.invert = 1; return 0;
    case O_NONOISE: a->no_noise = 1; return 0;
    case O_IQ: a->iq = 1; return 0;
    case O_QUIET: a->quiet = 1; return 0;
    case O_DICT: a->dict_path = arg; return 0;
    case O_MODE: a->mode_name = arg; return 0;
    case O_FORMAT: return cli_format("impair", arg, &a->fmt, &a->fmt_complex);
    case O_SEED:
        if ((r = cli_uint("impair", "--seed", arg, ~0ull, &u))) return r;
        a->c.seed = u;
        return 0;
    case O_CHANNEL:
        if ((r = cli_uint("impair", "--channel", arg, 255, &u))) return r;
        a->channel = (int)u;
        return 0;
    default: break;
    }
    const struct option *o = opts;
    while (o->name && o->val != v) o++;
    char name[32];
    snprintf(name, sizeof name, "--%s", o->name ? o->name : "?");
    if ((r = cli_number("impair", name, arg, &x))) return r;
    switch (v) {
    case O_EBN0: a->c.ebn0_db = x; a->have_ebn0 = 1; break;
    case O_PPM: a->c.ppm = x; break;
    case O_DELAY: a->c.delay_s = x; break;
    case O_AMPL:
        if (!(x > 0)) { fprintf(stderr, "ulk impair: --amplitude must be > 0, not %s\n", arg); return CLI_EXIT_USAGE_IO; }
        a->c.amplitude = x;
        break;
    case O_DC: a->c.dc = x; break;
    case O_PD: a->pd = x; break;
    case O_BITRATE: a->rb = x; break;
    case O_OFFSET: a->off_hz = x; break;
    case O_RATE: a->rate = x; break;
    default: break;
    }
    return 0;
}

/* IN is real: one simulator, P_d and R_b from the dictionary's link, --pd/--bit-rate or the
 * SigMF metadata. Returns the exit status. */
static int impair_real(const char *in, const char *outp, const char *dict_path, ulk_impair_config c, double pd,
                       double rb, double rate, int fmt, int channel)
{
    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_reader *r = NULL;
    ulk_writer *w = NULL;
    ulk_impair *p = NULL;
    float *buf = NULL;
    if (!diag) { fprintf(stderr, "ulk impair: out of memory\n"); return 2; }
    if (dict_path) {
        if ((ret = cli_load_dict("impair", dict_path, &dict))) goto out; /* the same exit as every command */
        ret = 2;
        double A = dict->link.amplitude;
        if (!(pd > 0)) pd = dict->link.waveform == ULK_WAVE_SQUARE ? A * A : A * A / 2;
        if (!(rb > 0)) rb = ulk_ratio_to_double(dict->link.bit_rate);
    }
    ulk_sample_info hint = reader_hint(rate, fmt);
    if (ulk_reader_open(in, rate > 0 ? &hint : NULL, channel, &r, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
    const ulk_sample_info *info = ulk_reader_info(r);
    if (!(rb > 0) && info->bit_rate > 0) rb = info->bit_rate;
    if (c.add_noise && (!(pd > 0) || !(rb > 0))) {
        fprintf(stderr, "ulk impair: the E_b/N_0 definition needs the data power P_d and the bit rate R_b: give "
                        "--dict DICT, or --pd P and --bit-rate R%s\n", info->bit_rate > 0 ? "" : " (IN has no SigMF bit rate)");
        goto out;
    }
    c.fs_hz = info->fs_hz;
    c.pd = pd;
    c.bit_rate = rb;
    ulk_sample_info oi;
    memset(&oi, 0, sizeof oi);
    oi.fs_hz = info->fs_hz;
    oi.channels = 1;
    size_t ol = strlen(outp);
    oi.format = (ol > 4 && !strcmp(outp + ol - 4, ".s16")) ? ULK_FMT_S16
                : (ol > 4 && !strcmp(outp + ol - 4, ".f32")) ? ULK_FMT_F32 : info->format;
    oi.fsc_hz = info->fsc_hz;
    oi.bit_rate = info->bit_rate > 0 ? info->bit_rate : rb;
    oi.subbit_rate = info->subbit_rate;
    char desc[256];
    snprintf(desc, sizeof desc, "ulk impair of %s: Eb/N0 %s dB, seed %llu, %g ppm, delay %g s", in,
             c.add_noise ? "" : "inf", (unsigned long long)c.seed, c.ppm, c.delay_s);
    if (c.add_noise) snprintf(desc, sizeof desc, "ulk impair of %s: Eb/N0 %g dB, seed %llu, %g ppm, delay %g s", in,
                              c.ebn0_db, (unsigned long long)c.seed, c.ppm, c.delay_s);
    oi.description = desc;
    if (ulk_writer_open(outp, &oi, &w, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
    if (ulk_impair_create(&c, sink, w, &p, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
    buf = ulk_malloc(CHUNK * sizeof *buf);
    if (!buf) { fprintf(stderr, "ulk impair: out of memory\n"); goto out; }
    int rc = 0;
    for (;;) {
        long got = ulk_reader_read(r, buf, CHUNK);
        if (got < 0) { fprintf(stderr, "ulk impair: %s: read error\n", in); rc = (int)got; break; }
        if (got == 0) break;
        if ((rc = ulk_impair_push(p, buf, (size_t)got)) < 0) break;
    }
    if (rc == 0) rc = ulk_impair_finish(p);
    if (rc < 0) {
        if (rc == ULK_ELIMIT) {
            ulk_writer_commit(w, diag); /* refuses, with the writer's figures: which sample, by how much */
            w = NULL;
            ulk_diag_print(diag, stderr);
            fprintf(stderr, "ulk impair: %s: noise, gain or DC too large for 16-bit samples; lower --amplitude or "
                            "write .f32 / float WAV\n", outp);
            ret = 1;
        } else {
            fprintf(stderr, "ulk impair: %s: write failed (%s)\n", outp, ulk_status_str(rc));
        }
        goto out;
    }
    if (ulk_writer_commit(w, diag) < 0) { w = NULL; ulk_diag_print(diag, stderr); goto out; }
    w = NULL;
    if (!g_quiet) fprintf(stderr, "wrote %s: %g Hz, noise sigma %.6g per sample\n", outp, info->fs_hz, ulk_impair_sigma(p));
    fprintf(stderr, "%s", ULK_CAUTION);
    ret = 0;
out:
    ulk_free(buf);
    ulk_impair_destroy(p);
    ulk_writer_abort(w);
    ulk_reader_close(r);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}

int cmd_impair(int argc, char **argv)
{
    args o;
    memset(&o, 0, sizeof o);
    o.c.seed = 1;
    o.channel = -1;
    o.fmt = -1;
    int first, pr = cli_parse(&command, argc, argv, on_opt, &o, &first);
    if (pr >= 0) return pr;
    const char *in = first < argc ? argv[first] : NULL, *outp = o.outp, *dict_path = o.dict_path,
               *mode_name = o.mode_name;
    int nops = argc - first;
    if (!outp && nops == 2) outp = argv[first + 1]; /* IN OUT, as before -o */
    else if (nops > 1) {
        fprintf(stderr, "ulk impair: too many files ('%s')\n", argv[first + (outp ? 1 : 2)]);
        return CLI_EXIT_USAGE_IO;
    }
    ulk_impair_config c = o.c;
    c.add_noise = 1;
    g_quiet = o.quiet;
    g_fmt_complex = o.fmt_complex;
    int have_ebn0 = o.have_ebn0, no_noise = o.no_noise, channel = o.channel, fmt = o.fmt, iq = o.iq;
    double rate = o.rate, pd = o.pd, rb = o.rb, off_hz = o.off_hz;
    if (in && !(in = cli_input("impair", in))) return CLI_EXIT_USAGE_IO; /* "-": read twice when complex */
    if (in && outp) {
        const char *ins[] = {in, dict_path}, *what[] = {"input capture", "dictionary"};
        if ((pr = cli_refuse_overwrite("impair", outp, ins, what, 2))) return pr;
    }
    if (!in || !outp) { fprintf(stderr, "ulk impair: IN and -o OUT are required\n"); usage(stderr); return 2; }
    if (!have_ebn0 && !no_noise) { fprintf(stderr, "ulk impair: --ebn0 DB is required (or --no-noise)\n"); return 2; }
    c.add_noise = !no_noise;
    if (channel < 0) {
        int meta_cplx = 0, two = 0;
        char meta_mode[64];
        if (ulk_rx_sniff_meta(in, &meta_cplx, meta_mode, sizeof meta_mode) < 0) {
            fprintf(stderr, "ulk impair: out of memory\n");
            return 2;
        }
        if (iq) {
            ulk_reader *t = NULL;
            if (ulk_reader_open(in, NULL, 0, &t, NULL) == 0) two = ulk_reader_info(t)->channels == 2;
            ulk_reader_close(t);
            if (!two) { fprintf(stderr, "ulk impair: --iq: %s is not a two-channel file (left I, right Q)\n", in); return 2; }
        }
        if (meta_cplx || iq)
            return impair_complex(in, outp, dict_path, mode_name, meta_mode, c, pd, rb, rate, fmt, off_hz);
    }
    if (mode_name || off_hz != 0) {
        fprintf(stderr, "ulk impair: --mode and --offset are for complex (I/Q) captures; %s is real\n", in);
        return 2;
    }

    return impair_real(in, outp, dict_path, c, pd, rb, rate, fmt, channel);
}
