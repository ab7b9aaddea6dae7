/* src/cli/cmd_spectrum.c - `ulk spectrum CAPTURE [-o FILE.png|.svg] [--dict DICT] [--nfft N]
 * [--csv FILE] [--rate HZ [--format f32|s16|cf32|ci16]] [--json]`: the Welch-averaged power
 * spectrum of a real or complex capture (ulk_rx_spectrum_file, include/ulk/rx.h), drawn with
 * the dictionary's channels marked, and its strongest line printed. Exit (docs/cli.md) 0 done;
 * 1 refused (a broken dictionary, capture too short); 2 usage or I/O error.
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
            "  --csv FILE         write the spectrum as CSV: f_hz,power (linear, line power);\n"
            "                     '-' for standard output (the summary then goes to standard error)\n"
            "  --json             print the summary as JSON\n"
            "  -h, --help         this text\n"
            "\nexit: 0 done; 1 refused (the dictionary breaks a rule, the capture is shorter than a\n"
            "      segment); 2 usage or I/O error\n");
}

static int exit_for(int rc) { return cli_exit_for(rc); }

static int print_json(FILE *out, const char *cap, const char *out_path, const ulk_rx_spectrum *s)
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
    fprintf(out, "%s\n", txt);
    cJSON_free(txt);
    return 0;
}

static void print_human(FILE *out, const char *cap, const char *out_path, const ulk_rx_spectrum *s)
{
    fprintf(out, "%s: %s capture, %llu samples at %.10g Hz; %llu segments of %zu (Hann, 50 %% overlap), bin %.6g Hz\n",
            cap, s->complex_ ? "complex" : "real", (unsigned long long)s->n_samples, s->fs_hz,
            (unsigned long long)s->n_segments, s->nfft, s->fs_hz / (double)s->nfft);
    fprintf(out, "strongest line: %.3f Hz, %.2f dB\n", s->peak_hz, s->peak_db);
    for (int i = 0; i < s->n_marks; i++)
        fprintf(out, "  mark %-8s %12.3f Hz  band %.3f .. %.3f Hz\n", s->marks[i].label, s->marks[i].f_hz,
                s->marks[i].f_lo_hz, s->marks[i].f_hi_hz);
    if (out_path) fprintf(out, "plot: %s\n", out_path);
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

enum { O_OUTPUT = 'o', O_DICT = CLI_LONG, O_NFFT, O_RATE, O_FORMAT, O_CSV, O_JSON };
static const struct option opts[] = {
    {"output", required_argument, 0, O_OUTPUT}, {"dict", required_argument, 0, O_DICT},
    {"nfft", required_argument, 0, O_NFFT},     {"rate", required_argument, 0, O_RATE},
    {"format", required_argument, 0, O_FORMAT}, {"csv", required_argument, 0, O_CSV},
    {"json", no_argument, 0, O_JSON},           {"help", no_argument, 0, 'h'},
    {0, 0, 0, 0}};
static const cli_command command = {"spectrum", opts, usage};

typedef struct {
    const char *cap, *out_path, *dict_path, *csv_path, *rate_text;
    int json, fmt, fmt_complex;
    size_t nfft;              /* 0: 8192, reduced to fit a short capture */
    int have_hint;
    ulk_sample_info hint;
} spec_args;

static int on_opt(int v, const char *arg, void *ctx)
{
    spec_args *a = ctx;
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
        break;
    default: break;
    }
    return 0;
}

/* What --rate and --format say about raw samples without metadata (used only with a rate). */
static int make_hint(spec_args *x)
{
    if (!x->rate_text) return 0;
    ulk_ratio r;
    if (ulk_ratio_parse(x->rate_text, &r) < 0 || r.num <= 0) {
        fprintf(stderr, "ulk spectrum: --rate '%s': expected a positive decimal number of Hz\n", x->rate_text);
        return CLI_EXIT_USAGE_IO;
    }
    x->hint.fs_hz = ulk_ratio_to_double(r);
    x->hint.container = ULK_CONTAINER_RAW;
    x->hint.channels = 1;
    if (x->fmt >= 0) {
        /* a named format must agree with the extension; without one the extension decides */
        x->hint.format = (ulk_sample_format)x->fmt;
        x->hint.format_given = 1;
        x->hint.channels = x->fmt_complex ? 2 : 1;
    }
    x->have_hint = 1;
    return 0;
}

/* Parses the options and checks the files before any work: returns -1 to go on, else the exit
 * code (0 after --help). A capture '-' becomes a temporary copy of standard input. */
static int parse_args(int argc, char **argv, spec_args *x)
{
    memset(x, 0, sizeof *x);
    x->fmt = -1;
    int first, pr = cli_parse(&command, argc, argv, on_opt, x, &first);
    if (pr >= 0) return pr;
    x->cap = first < argc ? argv[first] : NULL;
    if (argc - first > 1) {
        fprintf(stderr, "ulk spectrum: more than one capture ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    if (!x->cap) {
        fprintf(stderr, "ulk spectrum: CAPTURE is required\n");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    if (!(x->cap = cli_input("spectrum", x->cap))) return CLI_EXIT_USAGE_IO; /* "-": read twice when complex */
    const char *ins[] = {x->cap, x->dict_path}, *what[] = {"capture", "dictionary"};
    size_t n_ins = x->dict_path ? 2 : 1;
    if (x->out_path && ((pr = cli_refuse_overwrite("spectrum", x->out_path, ins, what, n_ins)) ||
                        (pr = cli_check_picture("spectrum", x->out_path))))
        return pr;
    if (x->csv_path && (pr = cli_refuse_overwrite("spectrum", x->csv_path, ins, what, n_ins))) return pr;
    if (x->csv_path && x->out_path && cli_same_file(x->csv_path, x->out_path)) {
        fprintf(stderr, "ulk spectrum: --csv and -o name the same file '%s'\n", x->csv_path);
        return CLI_EXIT_USAGE_IO;
    }
    return (pr = make_hint(x)) ? pr : -1;
}

/* The outputs of one spectrum: plot, CSV, report. With the CSV on standard output the
 * summary goes to standard error. Returns 0 or the exit code. */
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
    FILE *out = x->csv_path && cli_is_std(x->csv_path) ? stderr : stdout;
    if (x->json) {
        if (print_json(out, x->cap, x->out_path, s) < 0) return ulk_fail(diag, ULK_ENOMEM, "out of memory"), 2;
    } else {
        print_human(out, x->cap, x->out_path, s);
    }
    return 0;
}

int cmd_spectrum(int argc, char **argv)
{
    spec_args x;
    int code = parse_args(argc, argv, &x);
    if (code >= 0) return code;
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk spectrum: out of memory\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_rx_spectrum s;
    memset(&s, 0, sizeof s);
    int rc;
    if (x.dict_path && (code = cli_load_dict("spectrum", x.dict_path, &dict))) goto done; /* as every command */
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
