/* src/cli/cmd_decode.c - `ulk decode --dict DICT CAPTURE [--json] [--plot FILE]
 * [--rate HZ --format f32|s16] [--channel N] [--iq] [--mode NAME] [--max-offset HZ]
 * [--voice OUT.wav] [--ranging]`: recover words and commands from a capture, blind (unknown
 * start, clock error, level, DC, polarity, noise); a complex capture of the composite carrier
 * through carrier recovery first, with its voice and ranging channels on request.
 * Exit 0 words found; 1 no word found; 2 usage, dictionary or I/O error. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture.h"
#include "cli.h"
#include "ulk/decode.h"
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/plot.h"
#include "ulk/sdls.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk decode --dict DICT CAPTURE [--json] [--plot FILE.png]\n"
            "                  [--rate HZ --format f32|s16] [--channel N]\n"
            "                  [--iq] [--mode NAME] [--max-offset HZ] [--voice OUT.wav] [--ranging]\n"
            "                  [--keys FILE [--state STATE]]\n"
            "\n"
            "Finds the command words in a capture without being told where they start, and\n"
            "interprets them with the dictionary. The capture may start anywhere, its clock and\n"
            "subcarrier may be off by up to +-500 ppm, its level anywhere from -40 dBFS to full\n"
            "scale, with a DC offset, inverted, and noisy. Each word is accepted (check passed,\n"
            "our vehicle, a known command with valid arguments) or rejected with its reason.\n"
            "\n"
            "  CAPTURE                 WAV, or raw .f32/.s16 little-endian mono with its\n"
            "                          .sigmf-meta beside it or --rate/--format\n"
            "options:\n"
            "  --dict DICT             the dictionary the uplink was made with\n"
            "  --json                  machine-readable output (words and estimates)\n"
            "  --plot FILE.png         picture of the soft sub-bit values and each word's margin\n"
            "  --rate HZ               sample rate of a raw capture\n"
            "  --format f32|s16        sample type of a raw capture\n"
            "  --channel N             channel of a multi-channel WAV (0 = first)\n"
            "  --keys FILE             key file (NAME HEX, mode 0600): authenticate every frame of a\n"
            "                          dictionary with link.tc.security (without it: secured, not\n"
            "                          authenticated)\n"
            "  --state STATE           receive-side anti-replay window, saved back after the decode\n"
            "                          (created when absent); a frame not above the last accepted\n"
            "                          counter is 'replayed'\n"
            "complex captures of the composite carrier (.cf32/.ci16 with SigMF, or a two-channel\n"
            "WAV with --iq; the dictionary's carrier section, docs/carrier.md):\n"
            "  --iq                    a two-channel WAV is I (left) and Q (right)\n"
            "  --mode NAME             the carrier mode (default: the one in the SigMF metadata)\n"
            "  --max-offset HZ         carrier offset search range +-HZ (default 5000)\n"
            "  --voice OUT.wav         demodulate the voice FM subcarrier to OUT.wav (float)\n"
            "  --ranging               report the ranging code phase (chips, seconds from the\n"
            "                          capture start) and the correlation's peak-to-mean ratio\n"
            "  -h, --help              this text\n"
            "\n"
            "Human output lists accepted commands in command-list syntax with their start times,\n"
            "and rejected words with their reason. With a ccsds-tc dictionary each unit is a CLTU:\n"
            "start sequence found in either polarity, codeblocks decoded, frame, FECF and packet\n"
            "checked, then the command; \"hex\" is the packet data field.\n"
            "Estimates: E_b/N_0 as the sub-bit profile\n"
            "defines it (P_d f_s / (2 sigma^2 R_b)), the subcarrier frequency and clock error\n"
            "measured against the capture's sample clock.\n"
            "\nexit: 0 words found, 1 no word found (secured link: no command accepted), 2 usage,\n"
            "dictionary, key file or I/O error\n");
}

typedef struct {
    ulk_plot *plot;
} plot_ctx;

static void soft_cb(double t, float v, void *user)
{
    plot_ctx *p = user;
    ulk_plot_soft(p->plot, t, v);
}

static void word_cb(double t, double margin, int accepted, void *user)
{
    plot_ctx *p = user;
    ulk_plot_word(p->plot, t, margin, accepted);
}

/* A JSON value for one argument: label, boolean, exact integer or engineering number. */
static cJSON *arg_json(const ulk_decoded_arg *a)
{
    const ulk_arg *d = a->arg;
    char buf[64];
    if (d->type == ULK_ARG_ENUM) return cJSON_CreateString(a->label ? a->label : a->text);
    if (d->type == ULK_ARG_BOOLEAN) return cJSON_CreateBool(a->raw & 1);
    if (d->type == ULK_ARG_FLOAT32 || d->cal != ULK_CAL_NONE) {
        if (!isfinite(a->eng)) return cJSON_CreateString(a->text);
        ulk_fmt_double(a->eng, buf, sizeof buf);
        return cJSON_CreateRaw(buf);
    }
    /* uncalibrated integers: exact, even beyond 2^53 */
    return cJSON_CreateRaw(a->text);
}

/* Adds v under key k; on failure v is freed (cJSON leaves it to the caller). Returns 1 or 0. */
static int add_item(cJSON *o, const char *k, cJSON *v)
{
    if (!v) return 0;
    if (!cJSON_AddItemToObject(o, k, v)) {
        cJSON_Delete(v);
        return 0;
    }
    return 1;
}

static cJSON *num_or_null(int have, double v)
{
    if (!have || !isfinite(v)) return cJSON_CreateNull();
    char buf[64];
    ulk_fmt_double(v, buf, sizeof buf);
    return cJSON_CreateRaw(buf);
}

static int print_json(const cli_capture *c)
{
    cJSON *root = cJSON_CreateObject();
    cJSON *words = cJSON_AddArrayToObject(root, "words");
    int ok = root && words;
    for (size_t i = 0; ok && i < c->n; i++) {
        const cli_word *w = &c->w[i];
        cJSON *o = cJSON_CreateObject();
        ok = o != NULL;
        if (!ok) break;
        cJSON_AddItemToArray(words, o);
        char buf[64];
        snprintf(buf, sizeof buf, "%.9f", w->dw.start_s);
        ok &= add_item(o, "start_s", cJSON_CreateRaw(buf));
        int acc = w->dec.status == ULK_WORD_ACCEPTED;
        ok &= cJSON_AddStringToObject(o, "status", acc ? "accepted" : "rejected") != NULL;
        if (acc) {
            ok &= cJSON_AddStringToObject(o, "mnemonic", w->dec.cmd->mnemonic) != NULL;
            cJSON *args = cJSON_AddObjectToObject(o, "args");
            ok &= args != NULL;
            for (int k = 0; ok && k < w->dec.n_args; k++)
                ok &= add_item(args, w->dec.args[k].arg->name, arg_json(&w->dec.args[k]));
        } else {
            ok &= cJSON_AddStringToObject(o, "reason", w->dec.reason) != NULL;
            ok &= cJSON_AddStringToObject(o, "reject", ulk_reject_name(w->dec.reject)) != NULL;
        }
        ok &= cJSON_AddStringToObject(o, "hex", w->tc ? w->data_hex : w->dec.hex) != NULL;
        if (w->tc) {
            /* ccsds-tc: hex is the packet data field (opcode, arguments); the packet's identity */
            ok &= cJSON_AddNumberToObject(o, "apid", w->dec.system) != NULL;
            ok &= cJSON_AddNumberToObject(o, "sequence_count", w->seq_count) != NULL;
            ok &= cJSON_AddNumberToObject(o, "frame_sequence", w->frame_seq) != NULL;
            ok &= cJSON_AddNumberToObject(o, "corrected_codeblocks", w->n_corrected) != NULL;
            if (w->secured) {
                /* "authenticated", "not authenticated" (no --keys) or the rejection */
                cJSON *sj = cJSON_AddObjectToObject(o, "security");
                ok &= sj != NULL;
                if (sj) {
                    ok &= cJSON_AddNumberToObject(sj, "spi", w->spi) != NULL;
                    ok &= cJSON_AddNumberToObject(sj, "iv_counter", (double)w->iv_counter) != NULL;
                    ok &= cJSON_AddStringToObject(sj, "verdict",
                                                  w->sec_verdict == ULK_SDLS_ACCEPTED    ? "authenticated"
                                                  : w->sec_verdict == ULK_SDLS_UNCHECKED ? "not authenticated"
                                                                                         : ulk_sdls_verdict_str((ulk_sdls_verdict)w->sec_verdict)) != NULL;
                }
            }
        }
        snprintf(buf, sizeof buf, "%.3f", w->dw.margin);
        ok &= add_item(o, "margin", cJSON_CreateRaw(buf));
        ok &= cJSON_AddNumberToObject(o, "polarity", w->dw.polarity) != NULL;
    }
    cJSON *e = ok ? cJSON_AddObjectToObject(root, "estimates") : NULL;
    if (e) {
        int s = c->est.signal_found;
        ok &= add_item(e, "ebn0_db", num_or_null(s, round(c->est.ebn0_db * 100) / 100));
        ok &= add_item(e, "subcarrier_hz", num_or_null(s, round(c->est.subcarrier_hz * 1000) / 1000));
        ok &= add_item(e, "rate_error_ppm", num_or_null(s, round(c->est.rate_error_ppm * 100) / 100));
        ok &= cJSON_AddBoolToObject(e, "signal_found", s) != NULL;
        ok &= cJSON_AddNumberToObject(e, "truncated_words", (double)c->est.n_truncated) != NULL;
    } else {
        ok = 0;
    }
    if (ok && c->complex_) {
        cJSON *k = cJSON_AddObjectToObject(root, "carrier");
        ok &= k != NULL;
        if (k) {
            ok &= cJSON_AddStringToObject(k, "mode", c->mode) != NULL;
            ok &= add_item(k, "offset_hz", num_or_null(1, round(c->crec.mean_freq_hz * 1000) / 1000));
            ok &= add_item(k, "coarse_offset_hz", num_or_null(1, round(c->crec.coarse_hz * 1000) / 1000));
            ok &= add_item(k, "line_db", num_or_null(1, round(c->crec.line_db * 100) / 100));
            ok &= add_item(k, "loop_bandwidth_hz", num_or_null(1, c->loop_bw_hz));
            ok &= add_item(k, "data_index_rad", num_or_null(c->m_data > 0, c->m_data));
        }
    }
    if (ok && c->has_ranging) {
        cJSON *k = cJSON_AddObjectToObject(root, "ranging");
        ok &= k != NULL;
        if (k) {
            ok &= add_item(k, "code_phase_chips", num_or_null(1, round(c->ranging.phase_chips * 1e4) / 1e4));
            ok &= add_item(k, "delay_s", num_or_null(1, c->ranging.delay_s));
            ok &= add_item(k, "peak_to_mean", num_or_null(1, round(c->ranging.peak_to_mean * 100) / 100));
        }
    }
    if (ok && c->voice_rate_hz) {
        cJSON *k = cJSON_AddObjectToObject(root, "voice");
        ok &= k != NULL;
        if (k) {
            ok &= cJSON_AddNumberToObject(k, "rate_hz", c->voice_rate_hz) != NULL;
            ok &= cJSON_AddNumberToObject(k, "samples", (double)c->voice_samples) != NULL;
        }
    }
    char *txt = ok ? cJSON_Print(root) : NULL;
    cJSON_Delete(root);
    if (!txt) { fprintf(stderr, "ulk decode: out of memory\n"); return -1; }
    printf("%s\n", txt);
    cJSON_free(txt);
    return 0;
}

static void print_human(const char *path, const cli_capture *c)
{
    printf("%s: %g Hz, %.3f s", path, c->fs_hz, c->duration_s);
    if (c->est.signal_found)
        printf("; E_b/N_0 %.1f dB, subcarrier %.3f Hz, clock error %+.1f ppm\n", c->est.ebn0_db, c->est.subcarrier_hz,
               c->est.rate_error_ppm);
    else
        printf("; no signal found\n");
    if (c->complex_) {
        printf("carrier: mode %s, offset %+.3f Hz (coarse %+.3f Hz, line %.1f dB over the mean bin), loop B_L %g Hz",
               c->mode, c->crec.mean_freq_hz, c->crec.coarse_hz, c->crec.line_db, c->loop_bw_hz);
        if (c->m_data > 0) printf("; data = quadrature / %g rad\n", c->m_data);
        else printf("; data is off in this mode\n");
    }
    if (c->has_ranging)
        printf("ranging: code phase %.4f chips, %.9f s from the capture start (peak/mean %.1f, %.2f code periods)\n",
               c->ranging.phase_chips, c->ranging.delay_s, c->ranging.peak_to_mean, c->ranging.n_periods);
    if (c->voice_rate_hz)
        printf("voice: %llu samples at %d Hz written\n", (unsigned long long)c->voice_samples, c->voice_rate_hz);
    size_t acc = 0;
    char line[4096];
    for (size_t i = 0; i < c->n; i++) {
        const cli_word *w = &c->w[i];
        if (w->dec.status == ULK_WORD_ACCEPTED) {
            acc++;
            ulk_decoded_format(&w->dec, line, sizeof line);
            if (w->tc && w->secured)
                printf("%12.6f s  %-48s # APID 0x%03X count %u N(S) %u, %d corrected, SPI %u IV %llu %s\n", w->dw.start_s,
                       line, w->dec.system, w->seq_count, w->frame_seq, w->n_corrected, w->spi, w->iv_counter,
                       w->sec_verdict == ULK_SDLS_ACCEPTED ? "authenticated" : "secured, NOT authenticated");
            else if (w->tc)
                printf("%12.6f s  %-48s # APID 0x%03X count %u N(S) %u, %d corrected\n", w->dw.start_s, line,
                       w->dec.system, w->seq_count, w->frame_seq, w->n_corrected);
            else
                printf("%12.6f s  %-48s # margin %.2f\n", w->dw.start_s, line, w->dw.margin);
        } else if (w->tc) {
            printf("%12.6f s  # rejected CLTU (%s): %s%s%s%s\n", w->dw.start_s, ulk_reject_name(w->dec.reject),
                   w->dec.reason, w->data_hex[0] ? " [data " : "", w->data_hex, w->data_hex[0] ? "]" : "");
        } else {
            printf("%12.6f s  # rejected (%s): %s [hex %s]\n", w->dw.start_s, ulk_reject_name(w->dec.reject),
                   w->dec.reason, w->dec.hex);
        }
    }
    int tc = c->n && c->w[0].tc;
    printf("%zu %s%s: %zu accepted, %zu rejected", c->n, tc ? "CLTU" : "word", c->n == 1 ? "" : "s", acc, c->n - acc);
    if (c->est.n_truncated) printf("; %llu word(s) cut off by the end of the capture", (unsigned long long)c->est.n_truncated);
    printf("\n");
    if (c->secured && !c->authenticated)
        printf("security: frames are secured but NOT authenticated (no --keys given)\n");
    else if (c->secured)
        printf("security: every frame verified with the key (MAC) and the anti-replay window\n");
}

int cmd_decode(int argc, char **argv)
{
    const char *dict_path = NULL, *capture = NULL, *plot_path = NULL;
    int json = 0;
    cli_capture_opts o;
    memset(&o, 0, sizeof o);
    o.format = -1;
    o.channel = -1;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        int r = cli_capture_opt("decode", argc, argv, &i, &o);
        if (r < 0) return 2;
        if (r > 0) continue;
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        else if (!strcmp(a, "--json")) json = 1;
        else if (!strcmp(a, "--ranging")) o.ranging = 1;
        else if (!strcmp(a, "--dict") || !strcmp(a, "--plot") || !strcmp(a, "--voice")) {
            if (i + 1 >= argc) { fprintf(stderr, "ulk decode: %s needs a value\n", a); return 2; }
            if (!strcmp(a, "--dict")) dict_path = argv[++i];
            else if (!strcmp(a, "--voice")) o.voice_path = argv[++i];
            else plot_path = argv[++i];
        } else if (a[0] == '-' && a[1]) {
            fprintf(stderr, "ulk decode: unknown option '%s' (ulk decode --help)\n", a);
            return 2;
        } else if (!capture) capture = a;
        else { fprintf(stderr, "ulk decode: one capture at a time ('%s' is extra)\n", a); return 2; }
    }
    if (!dict_path || !capture) {
        fprintf(stderr, "ulk decode: %s\n", !dict_path ? "--dict DICT is required" : "no capture given");
        usage(stderr);
        return 2;
    }
    if (o.format >= 0 && !(o.rate_hz > 0)) {
        fprintf(stderr, "ulk decode: --format goes with --rate (a raw capture needs both)\n");
        return 2;
    }
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    plot_ctx pc = {NULL};
    int ret = 2;
    if (!diag) { fprintf(stderr, "ulk decode: out of memory\n"); return 2; }
    if (ulk_dict_load(dict_path, &dict, diag) < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk decode: cannot use dictionary %s\n", dict_path);
        goto out;
    }
    ulk_diag_clear(diag);
    if (plot_path) {
        pc.plot = ulk_plot_create();
        if (!pc.plot) { fprintf(stderr, "ulk decode: out of memory\n"); goto out; }
        o.on_soft = soft_cb;
        o.on_word = word_cb;
        o.user = &pc;
    }
    cli_capture c;
    if (cli_capture_decode(dict, capture, &o, &c, diag) < 0) {
        ulk_diag_print(diag, stderr);
        goto out;
    }
    if (json) {
        if (print_json(&c) < 0) { cli_capture_free(&c); goto out; }
    } else {
        print_human(capture, &c);
    }
    ret = c.n > 0 ? 0 : 1;
    if (c.secured) {
        /* a secured link: success is an accepted command, not just a CLTU found */
        size_t acc = 0;
        for (size_t i = 0; i < c.n; i++) acc += c.w[i].dec.status == ULK_WORD_ACCEPTED;
        if (!acc) ret = 1;
    }
    if (plot_path) {
        char title[512];
        snprintf(title, sizeof title, "%s (%s)", capture, dict->name ? dict->name : dict_path);
        if (ulk_plot_write_png(pc.plot, plot_path, title, diag) < 0) {
            ulk_diag_print(diag, stderr);
            ret = 2;
        }
    }
    cli_capture_free(&c);
out:
    ulk_plot_destroy(pc.plot);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}
