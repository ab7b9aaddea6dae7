/* src/cli/cmd_spectrum.c - `ulk spectrum CAPTURE [-o FILE.png|.svg] [--dict DICT] [--nfft N]
 * [--rate HZ --format f32|s16] [--json]`: the Welch-averaged power spectrum of a real or
 * complex capture (include/ulk/spectrum.h), drawn with the dictionary's channels marked,
 * and its strongest line printed. Exit 0 done; 1 refused (dictionary, capture too short);
 * 2 usage or I/O error.
 *
 * A capture is complex when it has two channels: a .cf32/.ci16 file (I, Q) or a two-channel
 * WAV (left I, right Q), as `ulk modulate --carrier` writes them.
 */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cli.h"
#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/link.h"
#include "ulk/sampleio.h"
#include "ulk/spectrum.h"
#include "util.h"

#define CHUNK 65536
#define MAX_MARKS 12

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk spectrum CAPTURE [-o FILE.png|FILE.svg] [--dict DICT] [--nfft N] [--csv FILE] [--json]\n"
            "                    [--rate HZ [--format f32|s16|cf32|ci16]]\n"
            "\n"
            "Welch-averaged power spectrum (Hann window, segments of N samples, 50 %% overlap) of a\n"
            "real capture (one channel: 0 .. f_s/2) or a complex one (.cf32/.ci16, or a two-channel\n"
            "WAV with I left and Q right: -f_s/2 .. f_s/2). Each bin reads as line power: a complex\n"
            "tone of amplitude 1 is 0 dB, a real sine of amplitude a is a^2/2. Prints the strongest\n"
            "line; with --dict the plot marks the dictionary's channels: data subcarrier and its\n"
            "main lobe (f_sc +- R_s), pilot, and from a carrier section the residual carrier (at\n"
            "the offset), the voice subcarrier (f_v +- (Delta + f_a)) and the ranging main lobe\n"
            "(+- chip rate).\n"
            "\n"
            "options:\n"
            "  -o, --output FILE  draw the spectrum (.png or .svg, written atomically)\n"
            "  --dict DICT        mark the channels of this dictionary\n"
            "  --nfft N           segment length, a power of two (default 8192, smaller for short\n"
            "                     captures); the bin is f_s / N\n"
            "  --rate HZ          sample rate of raw samples without SigMF metadata\n"
            "  --format TYPE      their sample type when the name does not say it: f32, s16,\n"
            "                     cf32, ci16\n"
            "  --csv FILE         write the spectrum as CSV: f_hz,power (linear, line power)\n"
            "  --json             print the summary as JSON\n"
            "  -h, --help         this text\n"
            "\nexit: 0 done, 1 refused (dictionary, capture too short), 2 usage or I/O error\n");
}

static int exit_for(int rc) { return cli_exit_for(rc); }

static void add_mark(ulk_spectrum_mark *m, int *n, double f, double half, const char *label)
{
    if (*n >= MAX_MARKS) return;
    m[*n].f_hz = f;
    m[*n].f_lo_hz = f - half;
    m[*n].f_hi_hz = f + half;
    m[*n].label = label;
    (*n)++;
}

/* The dictionary's channels as marks: at +f for a real capture, at f_o +- f for a complex one. */
static int build_marks(const ulk_dict *d, int is_complex, ulk_spectrum_mark *m)
{
    int n = 0;
    const ulk_link *l = &d->link;
    const ulk_carrier *c = ulk_dict_carrier(d);
    double fo = c && is_complex ? ulk_ratio_to_double(c->offset_hz) : 0.0;
    double rs = l->profile == ULK_PROFILE_CCSDS_TC ? ulk_ratio_to_double(l->bit_rate)
                                                    : ulk_ratio_to_double(ulk_link_subbit_rate(l));
    double fsc = ulk_ratio_to_double(l->fsc);
    if (c && is_complex) add_mark(m, &n, fo, 0, "carrier");
    add_mark(m, &n, fo + fsc, rs, "data");
    if (is_complex) add_mark(m, &n, fo - fsc, rs, "data");
    if (l->has_pilot) {
        double fp = ulk_ratio_to_double(l->fp);
        add_mark(m, &n, fo + fp, 0, "pilot");
        if (is_complex) add_mark(m, &n, fo - fp, 0, "pilot");
    }
    if (c && c->has_voice) {
        double fv = ulk_ratio_to_double(c->voice_fv_hz);
        double hv = ulk_ratio_to_double(c->voice_dev_hz) + ulk_ratio_to_double(c->voice_tone_hz);
        add_mark(m, &n, fo + fv, hv, "voice");
        if (is_complex) add_mark(m, &n, fo - fv, hv, "voice");
    }
    if (c && c->has_ranging) add_mark(m, &n, fo, ulk_ratio_to_double(c->chip_rate), "ranging");
    return n;
}

enum { O_OUTPUT = 'o', O_DICT = CLI_LONG, O_NFFT, O_RATE, O_FORMAT, O_CSV, O_JSON };
static const struct option opts[] = {
    {"output", required_argument, 0, O_OUTPUT}, {"dict", required_argument, 0, O_DICT},
    {"nfft", required_argument, 0, O_NFFT},     {"rate", required_argument, 0, O_RATE},
    {"format", required_argument, 0, O_FORMAT}, {"csv", required_argument, 0, O_CSV},
    {"json", no_argument, 0, O_JSON},           {"help", no_argument, 0, 'h'},
    {0, 0, 0, 0}};
static const cli_command command = {"spectrum", opts, usage};

typedef struct {
    const char *out_path, *dict_path, *csv_path, *rate_text;
    int json, nfft_given, fmt, fmt_complex;
    size_t nfft;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    unsigned long long u;
    switch (v) {
    case O_OUTPUT: a->out_path = arg; break;
    case O_DICT: a->dict_path = arg; break;
    case O_CSV: a->csv_path = arg; break;
    case O_RATE: a->rate_text = arg; break;
    case O_JSON: a->json = 1; break;
    case O_FORMAT: return cli_format("spectrum", arg, &a->fmt, &a->fmt_complex);
    case O_NFFT:
        if (cli_uint("spectrum", "--nfft", arg, 1ull << 22, &u) || u < 16 || (u & (u - 1))) {
            fprintf(stderr, "ulk spectrum: --nfft '%s': expected a power of two from 16 to 4194304\n", arg);
            return CLI_EXIT_USAGE_IO;
        }
        a->nfft = (size_t)u;
        a->nfft_given = 1;
        break;
    default: break;
    }
    return 0;
}

int cmd_spectrum(int argc, char **argv)
{
    args opt = {.fmt = -1, .nfft = 8192};
    int first, pr = cli_parse(&command, argc, argv, on_opt, &opt, &first);
    if (pr >= 0) return pr;
    const char *cap = first < argc ? argv[first] : NULL, *out_path = opt.out_path, *dict_path = opt.dict_path,
               *csv_path = opt.csv_path, *rate_text = opt.rate_text;
    int json = opt.json, nfft_given = opt.nfft_given;
    size_t nfft = opt.nfft;
    if (argc - first > 1) {
        fprintf(stderr, "ulk spectrum: more than one capture ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    if (!cap) {
        fprintf(stderr, "ulk spectrum: CAPTURE is required\n");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    if (!(cap = cli_input("spectrum", cap))) return CLI_EXIT_USAGE_IO; /* "-": read twice when complex */
    const char *ins[] = {cap, dict_path}, *what[] = {"capture", "dictionary"};
    if (out_path && ((pr = cli_refuse_overwrite("spectrum", out_path, ins, what, 2)) ||
                     (pr = cli_check_picture("spectrum", out_path))))
        return pr;
    if (csv_path && (pr = cli_refuse_overwrite("spectrum", csv_path, ins, what, 2))) return pr;
    ulk_sample_info hint = {0};
    if (rate_text) {
        ulk_ratio r;
        if (ulk_ratio_parse(rate_text, &r) < 0 || r.num <= 0) {
            fprintf(stderr, "ulk spectrum: --rate '%s': expected a positive decimal number of Hz\n", rate_text);
            return CLI_EXIT_USAGE_IO;
        }
        hint.fs_hz = ulk_ratio_to_double(r);
        hint.container = ULK_CONTAINER_RAW;
    }
    if (opt.fmt >= 0) {
        hint.format = (ulk_sample_format)opt.fmt;
        hint.format_given = 1;
        hint.channels = opt.fmt_complex ? 2 : 1;
    }

    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk spectrum: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_reader *ri = NULL, *rq = NULL;
    ulk_welch *w = NULL;
    float *bi = NULL, *bq = NULL;
    int code = 0, rc;

    if (dict_path) {
        rc = ulk_dict_load(dict_path, &dict, diag);
        if (rc < 0) {
            ulk_diag_print(diag, stderr);
            fprintf(stderr, "ulk spectrum: dictionary %s refused\n", dict_path);
            code = rc == ULK_EIO || rc == ULK_ENOMEM ? 2 : 1;
            goto done;
        }
    }
    rc = ulk_reader_open(cap, rate_text ? &hint : NULL, 0, &ri, diag);
    if (rc < 0) { code = exit_for(rc); goto fail; }
    const ulk_sample_info *info = ulk_reader_info(ri);
    if (info->channels > 2) {
        rc = ulk_fail(diag, ULK_EINVAL, "%s: has %d channels; a capture is real (1) or complex I/Q (2)", cap,
                      info->channels);
        code = 2;
        goto fail;
    }
    const int is_complex = info->channels == 2;
    if (is_complex) {
        rc = ulk_reader_open(cap, rate_text ? &hint : NULL, 1, &rq, diag);
        if (rc < 0) { code = exit_for(rc); goto fail; }
    }
    const double fs_hz = info->fs_hz;
    int64_t len = ulk_reader_length(ri);
    if (len >= 0 && (uint64_t)len < nfft) {
        if (nfft_given || len < 16) {
            rc = ulk_fail(diag, ULK_ELIMIT, "%s: %lld samples are fewer than one segment of %zu", cap, (long long)len,
                          nfft_given ? nfft : (size_t)16);
            code = 1;
            goto fail;
        }
        while (nfft > (uint64_t)len) nfft /= 2;
    }
    rc = ulk_welch_create(nfft, is_complex, fs_hz, &w, diag);
    if (rc < 0) { code = exit_for(rc); goto fail; }
    bi = ulk_malloc(CHUNK * sizeof *bi);
    bq = ulk_malloc(CHUNK * sizeof *bq);
    if (!bi || !bq) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", cap); code = 2; goto fail; }
    uint64_t total = 0, n_bad = 0;
    for (;;) {
        long gi = ulk_reader_read(ri, bi, CHUNK);
        if (gi < 0) {
            rc = ulk_fail(diag, (int)gi, "%s", ulk_reader_error(ri));
            code = exit_for((int)gi);
            goto fail;
        }
        if (gi == 0) break;
        if (is_complex) {
            long gq = ulk_reader_read(rq, bq, (size_t)gi);
            if (gq != gi) {
                rc = ulk_fail(diag, ULK_EFORMAT, "%s: I and Q differ in length%s%s", cap, gq < 0 ? ": " : "",
                              gq < 0 ? ulk_reader_error(rq) : "");
                code = 1;
                goto fail;
            }
        }
        /* NaN or infinite samples would spread over every bin: counted and taken as 0 */
        for (long k = 0; k < gi; k++) {
            if (!isfinite(bi[k])) { bi[k] = 0; n_bad++; }
            if (is_complex && !isfinite(bq[k])) { bq[k] = 0; n_bad++; }
        }
        ulk_welch_feed(w, bi, is_complex ? bq : NULL, (size_t)gi);
        total += (uint64_t)gi;
    }
    if (n_bad)
        fprintf(stderr, "ulk spectrum: warning: %s: %llu sample value%s not finite (NaN or infinite), taken as 0\n",
                cap, (unsigned long long)n_bad, n_bad == 1 ? " is" : "s are");
    const double *f, *p;
    size_t nb;
    uint64_t nseg;
    rc = ulk_welch_result(w, &f, &p, &nb, &nseg);
    if (rc < 0) {
        rc = ulk_fail(diag, ULK_ELIMIT, "%s: %llu samples are fewer than one segment of %zu", cap,
                      (unsigned long long)total, nfft);
        code = 1;
        goto fail;
    }
    /* the strongest line, refined by a parabola through the dB values of its neighbours */
    size_t kmax = 0;
    for (size_t k = 1; k < nb; k++)
        if (p[k] > p[kmax]) kmax = k;
    double peak_hz = f[kmax], peak_db = p[kmax] > 0 ? 10 * log10(p[kmax]) : -HUGE_VAL;
    if (kmax > 0 && kmax + 1 < nb && p[kmax - 1] > 0 && p[kmax + 1] > 0 && p[kmax] > 0) {
        double a = 10 * log10(p[kmax - 1]), b = peak_db, c = 10 * log10(p[kmax + 1]);
        double den = a - 2 * b + c;
        if (den < 0) {
            double dk = 0.5 * (a - c) / den;
            peak_hz += dk * (f[kmax + 1] - f[kmax]);
        }
    }
    ulk_spectrum_mark marks[MAX_MARKS];
    int n_marks = dict ? build_marks(dict, is_complex, marks) : 0;
    if (out_path) {
        char title[600];
        snprintf(title, sizeof title, "%s: %s, %.10g Hz, %llu segments of %zu (bin %.4g Hz)%s%s", cap,
                 is_complex ? "complex" : "real", fs_hz, (unsigned long long)nseg, nfft, fs_hz / (double)nfft,
                 dict ? ", marks from " : "", dict ? dict_path : "");
        rc = ulk_spectrum_plot(f, p, nb, marks, n_marks, title, out_path, diag);
        if (rc < 0) { code = exit_for(rc); goto fail; }
    }
    if (csv_path) {
        ulk_afile af;
        rc = ulk_afile_open(&af, csv_path, diag);
        if (rc < 0) { code = exit_for(rc); goto fail; }
        fputs("f_hz,power\n", af.fp);
        for (size_t k = 0; k < nb; k++) fprintf(af.fp, "%.17g,%.9g\n", f[k], p[k]);
        rc = ulk_afile_commit(&af, diag);
        if (rc < 0) { code = exit_for(rc); goto fail; }
    }
    if (json) {
        cJSON *o = cJSON_CreateObject();
        cJSON_AddStringToObject(o, "file", cap);
        cJSON_AddBoolToObject(o, "complex", is_complex);
        cJSON_AddNumberToObject(o, "fs_hz", fs_hz);
        cJSON_AddNumberToObject(o, "samples", (double)total);
        cJSON_AddNumberToObject(o, "nfft", (double)nfft);
        cJSON_AddNumberToObject(o, "segments", (double)nseg);
        cJSON_AddNumberToObject(o, "non_finite_values", (double)n_bad);
        cJSON_AddNumberToObject(o, "bin_hz", fs_hz / (double)nfft);
        cJSON_AddNumberToObject(o, "peak_hz", peak_hz);
        cJSON_AddNumberToObject(o, "peak_bin_hz", f[kmax]);
        if (isfinite(peak_db)) cJSON_AddNumberToObject(o, "peak_db", peak_db);
        else cJSON_AddNullToObject(o, "peak_db");
        cJSON *ma = cJSON_AddArrayToObject(o, "marks");
        for (int i = 0; i < n_marks; i++) {
            cJSON *m = cJSON_CreateObject();
            cJSON_AddStringToObject(m, "label", marks[i].label);
            cJSON_AddNumberToObject(m, "f_hz", marks[i].f_hz);
            cJSON_AddNumberToObject(m, "f_lo_hz", marks[i].f_lo_hz);
            cJSON_AddNumberToObject(m, "f_hi_hz", marks[i].f_hi_hz);
            cJSON_AddItemToArray(ma, m);
        }
        if (out_path) cJSON_AddStringToObject(o, "plot", out_path);
        char *s = cJSON_Print(o);
        cJSON_Delete(o);
        if (!s) { rc = ulk_fail(diag, ULK_ENOMEM, "out of memory"); code = 2; goto fail; }
        puts(s);
        cJSON_free(s);
    } else {
        printf("%s: %s capture, %llu samples at %.10g Hz; %llu segments of %zu (Hann, 50 %% overlap), bin %.6g Hz\n",
               cap, is_complex ? "complex" : "real", (unsigned long long)total, fs_hz, (unsigned long long)nseg,
               nfft, fs_hz / (double)nfft);
        printf("strongest line: %.3f Hz, %.2f dB\n", peak_hz, peak_db);
        for (int i = 0; i < n_marks; i++)
            printf("  mark %-8s %12.3f Hz  band %.3f .. %.3f Hz\n", marks[i].label, marks[i].f_hz, marks[i].f_lo_hz,
                   marks[i].f_hi_hz);
        if (out_path) printf("plot: %s\n", out_path);
    }
    goto done;

fail:
    ulk_diag_print(diag, stderr);
    if (out_path) fprintf(stderr, "ulk spectrum: no plot written\n");
done:
    ulk_free(bi);
    ulk_free(bq);
    ulk_welch_destroy(w);
    ulk_reader_close(ri);
    ulk_reader_close(rq);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return code;
}
