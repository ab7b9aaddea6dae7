/* src/cli/cmd_impair.c - `ulk impair IN OUT --ebn0 DB [--seed N] [--ppm X] [--delay S]
 * [--amplitude A] [--dc X] [--invert] [--dict D | --pd P --bit-rate R]`: a channel
 * simulator for receiver tests (include/ulk/impair.h). Seeded and deterministic.
 * Exit 0 written; 1 refused (e.g. 16-bit output would clip); 2 usage or I/O error. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture.h"
#include "cli.h"
#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/impair.h"
#include "ulk/sampleio.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

#define CHUNK 65536

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk impair IN OUT --ebn0 DB [--seed N] [--ppm X] [--delay S] [--amplitude A]\n"
            "                  [--dc X] [--invert] [--dict DICT | --pd P --bit-rate R]\n"
            "                  [--rate HZ --format f32|s16] [--channel N]\n"
            "\n"
            "Makes a test capture from a clean one: white Gaussian noise at E_b/N_0 as the sub-bit\n"
            "profile defines it (E_b/N_0 = P_d f_s / (2 sigma^2 R_b)), a clock error, a noise-only\n"
            "lead-in, a gain, a DC offset and inversion. The same seed gives the same output.\n"
            "\n"
            "  IN, OUT            WAV or raw .f32/.s16 (OUT's type from its extension; a raw OUT\n"
            "                     gets a .sigmf-meta beside it)\n"
            "options:\n"
            "  --ebn0 DB          noise level (required unless --no-noise)\n"
            "  --no-noise         add no noise\n"
            "  --dict DICT        take P_d (A^2/2 sine, A^2 square) and R_b from the dictionary\n"
            "  --pd P --bit-rate R  or give them (P_d in full-scale units of IN); R_b may also come\n"
            "                     from IN's SigMF metadata\n"
            "  --seed N           noise seed (default 1)\n"
            "  --ppm X            clock error: the signal's clock runs X ppm fast (|X| <= 10000);\n"
            "                     by windowed-sinc resampling (32 taps, Blackman window)\n"
            "  --delay S          seconds of noise-only samples before the signal\n"
            "  --amplitude A      gain on the signal (0.01 = -40 dB)\n"
            "  --dc X             DC offset added to every sample\n"
            "  --invert           invert the signal (180 degrees)\n"
            "  --rate HZ, --format f32|s16, --channel N   for a raw or multi-channel IN\n"
            "complex IN (.cf32/.ci16 with SigMF, or a two-channel WAV with --iq; OUT .cf32, .ci16\n"
            "or .wav): complex noise of total variance sigma^2, half in I and half in Q, with\n"
            "N_0 = sigma^2 / f_s and E_b/N_0 = P_d / (N_0 R_b), P_d = the data channel's useful\n"
            "power P_k/P_T of the mode (the planner's, composite-carrier.md) times the full-scale\n"
            "envelope 1 (and --amplitude^2); R_b the carrier section's information rate:\n"
            "  --iq               a two-channel IN is I (left) and Q (right)\n"
            "  --mode NAME        the carrier mode (default: from IN's SigMF metadata)\n"
            "  --offset-hz F      rotate by exp(j 2 pi F t): an extra carrier offset\n"
            "  --delay S          also delays the ranging code by S * chip_rate chips\n"
            "\nexit: 0 written, 1 refused (16-bit output would clip), 2 usage or I/O error\n\n%s",
            ULK_CAUTION);
}

static int parse_num(const char *opt, const char *v, double *out)
{
    char *end;
    double x = strtod(v, &end);
    if (!*v || *end || !isfinite(x)) {
        fprintf(stderr, "ulk impair: %s '%s' is not a number\n", opt, v);
        return -1;
    }
    *out = x;
    return 0;
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
    if (dict_path) {
        if (ulk_dict_load(dict_path, &dict, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
        ulk_diag_clear(diag);
        const ulk_carrier *car = ulk_dict_carrier(dict);
        if (!car) {
            fprintf(stderr, "ulk impair: %s is complex (I/Q) but %s has no carrier section to take P_d from; give "
                            "--pd P --bit-rate R\n", in, dict_path);
            goto out;
        }
        if (!mname && car->n_modes == 1) mname = car->modes[0].name;
        int mi = mname ? ulk_carrier_find_mode(car, mname) : -1;
        if (mi < 0) {
            fprintf(stderr, "ulk impair: %s: %s%s%s; give --mode NAME of %s's carrier section\n", in,
                    mname ? "no carrier mode '" : "which carrier mode?", mname ? mname : "", mname ? "'" : "", dict_path);
            goto out;
        }
        const ulk_carrier_mode *mo = &car->modes[mi];
        ulk_carrier_plan plan;
        if (ulk_carrier_plan_indices(car, mo, mo->m_rad, NAN, &plan) == 0 && !(pd > 0)) pd = plan.useful[ULK_CH_DATA];
        if (!(rb > 0) && car->has_data) rb = ulk_ratio_to_double(car->data_rb);
        if (c.add_noise && !(pd > 0)) {
            fprintf(stderr, "ulk impair: mode '%s' has no data channel, so E_b/N_0 has no P_d: give --pd P (power "
                            "relative to the full-scale envelope) and --bit-rate R\n", mo->name);
            goto out;
        }
        mname = mo->name;
    }
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    hint.fs_hz = rate;
    hint.format = fmt == ULK_FMT_S16 ? ULK_FMT_S16 : ULK_FMT_F32;
    hint.container = ULK_CONTAINER_RAW;
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
        if (!extra) { fprintf(stderr, "ulk impair: out of memory\n"); goto out; }
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
    int rc = 0;
    for (;;) {
        long a = ulk_reader_read(ri, bi, CHUNK), b = ulk_reader_read(rq, bq, CHUNK);
        if (a < 0 || b < 0 || a != b) {
            fprintf(stderr, "ulk impair: %s: %s\n", in, a != b && a >= 0 && b >= 0 ? "I and Q end at different lengths" : "read error");
            rc = ULK_EIO;
            break;
        }
        if (a == 0) break;
        if ((rc = ulk_impair_push(pi, bi, (size_t)a)) < 0 || (rc = ulk_impair_push(pq, bq, (size_t)b)) < 0 ||
            (rc = cx_drain(&o)) < 0)
            break;
    }
    if (rc == 0 && (rc = ulk_impair_finish(pi)) == 0 && (rc = ulk_impair_finish(pq)) == 0) rc = cx_drain(&o);
    if (rc < 0) {
        if (rc == ULK_ELIMIT) {
            fprintf(stderr, "ulk impair: %s: 16-bit samples would clip (noise, gain or DC too large); lower "
                            "--amplitude or write .cf32 / float WAV\n", outp);
            ret = 1;
        } else if (rc != ULK_EIO) {
            fprintf(stderr, "ulk impair: %s: write failed (%s)\n", outp, ulk_status_str(rc));
        }
        goto out;
    }
    if (ulk_writer_commit(o.w, diag) < 0) { o.w = NULL; ulk_diag_print(diag, stderr); goto out; }
    o.w = NULL;
    fprintf(stderr, "wrote %s: complex, %g Hz, noise sigma %.6g per component (total variance %.6g), P_d %.6g, R_b %g\n",
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

int cmd_impair(int argc, char **argv)
{
    const char *in = NULL, *outp = NULL, *dict_path = NULL;
    ulk_impair_config c;
    memset(&c, 0, sizeof c);
    c.seed = 1;
    c.add_noise = 1;
    int have_ebn0 = 0, no_noise = 0, channel = -1, fmt = -1, iq = 0;
    double rate = 0, pd = 0, rb = 0, off_hz = 0;
    const char *mode_name = NULL;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        if (!strcmp(a, "--invert")) { c.invert = 1; continue; }
        if (!strcmp(a, "--no-noise")) { no_noise = 1; continue; }
        if (!strcmp(a, "--iq")) { iq = 1; continue; }
        int takes = !strcmp(a, "--ebn0") || !strcmp(a, "--seed") || !strcmp(a, "--ppm") || !strcmp(a, "--delay") ||
                    !strcmp(a, "--amplitude") || !strcmp(a, "--dc") || !strcmp(a, "--dict") || !strcmp(a, "--pd") ||
                    !strcmp(a, "--bit-rate") || !strcmp(a, "--rate") || !strcmp(a, "--format") || !strcmp(a, "--channel") ||
                    !strcmp(a, "--mode") || !strcmp(a, "--offset-hz");
        if (takes) {
            if (i + 1 >= argc) { fprintf(stderr, "ulk impair: %s needs a value\n", a); return 2; }
            const char *v = argv[++i];
            double x = 0;
            if (!strcmp(a, "--dict")) { dict_path = v; continue; }
            if (!strcmp(a, "--mode")) { mode_name = v; continue; }
            if (!strcmp(a, "--format")) {
                if (!strcmp(v, "f32")) fmt = ULK_FMT_F32;
                else if (!strcmp(v, "s16")) fmt = ULK_FMT_S16;
                else { fprintf(stderr, "ulk impair: --format '%s': expected f32 or s16\n", v); return 2; }
                continue;
            }
            if (!strcmp(a, "--seed")) {
                char *end;
                unsigned long long s = strtoull(v, &end, 0);
                if (!*v || *end || v[0] == '-') { fprintf(stderr, "ulk impair: --seed '%s' is not a whole number >= 0\n", v); return 2; }
                c.seed = s;
                continue;
            }
            if (parse_num(a, v, &x) < 0) return 2;
            if (!strcmp(a, "--ebn0")) { c.ebn0_db = x; have_ebn0 = 1; }
            else if (!strcmp(a, "--ppm")) c.ppm = x;
            else if (!strcmp(a, "--delay")) c.delay_s = x;
            else if (!strcmp(a, "--amplitude")) {
                if (!(x > 0)) { fprintf(stderr, "ulk impair: --amplitude must be > 0\n"); return 2; }
                c.amplitude = x;
            } else if (!strcmp(a, "--dc")) c.dc = x;
            else if (!strcmp(a, "--pd")) pd = x;
            else if (!strcmp(a, "--bit-rate")) rb = x;
            else if (!strcmp(a, "--offset-hz")) off_hz = x;
            else if (!strcmp(a, "--rate")) rate = x;
            else if (!strcmp(a, "--channel")) {
                if (x < 0 || x > 255 || x != floor(x)) { fprintf(stderr, "ulk impair: --channel must be 0..255\n"); return 2; }
                channel = (int)x;
            }
            continue;
        }
        if (a[0] == '-' && a[1]) { fprintf(stderr, "ulk impair: unknown option '%s' (ulk impair --help)\n", a); return 2; }
        if (!in) in = a;
        else if (!outp) outp = a;
        else { fprintf(stderr, "ulk impair: too many files ('%s')\n", a); return 2; }
    }
    if (!in || !outp) { fprintf(stderr, "ulk impair: IN and OUT are required\n"); usage(stderr); return 2; }
    if (!have_ebn0 && !no_noise) { fprintf(stderr, "ulk impair: --ebn0 DB is required (or --no-noise)\n"); return 2; }
    c.add_noise = !no_noise;
    if (channel < 0) {
        int meta_cplx = 0, two = 0;
        char meta_mode[64];
        if (cli_sniff_meta(in, &meta_cplx, meta_mode, sizeof meta_mode) < 0) {
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
        fprintf(stderr, "ulk impair: --mode and --offset-hz are for complex (I/Q) captures; %s is real\n", in);
        return 2;
    }

    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_reader *r = NULL;
    ulk_writer *w = NULL;
    ulk_impair *p = NULL;
    float *buf = NULL;
    if (!diag) { fprintf(stderr, "ulk impair: out of memory\n"); return 2; }
    if (dict_path) {
        if (ulk_dict_load(dict_path, &dict, diag) < 0) { ulk_diag_print(diag, stderr); goto out; }
        ulk_diag_clear(diag);
        double A = dict->link.amplitude;
        if (!(pd > 0)) pd = dict->link.waveform == ULK_WAVE_SQUARE ? A * A : A * A / 2;
        if (!(rb > 0)) rb = ulk_ratio_to_double(dict->link.bit_rate);
    }
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    hint.fs_hz = rate;
    hint.format = fmt == ULK_FMT_S16 ? ULK_FMT_S16 : ULK_FMT_F32;
    hint.container = ULK_CONTAINER_RAW;
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
            fprintf(stderr, "ulk impair: %s: 16-bit samples would clip (noise, gain or DC too large); lower "
                            "--amplitude or write .f32 / float WAV\n", outp);
            ret = 1;
        } else {
            fprintf(stderr, "ulk impair: %s: write failed (%s)\n", outp, ulk_status_str(rc));
        }
        goto out;
    }
    if (ulk_writer_commit(w, diag) < 0) { w = NULL; ulk_diag_print(diag, stderr); goto out; }
    w = NULL;
    fprintf(stderr, "wrote %s: %g Hz, noise sigma %.6g per sample\n", outp, info->fs_hz, ulk_impair_sigma(p));
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
