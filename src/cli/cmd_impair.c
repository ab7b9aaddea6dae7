/* src/cli/cmd_impair.c - `ulk impair IN OUT --ebn0 DB [--seed N] [--ppm X] [--delay S]
 * [--amplitude A] [--dc X] [--invert] [--dict D | --pd P --bit-rate R]`: a channel
 * simulator for receiver tests (include/ulk/impair.h). Seeded and deterministic.
 * Exit 0 written; 1 refused (e.g. 16-bit output would clip); 2 usage or I/O error. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "ulk/dict.h"
#include "ulk/impair.h"
#include "ulk/sampleio.h"
#include "util.h"

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

int cmd_impair(int argc, char **argv)
{
    const char *in = NULL, *outp = NULL, *dict_path = NULL;
    ulk_impair_config c;
    memset(&c, 0, sizeof c);
    c.seed = 1;
    c.add_noise = 1;
    int have_ebn0 = 0, no_noise = 0, channel = -1, fmt = -1;
    double rate = 0, pd = 0, rb = 0;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        if (!strcmp(a, "--invert")) { c.invert = 1; continue; }
        if (!strcmp(a, "--no-noise")) { no_noise = 1; continue; }
        int takes = !strcmp(a, "--ebn0") || !strcmp(a, "--seed") || !strcmp(a, "--ppm") || !strcmp(a, "--delay") ||
                    !strcmp(a, "--amplitude") || !strcmp(a, "--dc") || !strcmp(a, "--dict") || !strcmp(a, "--pd") ||
                    !strcmp(a, "--bit-rate") || !strcmp(a, "--rate") || !strcmp(a, "--format") || !strcmp(a, "--channel");
        if (takes) {
            if (i + 1 >= argc) { fprintf(stderr, "ulk impair: %s needs a value\n", a); return 2; }
            const char *v = argv[++i];
            double x = 0;
            if (!strcmp(a, "--dict")) { dict_path = v; continue; }
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

    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_reader *r = NULL;
    ulk_writer *w = NULL;
    ulk_impair *p = NULL;
    float *buf = NULL;
    if (!diag) return 2;
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
