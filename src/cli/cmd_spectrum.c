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
#include "ulk/rx.h"
#include "ulk/sampleio.h"
#include "ulk/spectrum.h"
#include "util.h"


static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk spectrum CAPTURE [-o FILE.png|FILE.svg] [--dict DICT] [--nfft N] [--csv FILE] [--json]\n"
            "                    [--rate HZ --format f32|s16]\n"
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
            "  --rate HZ, --format f32|s16   for raw samples without SigMF metadata\n"
            "  --csv FILE         write the spectrum as CSV: f_hz,power (linear, line power)\n"
            "  --json             print the summary as JSON\n"
            "  -h, --help         this text\n"
            "\nexit: 0 done, 1 refused (dictionary, capture too short), 2 usage or I/O error\n");
}

static int exit_for(int rc)
{
    return (rc == ULK_EIO || rc == ULK_ENOMEM || rc == ULK_EINVAL) ? 2 : 1;
}

static int print_json(const char *cap, const char *out_path, const ulk_rx_spectrum *s)
{
    cJSON *o = cJSON_CreateObject();
    cJSON_AddStringToObject(o, "file", cap);
    cJSON_AddBoolToObject(o, "complex", s->complex_);
    cJSON_AddNumberToObject(o, "fs_hz", s->fs_hz);
    cJSON_AddNumberToObject(o, "samples", (double)s->n_samples);
    cJSON_AddNumberToObject(o, "nfft", (double)s->nfft);
    cJSON_AddNumberToObject(o, "segments", (double)s->n_segments);
    cJSON_AddNumberToObject(o, "non_finite_values", (double)s->n_nonfinite);
    cJSON_AddNumberToObject(o, "bin_hz", s->fs_hz / (double)s->nfft);
    cJSON_AddNumberToObject(o, "peak_hz", s->peak_hz);
    cJSON_AddNumberToObject(o, "peak_bin_hz", s->peak_bin_hz);
    if (isfinite(s->peak_db)) cJSON_AddNumberToObject(o, "peak_db", s->peak_db);
    else cJSON_AddNullToObject(o, "peak_db");
    cJSON *ma = cJSON_AddArrayToObject(o, "marks");
    for (int i = 0; i < s->n_marks; i++) {
        cJSON *m = cJSON_CreateObject();
        cJSON_AddStringToObject(m, "label", s->marks[i].label);
        cJSON_AddNumberToObject(m, "f_hz", s->marks[i].f_hz);
        cJSON_AddNumberToObject(m, "f_lo_hz", s->marks[i].f_lo_hz);
        cJSON_AddNumberToObject(m, "f_hi_hz", s->marks[i].f_hi_hz);
        cJSON_AddItemToArray(ma, m);
    }
    if (out_path) cJSON_AddStringToObject(o, "plot", out_path);
    char *txt = cJSON_Print(o);
    cJSON_Delete(o);
    if (!txt) return -1;
    puts(txt);
    cJSON_free(txt);
    return 0;
}

static void print_human(const char *cap, const char *out_path, const ulk_rx_spectrum *s)
{
    printf("%s: %s capture, %llu samples at %.10g Hz; %llu segments of %zu (Hann, 50 %% overlap), bin %.6g Hz\n",
           cap, s->complex_ ? "complex" : "real", (unsigned long long)s->n_samples, s->fs_hz,
           (unsigned long long)s->n_segments, s->nfft, s->fs_hz / (double)s->nfft);
    printf("strongest line: %.3f Hz, %.2f dB\n", s->peak_hz, s->peak_db);
    for (int i = 0; i < s->n_marks; i++)
        printf("  mark %-8s %12.3f Hz  band %.3f .. %.3f Hz\n", s->marks[i].label, s->marks[i].f_hz,
               s->marks[i].f_lo_hz, s->marks[i].f_hi_hz);
    if (out_path) printf("plot: %s\n", out_path);
}

static int write_csv(const char *path, const ulk_rx_spectrum *s, ulk_diag *diag)
{
    ulk_afile af;
    int rc = ulk_afile_open(&af, path, diag);
    if (rc < 0) return rc;
    fputs("f_hz,power\n", af.fp);
    for (size_t k = 0; k < s->n_bins; k++) fprintf(af.fp, "%.17g,%.9g\n", s->f_hz[k], s->power[k]);
    return ulk_afile_commit(&af, diag);
}

typedef struct {
    const char *cap, *out_path, *dict_path, *csv_path;
    int json;
    size_t nfft;
    int have_hint;
    ulk_sample_info hint;
} spec_args;

/* Returns 0 to go on, 1 after --help (exit 0), or 2 (usage error, message printed). */
static int parse_args(int argc, char **argv, spec_args *x)
{
    const char *nfft_text = NULL, *rate_text = NULL, *fmt_text = NULL;
    memset(x, 0, sizeof *x);
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 1; }
        else if ((!strcmp(a, "-o") || !strcmp(a, "--output")) && i + 1 < argc) x->out_path = argv[++i];
        else if (!strncmp(a, "--output=", 9)) x->out_path = a + 9;
        else if (!strcmp(a, "--dict") && i + 1 < argc) x->dict_path = argv[++i];
        else if (!strncmp(a, "--dict=", 7)) x->dict_path = a + 7;
        else if (!strcmp(a, "--nfft") && i + 1 < argc) nfft_text = argv[++i];
        else if (!strncmp(a, "--nfft=", 7)) nfft_text = a + 7;
        else if (!strcmp(a, "--rate") && i + 1 < argc) rate_text = argv[++i];
        else if (!strncmp(a, "--rate=", 7)) rate_text = a + 7;
        else if (!strcmp(a, "--format") && i + 1 < argc) fmt_text = argv[++i];
        else if (!strncmp(a, "--format=", 9)) fmt_text = a + 9;
        else if (!strcmp(a, "--csv") && i + 1 < argc) x->csv_path = argv[++i];
        else if (!strncmp(a, "--csv=", 6)) x->csv_path = a + 6;
        else if (!strcmp(a, "--json")) x->json = 1;
        else if (a[0] == '-' && a[1]) {
            fprintf(stderr, "ulk spectrum: unknown or incomplete option '%s'\n", a);
            usage(stderr);
            return 2;
        } else if (!x->cap) x->cap = a;
        else {
            fprintf(stderr, "ulk spectrum: more than one capture ('%s' and '%s')\n", x->cap, a);
            return 2;
        }
    }
    if (!x->cap) {
        fprintf(stderr, "ulk spectrum: CAPTURE is required\n");
        usage(stderr);
        return 2;
    }
    if (nfft_text) {
        char *end;
        unsigned long long v = strtoull(nfft_text, &end, 10);
        if (*end || !*nfft_text || v < 16 || v > (1ull << 22) || (v & (v - 1))) {
            fprintf(stderr, "ulk spectrum: --nfft '%s': expected a power of two from 16 to 4194304\n", nfft_text);
            return 2;
        }
        x->nfft = (size_t)v;
    }
    if (rate_text) {
        ulk_ratio r;
        if (ulk_ratio_parse(rate_text, &r) < 0 || r.num <= 0) {
            fprintf(stderr, "ulk spectrum: --rate '%s': expected a positive decimal number of Hz\n", rate_text);
            return 2;
        }
        x->hint.fs_hz = ulk_ratio_to_double(r);
        x->hint.container = ULK_CONTAINER_RAW;
        x->have_hint = 1;
    }
    if (fmt_text) {
        if (!strcmp(fmt_text, "f32")) x->hint.format = ULK_FMT_F32;
        else if (!strcmp(fmt_text, "s16")) x->hint.format = ULK_FMT_S16;
        else {
            fprintf(stderr, "ulk spectrum: --format '%s': expected f32 or s16\n", fmt_text);
            return 2;
        }
    }
    return 0;
}

/* The outputs of one spectrum: plot, CSV, report. Returns 0 or the exit code. */
static int report(const spec_args *x, const ulk_rx_spectrum *s, ulk_diag *diag)
{
    int rc;
    if (x->out_path) {
        char title[600];
        snprintf(title, sizeof title, "%s: %s, %.10g Hz, %llu segments of %zu (bin %.4g Hz)%s%s", x->cap,
                 s->complex_ ? "complex" : "real", s->fs_hz, (unsigned long long)s->n_segments, s->nfft,
                 s->fs_hz / (double)s->nfft, x->dict_path ? ", marks from " : "", x->dict_path ? x->dict_path : "");
        rc = ulk_spectrum_plot(s->f_hz, s->power, s->n_bins, s->marks, s->n_marks, title, x->out_path, diag);
        if (rc < 0) return exit_for(rc);
    }
    if (x->csv_path && (rc = write_csv(x->csv_path, s, diag)) < 0) return exit_for(rc);
    if (x->json) {
        if (print_json(x->cap, x->out_path, s) < 0) return ulk_fail(diag, ULK_ENOMEM, "out of memory"), 2;
    } else {
        print_human(x->cap, x->out_path, s);
    }
    return 0;
}

int cmd_spectrum(int argc, char **argv)
{
    spec_args x;
    int r = parse_args(argc, argv, &x);
    if (r) return r == 1 ? 0 : 2;
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk spectrum: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_rx_spectrum s;
    memset(&s, 0, sizeof s);
    int code = 0, rc;
    if (x.dict_path && (rc = ulk_dict_load(x.dict_path, &dict, diag)) < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk spectrum: dictionary %s refused\n", x.dict_path);
        code = rc == ULK_EIO || rc == ULK_ENOMEM ? 2 : 1;
        goto done;
    }
    rc = ulk_rx_spectrum_file(x.cap, x.have_hint ? &x.hint : NULL, x.nfft, dict, &s, diag);
    if (rc >= 0 && s.n_nonfinite)
        fprintf(stderr, "ulk spectrum: warning: %s: %llu sample value%s not finite (NaN or infinite), taken as 0\n",
                x.cap, (unsigned long long)s.n_nonfinite, s.n_nonfinite == 1 ? " is" : "s are");
    code = rc < 0 ? exit_for(rc) : report(&x, &s, diag);
    if (code) {
        ulk_diag_print(diag, stderr);
        if (x.out_path) fprintf(stderr, "ulk spectrum: no plot written\n");
    }
done:
    ulk_rx_spectrum_free(&s);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return code;
}
