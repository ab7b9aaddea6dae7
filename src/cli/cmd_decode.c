/* src/cli/cmd_decode.c - `ulk decode --dict DICT CAPTURE [--json] [--plot FILE.png|FILE.svg]
 * [--rate HZ [--format f32|s16|cf32|ci16]] [--channel N] [--iq] [--mode NAME] [--max-offset HZ]
 * [--voice OUT.wav] [--ranging]`: recover words and commands from a capture, blind (unknown
 * start, clock error, level, DC, polarity, noise); a complex capture of the composite carrier
 * through carrier recovery first, with its voice and ranging channels on request. The receiver
 * (include/ulk/rx.h) does the work; this file parses the options and prints its events.
 * Exit (docs/cli.md) 0 a command accepted; 1 no command found (reason on stderr) or a broken
 * dictionary; 2 usage or I/O error. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture_opts.h"
#include "cli.h"
#include "ulk/decode.h"
#include "ulk/dict.h"
#include "ulk/limits.h"
#include "ulk/plot.h"
#include "ulk/rx.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk decode --dict DICT CAPTURE [--json] [--plot FILE.png|FILE.svg]\n"
            "                  [--rate HZ [--format f32|s16|cf32|ci16]] [--channel N]\n"
            "                  [--iq] [--mode NAME] [--max-offset HZ] [--voice OUT.wav] [--ranging]\n"
            "                  [--keys FILE [--state STATE]]\n"
            "\n"
            "Finds the command words in a capture without being told where they start, and\n"
            "interprets them with the dictionary. The capture may start anywhere, its clock and\n"
            "subcarrier may be off by up to +-" ULK_STR(ULK_DEMOD_DEFAULT_MAX_PPM) " ppm (the range searched; an estimate at its\n"
            "edge is reported), its level anywhere from -40 dBFS to full scale, with a DC\n"
            "offset, inverted, and noisy. Each word is accepted (check passed,\n"
            "our vehicle, a known command with valid arguments) or rejected with its reason.\n"
            "\n"
            "  CAPTURE                 WAV, or raw .f32/.s16 little-endian mono with its\n"
            "                          .sigmf-meta beside it or --rate (the extension gives\n"
            "                          the sample type)\n"
            "options:\n"
            "  --dict DICT             the dictionary the uplink was made with\n"
            "  --json                  machine-readable output (words and estimates)\n"
            "  --plot FILE             picture of the soft sub-bit values and each word's margin,\n"
            "                          PNG or SVG by the extension (.png, .svg)\n"
            "  --rate HZ               sample rate of a raw capture\n"
            "  --format TYPE           sample type of a raw capture whose name does not say it:\n"
            "                          f32, s16, cf32, ci16\n"
            "  --channel N             channel of a multi-channel WAV (0 = first)\n"
            "  --keys FILE             key file (NAME HEX, mode 0600): authenticate every frame of a\n"
            "                          dictionary with link.tc.security (without it: secured, not\n"
            "                          authenticated)\n"
            "  --state STATE           receive-side anti-replay window, saved back after the whole\n"
            "                          capture was decoded (created when absent); a frame not above\n"
            "                          the last accepted counter is 'replayed'\n"
            "complex captures of the composite carrier (.cf32/.ci16 with SigMF, or a two-channel\n"
            "WAV with --iq; the dictionary's carrier section, docs/carrier.md):\n"
            "  --iq                    a two-channel WAV is I (left) and Q (right)\n"
            "  --mode NAME             the carrier mode (default: the one in the SigMF metadata)\n"
            "  --max-offset HZ         carrier offset search range +-HZ (default "
            ULK_STR(ULK_CARRIER_DEFAULT_MAX_OFFSET_HZ) ")\n"
            "  --voice OUT.wav         demodulate the voice FM subcarrier to OUT.wav (float)\n"
            "  --ranging               report the ranging code phase (chips, seconds from the\n"
            "                          capture start) and the correlation's peak-to-mean ratio\n"
            "  -h, --help              this text\n"
            "\n"
            "Human output lists accepted commands in command-list syntax with their start times,\n"
            "each argument as the exact value its raw field encodes (a calibrated or float32 value\n"
            "may read 1.11 where the list said 1), and rejected words with their reason.\n"
            "With a ccsds-tc dictionary each unit is a CLTU:\n"
            "start sequence found in either polarity, codeblocks decoded, frame, FECF and packet\n"
            "checked, then the command; \"hex\" is the packet data field.\n"
            "Estimates: E_b/N_0 as the sub-bit profile\n"
            "defines it (P_d f_s / (2 sigma^2 R_b)), the subcarrier frequency and clock error\n"
            "measured against the capture's sample clock. An estimate that reached the edge of\n"
            "its search range (clock error, carrier offset) is said so, on stdout and stderr.\n"
            "\nexit: 0 at least one command accepted; 1 no command found (the reason in one line on\n"
            "      stderr: no signal, or words found but none for this dictionary's addresses, or all\n"
            "      rejected, e.g. by the security check), or the dictionary breaks a rule; 2 usage or\n"
            "      I/O error (a key or state file that cannot be used included)\n");
}

/* One decode's output state: JSON is written as the units arrive (the array incrementally,
 * byte for byte what one cJSON_Print of the whole document gives); human lines go to an
 * anonymous temporary file so the summary can lead without holding the words in memory. */
typedef struct {
    const char *capture;
    int json;
    ulk_plot *plot;
    FILE *spool;            /* human: the unit lines, copied out after the summary */
    size_t n_out;           /* units written */
    int first_is_tc;        /* the first unit was a CLTU (the totals line says "CLTU") */
    ulk_rx_estimates est;
    ulk_rx_counts counts;
    int failed;             /* out of memory building output */
} dec_ctx;

static void soft_cb(double t, float v, void *user)
{
    dec_ctx *x = user;
    ulk_plot_soft(x->plot, t, v);
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

/* A secured CLTU's security member: SPI, IV counter, verdict. */
static cJSON *security_json(const ulk_rx_event *ev)
{
    cJSON *sj = cJSON_CreateObject();
    int ok = sj != NULL;
    ok = ok && cJSON_AddNumberToObject(sj, "spi", ev->spi) != NULL;
    ok = ok && cJSON_AddNumberToObject(sj, "iv_counter", (double)ev->iv_counter) != NULL;
    ok = ok && cJSON_AddStringToObject(sj, "verdict", ulk_security_verdict_report(ev->sec_verdict)) != NULL;
    if (!ok) cJSON_Delete(sj);
    return ok ? sj : NULL;
}

/* One unit as a JSON object (docs/spec/cli.md; ccsds-tc adds the packet's identity). */
static cJSON *unit_json(const ulk_rx_event *ev)
{
    const ulk_decoded *d = ev->dec;
    cJSON *o = cJSON_CreateObject();
    if (!o) return NULL;
    char buf[64];
    snprintf(buf, sizeof buf, "%.6f", ev->dw.start_s); /* to the microsecond, as the human lines */
    int ok = add_item(o, "start_s", cJSON_CreateRaw(buf));
    int acc = d->status == ULK_WORD_ACCEPTED;
    ok &= cJSON_AddStringToObject(o, "status", acc ? "accepted" : "rejected") != NULL;
    if (acc) {
        ok &= cJSON_AddStringToObject(o, "mnemonic", d->cmd->mnemonic) != NULL;
        cJSON *args = cJSON_AddObjectToObject(o, "args");
        ok &= args != NULL;
        for (int k = 0; ok && k < d->n_args; k++) ok &= add_item(args, d->args[k].arg->name, arg_json(&d->args[k]));
    } else {
        ok &= cJSON_AddStringToObject(o, "reason", d->reason) != NULL;
        ok &= cJSON_AddStringToObject(o, "reject", ulk_reject_name(d->reject)) != NULL;
    }
    ok &= cJSON_AddStringToObject(o, "hex", ev->hex) != NULL;
    if (ev->kind == ULK_RX_CLTU) {
        /* ccsds-tc: hex is the packet data field (opcode, arguments); the packet's identity */
        ok &= cJSON_AddNumberToObject(o, "apid", d->system) != NULL;
        ok &= cJSON_AddNumberToObject(o, "sequence_count", ev->seq_count) != NULL;
        ok &= cJSON_AddNumberToObject(o, "frame_sequence", ev->frame_seq) != NULL;
        ok &= cJSON_AddNumberToObject(o, "corrected_codeblocks", ev->n_corrected) != NULL;
        if (ev->secured) ok &= add_item(o, "security", security_json(ev));
    }
    snprintf(buf, sizeof buf, "%.3f", ev->dw.margin);
    ok &= add_item(o, "margin", cJSON_CreateRaw(buf));
    ok &= cJSON_AddNumberToObject(o, "polarity", ev->dw.polarity) != NULL;
    if (!ok) {
        cJSON_Delete(o);
        return NULL;
    }
    return o;
}

/* Prints o (formatted) as a member at the given depth: cJSON_Print's layout, its newlines
 * followed by depth tabs. A string never holds a raw newline, so every newline is layout. */
static int print_nested(const cJSON *o, int depth)
{
    char *txt = o ? cJSON_Print(o) : NULL;
    if (!txt) return -1;
    for (const char *p = txt; *p; p++) {
        putchar(*p);
        if (*p == '\n')
            for (int k = 0; k < depth; k++) putchar('\t');
    }
    cJSON_free(txt);
    return 0;
}

static void json_unit(dec_ctx *x, const ulk_rx_event *ev)
{
    cJSON *o = unit_json(ev);
    fputs(x->n_out ? ", " : "{\n\t\"words\":\t[", stdout);
    if (print_nested(o, 2) < 0) x->failed = 1;
    cJSON_Delete(o);
}

/* The estimates member. */
static cJSON *estimates_json(const ulk_demod_estimates *d)
{
    cJSON *e = cJSON_CreateObject();
    int s = d->signal_found, ok = e != NULL;
    ok = ok && add_item(e, "ebn0_db", num_or_null(s, round(d->ebn0_db * 100) / 100));
    ok = ok && add_item(e, "subcarrier_hz", num_or_null(s, round(d->subcarrier_hz * 1000) / 1000));
    ok = ok && add_item(e, "rate_error_ppm", num_or_null(s, round(d->rate_error_ppm * 100) / 100));
    ok = ok && cJSON_AddBoolToObject(e, "signal_found", s) != NULL;
    ok = ok && cJSON_AddNumberToObject(e, "truncated_words", (double)d->n_truncated) != NULL;
    ok = ok && cJSON_AddBoolToObject(e, "at_search_limit", s && d->at_search_limit) != NULL;
    ok = ok && cJSON_AddNumberToObject(e, "search_limit_ppm", d->search_limit_ppm) != NULL;
    if (!ok) cJSON_Delete(e);
    return ok ? e : NULL;
}

/* The complex capture's members: carrier, ranging, voice (NULL where they do not apply). */
static cJSON *carrier_json(const ulk_rx_estimates *c)
{
    cJSON *k = cJSON_CreateObject();
    int ok = k != NULL;
    ok = ok && cJSON_AddStringToObject(k, "mode", c->mode) != NULL;
    ok = ok && add_item(k, "offset_hz", num_or_null(1, round(c->crec.mean_freq_hz * 1000) / 1000));
    ok = ok && add_item(k, "coarse_offset_hz", num_or_null(1, round(c->crec.coarse_hz * 1000) / 1000));
    ok = ok && add_item(k, "line_db", num_or_null(1, round(c->crec.line_db * 100) / 100));
    ok = ok && cJSON_AddBoolToObject(k, "acquired", c->crec.n_acquired > 0) != NULL;
    ok = ok && cJSON_AddBoolToObject(k, "at_search_limit", c->crec.n_acquired > 0 && c->crec.at_limit) != NULL;
    ok = ok && cJSON_AddNumberToObject(k, "search_limit_hz", c->max_offset_hz) != NULL;
    ok = ok && add_item(k, "loop_bandwidth_hz", num_or_null(1, c->loop_bw_hz));
    ok = ok && add_item(k, "data_index_rad", num_or_null(c->m_data > 0, c->m_data));
    if (!ok) cJSON_Delete(k);
    return ok ? k : NULL;
}

static cJSON *ranging_json(const ulk_ranging_result *r)
{
    cJSON *k = cJSON_CreateObject();
    int ok = k != NULL;
    ok = ok && add_item(k, "code_phase_chips", num_or_null(1, round(r->phase_chips * 1e4) / 1e4));
    ok = ok && add_item(k, "delay_s", num_or_null(1, r->delay_s));
    ok = ok && add_item(k, "peak_to_mean", num_or_null(1, round(r->peak_to_mean * 100) / 100));
    if (!ok) cJSON_Delete(k);
    return ok ? k : NULL;
}

static cJSON *voice_json(const ulk_rx_estimates *c)
{
    cJSON *k = cJSON_CreateObject();
    int ok = k != NULL;
    ok = ok && cJSON_AddNumberToObject(k, "rate_hz", c->voice_rate_hz) != NULL;
    ok = ok && cJSON_AddNumberToObject(k, "samples", (double)c->voice_samples) != NULL;
    if (!ok) cJSON_Delete(k);
    return ok ? k : NULL;
}

static void json_member(dec_ctx *x, const char *key, cJSON *v)
{
    printf(",\n\t\"%s\":\t", key);
    if (print_nested(v, 1) < 0) x->failed = 1;
    cJSON_Delete(v);
}

/* After the last unit: the array closed, then estimates and the complex capture's members. */
static void json_tail(dec_ctx *x)
{
    fputs(x->n_out ? "]" : "{\n\t\"words\":\t[]", stdout);
    const ulk_rx_estimates *c = &x->est;
    json_member(x, "estimates", estimates_json(&c->demod));
    if (c->complex_) json_member(x, "carrier", carrier_json(c));
    if (c->has_ranging) json_member(x, "ranging", ranging_json(&c->ranging));
    if (c->voice_rate_hz) json_member(x, "voice", voice_json(c));
    fputs("\n}\n", stdout);
}

static void human_unit(dec_ctx *x, const ulk_rx_event *ev)
{
    const ulk_decoded *d = ev->dec;
    char line[4096];
    FILE *f = x->spool ? x->spool : stdout;
    if (d->status == ULK_WORD_ACCEPTED) {
        ulk_decoded_format(d, line, sizeof line);
        if (ev->kind == ULK_RX_CLTU && ev->secured)
            fprintf(f, "%12.6f s  %-48s # APID 0x%03X count %u N(S) %u, %d corrected, SPI %u IV %llu %s\n",
                    ev->dw.start_s, line, d->system, ev->seq_count, ev->frame_seq, ev->n_corrected, (unsigned)ev->spi,
                    (unsigned long long)ev->iv_counter,
                    ev->sec_verdict == ULK_SEC_ACCEPTED ? "authenticated" : "secured, NOT authenticated");
        else if (ev->kind == ULK_RX_CLTU)
            fprintf(f, "%12.6f s  %-48s # APID 0x%03X count %u N(S) %u, %d corrected\n", ev->dw.start_s, line,
                    d->system, ev->seq_count, ev->frame_seq, ev->n_corrected);
        else
            fprintf(f, "%12.6f s  %-48s # margin %.2f\n", ev->dw.start_s, line, ev->dw.margin);
    } else if (ev->kind == ULK_RX_CLTU) {
        fprintf(f, "%12.6f s  # rejected CLTU (%s): %s%s%s%s\n", ev->dw.start_s, ulk_reject_name(d->reject), d->reason,
                ev->hex[0] ? " [data " : "", ev->hex, ev->hex[0] ? "]" : "");
    } else {
        /* the bits as read, unless there are none (a word of the wrong length) or the reason
         * already shows them (ambiguous alignment) */
        int hx = d->hex[0] && !strstr(d->reason, d->hex);
        fprintf(f, "%12.6f s  # rejected (%s): %s%s%s%s\n", ev->dw.start_s, ulk_reject_name(d->reject), d->reason,
                hx ? " [hex " : "", hx ? d->hex : "", hx ? "]" : "");
    }
}

/* After the last unit: the summary, the spooled unit lines, the totals. */
static void human_tail(dec_ctx *x)
{
    const ulk_rx_estimates *c = &x->est;
    printf("%s: %g Hz, %.3f s", x->capture, c->fs_hz, c->duration_s);
    if (c->demod.signal_found && c->demod.at_search_limit)
        printf("; E_b/N_0 %.1f dB, subcarrier %.3f Hz, clock error %+.1f ppm: at the search limit of +-%g ppm, "
               "the clock may be further off and nothing beyond it is searched\n", c->demod.ebn0_db, c->demod.subcarrier_hz, c->demod.rate_error_ppm,
               c->demod.search_limit_ppm);
    else if (c->demod.signal_found)
        printf("; E_b/N_0 %.1f dB, subcarrier %.3f Hz, clock error %+.1f ppm\n", c->demod.ebn0_db,
               c->demod.subcarrier_hz, c->demod.rate_error_ppm);
    else
        printf("; no signal found\n");
    if (c->complex_) {
        if (!c->crec.n_acquired)
            printf("carrier: mode %s, no line found within +-%g Hz", c->mode, c->max_offset_hz);
        else
            printf("carrier: mode %s, offset %+.3f Hz (coarse %+.3f Hz%s, line %.1f dB over the mean bin), loop B_L %g Hz",
                   c->mode, c->crec.mean_freq_hz, c->crec.coarse_hz, c->crec.at_limit ? ", at the search limit" : "",
                   c->crec.line_db, c->loop_bw_hz);
        if (c->m_data > 0) printf("; data = quadrature / %g rad\n", c->m_data);
        else printf("; data is off in this mode\n");
    }
    if (c->has_ranging)
        printf("ranging: code phase %.4f chips, %.9f s from the capture start (peak/mean %.1f, %.2f code periods)\n",
               c->ranging.phase_chips, c->ranging.delay_s, c->ranging.peak_to_mean, c->ranging.n_periods);
    if (c->voice_rate_hz)
        printf("voice: %llu sample%s at %d Hz written\n", (unsigned long long)c->voice_samples,
               c->voice_samples == 1 ? "" : "s", c->voice_rate_hz);
    if (x->spool) {
        char buf[8192];
        size_t n;
        rewind(x->spool);
        while ((n = fread(buf, 1, sizeof buf, x->spool)) > 0) fwrite(buf, 1, n, stdout);
        if (ferror(x->spool)) x->failed = 1;
    }
    unsigned long long n = x->counts.n_units, acc = x->counts.n_accepted;
    printf("%llu %s%s: %llu accepted, %llu rejected", n, x->first_is_tc ? "CLTU" : "word", n == 1 ? "" : "s", acc, n - acc);
    if (c->demod.n_truncated)
        printf("; %llu word%s cut off by the end of the capture", (unsigned long long)c->demod.n_truncated,
               c->demod.n_truncated == 1 ? "" : "s");
    printf("\n");
    if (c->secured && !c->authenticated)
        printf("security: frames are secured but NOT authenticated (no --keys given)\n");
    else if (c->secured)
        printf("security: every frame verified with the key (MAC) and the anti-replay window%s\n",
               c->state_saved ? "; receive state saved" : "");
}

static int on_event(const ulk_rx_event *ev, void *user)
{
    dec_ctx *x = user;
    switch (ev->kind) {
    case ULK_RX_WARNING:
        fprintf(stderr, "warning: %s\n", ev->text);
        break;
    case ULK_RX_NOTICE:
        fprintf(stderr, "notice: %s\n", ev->text);
        break;
    case ULK_RX_WORD:
    case ULK_RX_CLTU:
        if (!x->n_out) x->first_is_tc = ev->kind == ULK_RX_CLTU;
        if (x->json) json_unit(x, ev);
        else human_unit(x, ev);
        if (x->plot) ulk_plot_word(x->plot, ev->dw.start_s, ev->dw.margin, ev->dec->status == ULK_WORD_ACCEPTED);
        x->n_out++;
        break;
    case ULK_RX_ESTIMATES:
        x->est = *ev->est;
        break;
    case ULK_RX_END:
        x->counts = ev->counts;
        if (x->json) json_tail(x);
        else human_tail(x);
        break;
    }
    return x->failed ? ULK_ENOMEM : 0;
}

enum { O_DICT = CLI_LONG, O_JSON, O_RANGING, O_PLOT, O_VOICE };
static const struct option opts[] = {
    {"dict", required_argument, 0, O_DICT}, {"json", no_argument, 0, O_JSON},
    {"ranging", no_argument, 0, O_RANGING}, {"plot", required_argument, 0, O_PLOT},
    {"voice", required_argument, 0, O_VOICE}, CLI_CAPTURE_OPTIONS,
    {"help", no_argument, 0, 'h'},          {0, 0, 0, 0}};
static const cli_command command = {"decode", opts, usage};

typedef struct {
    const char *dict_path, *capture, *plot_path;
    int json;
    cli_capture_opts o;
} dec_args;

static int on_opt(int v, const char *arg, void *ctx)
{
    dec_args *a = ctx;
    switch (v) {
    case O_DICT: a->dict_path = arg; break;
    case O_JSON: a->json = 1; break;
    case O_RANGING: a->o.r.ranging = 1; break;
    case O_PLOT: a->plot_path = arg; break;
    case O_VOICE: a->o.r.voice_path = arg; break;
    default: return cli_capture_option("decode", v, arg, &a->o);
    }
    return 0;
}

/* Parses the options and checks the files before any work: returns -1 to go on, else the exit
 * code (0 after --help). A capture '-' becomes a temporary copy of standard input. */
static int parse_args(int argc, char **argv, dec_args *a)
{
    memset(a, 0, sizeof *a);
    cli_capture_init(&a->o);
    int first, pr = cli_parse(&command, argc, argv, on_opt, a, &first);
    if (pr >= 0) return pr;
    pr = cli_capture_positional("decode", argc, argv, first, !a->dict_path ? "--dict DICT is required" : NULL, usage,
                                &a->capture);
    if (pr >= 0) return pr;
    if ((pr = cli_capture_check("decode", &a->o, a->capture, a->dict_path, NULL))) return pr;
    if (!(a->capture = cli_input("decode", a->capture))) return CLI_EXIT_USAGE_IO; /* "-": a copy of stdin */
    const char *ins[] = {a->capture, a->dict_path}, *what[] = {"capture", "dictionary"};
    if (a->plot_path && ((pr = cli_refuse_overwrite("decode", a->plot_path, ins, what, 2)) ||
                         (pr = cli_check_picture("decode", a->plot_path))))
        return pr;
    if (a->o.r.voice_path && (pr = cli_refuse_overwrite("decode", a->o.r.voice_path, ins, what, 2))) return pr;
    if (a->plot_path && a->o.r.voice_path && cli_same_file(a->plot_path, a->o.r.voice_path)) {
        fprintf(stderr, "ulk decode: --plot and --voice name the same file '%s'\n", a->plot_path);
        return CLI_EXIT_USAGE_IO;
    }
    return -1;
}

/* Exit 0 when a command was accepted; else 1 with the reason in one line on stderr. */
static int no_command(const dec_ctx *x)
{
    const ulk_rx_counts *c = &x->counts;
    if (c->n_accepted > 0) return 0;
    unsigned long long n = c->n_units, na = c->n_rejected_address, nd = c->n_rejected_damaged;
    unsigned long long ns = c->n_rejected_security;
    const char *unit = x->first_is_tc ? "CLTU" : "word";
    if (n == 0)
        fprintf(stderr, "ulk decode: no command found: %s\n",
                x->est.demod.signal_found ? "a signal, but no complete word or CLTU in it" : "no signal in the capture");
    else if (na > 0 && na + nd == n)
        fprintf(stderr,
                "ulk decode: no command found: %llu %s%s found, and none of the %llu intact ones matched the "
                "dictionary's vehicle and system addresses (another vehicle's uplink, or the wrong dictionary?)\n",
                n, unit, n == 1 ? "" : "s", na);
    else if (ns > 0)
        fprintf(stderr, "ulk decode: no command found: %llu %s%s found, all rejected (%llu by the security check: "
                        "authentication, replay or window; %llu damaged, %llu for another address, %llu for an unknown "
                        "command or argument)\n", n, unit, n == 1 ? "" : "s", ns, nd, na, n - nd - na - ns);
    else
        fprintf(stderr, "ulk decode: no command found: %llu %s%s found, all rejected (%llu damaged, %llu for another "
                        "address, %llu for an unknown command or argument)\n", n, unit, n == 1 ? "" : "s", nd, na, n - nd - na);
    return 1;
}

/* Runs the receiver over the capture, writing as it goes. Returns the exit code. */
static int run(const dec_args *a, const ulk_dict *dict, dec_ctx *x, ulk_diag *diag)
{
    ulk_rx_options ro = a->o.r;
    if (a->plot_path) {
        ro.on_soft = soft_cb;
        ro.user = x;
    }
    if (!a->json) x->spool = tmpfile(); /* without one, the unit lines come before the summary */
    int rc = ulk_rx_run_file(dict, a->capture, &a->o.f, &ro, on_event, x, diag);
    if (x->spool) fclose(x->spool);
    if (rc < 0) {
        if (x->failed) fprintf(stderr, "ulk decode: out of memory\n");
        else ulk_diag_print(diag, stderr);
        return CLI_EXIT_USAGE_IO; /* a capture that cannot be read, or out of memory */
    }
    int ret = no_command(x);
    if (a->plot_path) {
        char title[512];
        snprintf(title, sizeof title, "%s (%s)", a->capture, dict->name ? dict->name : a->dict_path);
        if (ulk_plot_write(x->plot, a->plot_path, title, diag) < 0) {
            ulk_diag_print(diag, stderr);
            ret = CLI_EXIT_USAGE_IO;
        }
    }
    return ret;
}

int cmd_decode(int argc, char **argv)
{
    dec_args a;
    int ret = parse_args(argc, argv, &a);
    if (ret >= 0) return ret;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    dec_ctx x;
    memset(&x, 0, sizeof x);
    x.capture = a.capture;
    x.json = a.json;
    ret = CLI_EXIT_USAGE_IO;
    if (!diag) { fprintf(stderr, "ulk decode: out of memory\n"); return ret; }
    if ((ret = cli_load_dict("decode", a.dict_path, &dict))) goto out; /* the same exit as every command */
    ret = CLI_EXIT_USAGE_IO;
    if (a.plot_path && !(x.plot = ulk_plot_create())) {
        fprintf(stderr, "ulk decode: out of memory\n");
        goto out;
    }
    ret = run(&a, dict, &x, diag);
out:
    ulk_plot_destroy(x.plot);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}
