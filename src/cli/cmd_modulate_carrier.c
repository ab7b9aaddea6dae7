/* src/cli/cmd_modulate_carrier.c - `ulk modulate UPLOAD --carrier --mode NAME --dict DICT
 * -o OUT.cf32|.ci16|.wav --rate HZ [--offset HZ] [--format f32|s16]`: the complex baseband of
 * one mode of the dictionary's composite carrier (docs/spec/carrier.md sections 1 and 3), the
 * upload's samples as its data channel.
 *
 * Why a separate file: the real-output path (cmd_modulate.c) stays as it is; it hands every
 * run with --carrier here. The samples stream in chunks (the modulator's s_i / (A + A_p) feed
 * the generator), so memory stays flat whatever the upload's length, and the output is
 * written atomically by the sample writer: nothing is left behind on failure.
 * Exit 0 written; 1 refused (dictionary mismatch, no such mode, rate too low); 2 usage or I/O.
 */
#include <cjson/cJSON.h>
#include <limits.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <unistd.h>

#include "cli.h"
#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/mod.h"
#include "ulk/sampleio.h"
#include "ulk/upload.h"
#include "util.h"

#define CHUNK 32768 /* complex samples per write: 256 KiB of I/Q floats */

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk modulate UPLOAD --carrier --mode NAME --dict DICT -o OUT --rate HZ\n"
            "                    [--offset HZ] [--format f32|s16] [--voice-audio FILE.wav\n"
            "                    [--voice-channel N]] [-q]\n"
            "\n"
            "Writes the complex baseband x(t) = exp(j(sum_k m_k c_k(t) + 2 pi f_o t)) of one mode of\n"
            "the dictionary's composite carrier: the upload's samples are the data channel, the voice\n"
            "(test tone or audio file) and the ranging code the other channels (docs/carrier.md). The upload must\n"
            "have been compiled with this dictionary (its SHA-256 is checked).\n"
            "\n"
            "  OUT ending .cf32 / .ci16  raw interleaved I/Q, little-endian float or round(32767 x)\n"
            "                            16-bit, with OUT's base + .sigmf-meta (cf32_le / ci16_le)\n"
            "  OUT ending .wav           two-channel WAV: left I, right Q (f32 default, or s16)\n"
            "  a device or pipe          raw interleaved I/Q written directly (--format f32|s16)\n"
            "\n"
            "options:\n"
            "  --carrier          complex composite-carrier output (this mode of the command)\n"
            "  --mode NAME        a mode of the dictionary's carrier section\n"
            "  --dict DICT        the dictionary the upload was compiled with (required: the carrier\n"
            "                     section comes from it)\n"
            "  -o, --output OUT   file to write (atomically: nothing is left on failure)\n"
            "  --rate HZ          sample rate, exact decimal; at least 2.5 x the highest line of the\n"
            "                     mode (subcarrier + sub-bit rate, voice + deviation + tone, chip\n"
            "                     rate) plus |offset|\n"
            "  --offset HZ        carrier offset f_o (default: the section's offset_hz, else 0)\n"
            "  --format f32|s16   sample type for .wav (the raw extensions say it)\n"
            "  --voice-audio FILE the voice channel's audio from FILE (WAV or another sound file)\n"
            "                     instead of the section's tone or audio: normalised to peak 1,\n"
            "                     silence after its end; Carson's rule takes the section's\n"
            "                     audio_bandwidth_hz, else 3400 Hz\n"
            "  --voice-channel N  channel N (0-based) of a multi-channel FILE (else refused)\n"
            "  -q, --quiet        no summary\n"
            "  -h, --help         this text\n"
            "\nexit: 0 written, 1 refused (dictionary, mode, rate), 2 usage or I/O error\n\n%s",
            ULK_CAUTION);
}

static int exit_for(int rc) { return cli_exit_for(rc); }

/* Data channel source: the modulator's samples divided by the link's peak A + A_p. */
typedef struct {
    ulk_mod *mod;
    float scale; /* 1 / (A + A_p) */
} data_src;

static long data_from_mod(void *user, float *out, size_t n)
{
    data_src *d = user;
    long got = ulk_mod_run(d->mod, out, n);
    for (long k = 0; k < got; k++) out[k] *= d->scale;
    return got;
}

/* The highest first-harmonic line edge of the channels on in mode (Hz). */
static double highest_line_hz(const ulk_carrier *c, const ulk_carrier_mode *mo)
{
    double f = 0;
    if (mo->on[ULK_CH_DATA]) {
        double fd = ulk_ratio_to_double(c->data_fsc_hz) + ulk_ratio_to_double(c->data_symbol_rate);
        if (c->has_pilot && ulk_ratio_to_double(c->pilot_hz) > fd) fd = ulk_ratio_to_double(c->pilot_hz);
        if (fd > f) f = fd;
    }
    if (mo->on[ULK_CH_VOICE]) {
        double fv = ulk_ratio_to_double(c->voice_fv_hz) + ulk_ratio_to_double(c->voice_dev_hz) +
                    ulk_ratio_to_double(c->voice_tone_hz);
        if (fv > f) f = fv;
    }
    if (mo->on[ULK_CH_RANGING] && ulk_ratio_to_double(c->chip_rate) > f) f = ulk_ratio_to_double(c->chip_rate);
    return f;
}

static int has_suffix(const char *s, const char *suf)
{
    size_t a = strlen(s), b = strlen(suf);
    return a >= b && !strcasecmp(s + a - b, suf);
}

/* SigMF "ulk:" members (without braces) naming the upload, the dictionary and the mode.
 * Returns a cJSON-allocated string (free with cJSON_free) or NULL when out of memory. */
static char *identity_json(const ulk_upload *u, const char *up_path, const ulk_dict *d, const ulk_carrier_mode *mo,
                           ulk_ratio offset, const char *voice_audio)
{
    cJSON *o = cJSON_CreateObject();
    cJSON *id = cJSON_AddObjectToObject(o, "ulk:upload");
    cJSON *cm = cJSON_AddObjectToObject(o, "ulk:carrier");
    if (!o || !id || !cm) { cJSON_Delete(o); return NULL; }
    int ok = 1;
    char buf[64];
    ok &= cJSON_AddStringToObject(id, "file", up_path) != NULL;
    ok &= cJSON_AddStringToObject(id, "source", u->source ? u->source : "") != NULL;
    ok &= cJSON_AddStringToObject(id, "dictionary", u->dict_name ? u->dict_name : "") != NULL;
    ok &= cJSON_AddStringToObject(id, "dictionary_sha256", u->dict_sha256) != NULL;
    ok &= cJSON_AddNumberToObject(id, "words", (double)u->n_cmds) != NULL;
    ok &= cJSON_AddStringToObject(cm, "dictionary_file", d->file ? d->file : "") != NULL;
    ok &= cJSON_AddStringToObject(cm, "mode", mo->name) != NULL;
    cJSON *ix = cJSON_AddObjectToObject(cm, "indices_rad");
    ok &= ix != NULL;
    for (int ch = 0; ok && ch < ULK_CH_N; ch++)
        if (mo->on[ch]) ok &= cJSON_AddNumberToObject(ix, ulk_channel_name((ulk_channel)ch), mo->m_rad[ch]) != NULL;
    ulk_ratio_format(offset, buf, sizeof buf);
    ok &= cJSON_AddStringToObject(cm, "offset_hz_exact", buf) != NULL;
    if (voice_audio && mo->on[ULK_CH_VOICE]) ok &= cJSON_AddStringToObject(cm, "voice_audio", voice_audio) != NULL;
    char *s = ok ? cJSON_PrintUnformatted(o) : NULL;
    cJSON_Delete(o);
    if (!s) return NULL;
    size_t n = strlen(s);
    if (n >= 2) {
        memmove(s, s + 1, n - 2);
        s[n - 2] = 0;
    }
    return s;
}

enum { O_OUTPUT = 'o', O_QUIET = 'q', O_CARRIER = CLI_LONG, O_RATE, O_MODE, O_DICT, O_OFFSET, O_FORMAT, O_VAUDIO,
       O_VCHAN, O_TIMING };
static const struct option opts[] = {
    {"carrier", no_argument, NULL, O_CARRIER},           {"output", required_argument, NULL, O_OUTPUT},
    {"rate", required_argument, NULL, O_RATE},           {"mode", required_argument, NULL, O_MODE},
    {"dict", required_argument, NULL, O_DICT},           {"offset", required_argument, NULL, O_OFFSET},
    {"format", required_argument, NULL, O_FORMAT},       {"voice-audio", required_argument, NULL, O_VAUDIO},
    {"voice-channel", required_argument, NULL, O_VCHAN}, {"timing", required_argument, NULL, O_TIMING},
    {"quiet", no_argument, NULL, O_QUIET},               {"help", no_argument, NULL, 'h'},
    {0, 0, 0, 0}};
static const cli_command command = {"modulate", opts, usage};

typedef struct {
    const char *out_path, *rate_text, *mode_name, *dict_path, *offset_text, *fmt_text, *vaudio, *vchan_text;
    int quiet;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    switch (v) {
    case O_OUTPUT: a->out_path = arg; break;
    case O_RATE: a->rate_text = arg; break;
    case O_MODE: a->mode_name = arg; break;
    case O_DICT: a->dict_path = arg; break;
    case O_OFFSET: a->offset_text = arg; break;
    case O_FORMAT: a->fmt_text = arg; break;
    case O_VAUDIO: a->vaudio = arg; break;
    case O_VCHAN: a->vchan_text = arg; break;
    case O_QUIET: a->quiet = 1; break;
    case O_TIMING:
        fprintf(stderr, "ulk modulate: --timing goes with real output only (run it without --carrier)\n");
        return CLI_EXIT_USAGE_IO;
    default: break;
    }
    return 0;
}

/* The sample type and container of OUT: the raw extensions say it, a WAV takes --format (f32
 * by default), a device, pipe or "-" gets raw interleaved I/Q directly. Returns 0 or the exit
 * code (message printed). */
static int output_kind(const char *out_path, const char *fmt_text, ulk_ratio fs, ulk_sample_format *fmt,
                       ulk_container *cont, int *direct)
{
    *fmt = ULK_FMT_F32;
    *direct = 0;
    struct stat dst;
    if (has_suffix(out_path, ".cf32") || has_suffix(out_path, ".ci16")) {
        *cont = ULK_CONTAINER_RAW;
        *fmt = has_suffix(out_path, ".ci16") ? ULK_FMT_S16 : ULK_FMT_F32;
        if (fmt_text && strcmp(fmt_text, *fmt == ULK_FMT_S16 ? "s16" : "f32")) {
            fprintf(stderr, "ulk modulate: %s: the extension says %s but --format %s was given\n", out_path,
                    *fmt == ULK_FMT_S16 ? "s16" : "f32", fmt_text);
            return CLI_EXIT_USAGE_IO;
        }
        return 0;
    }
    if (has_suffix(out_path, ".wav")) {
        *cont = ULK_CONTAINER_WAV;
        if (fs.den != 1 || fs.num > INT_MAX) {
            fprintf(stderr, "ulk modulate: %s: WAV holds whole-number sample rates up to 2147483647 Hz; write raw "
                            ".cf32 or .ci16 with SigMF metadata instead\n", out_path);
            return CLI_EXIT_USAGE_IO;
        }
    } else if (cli_is_std(out_path) ||
               (stat(out_path, &dst) == 0 && !S_ISREG(dst.st_mode) && !S_ISDIR(dst.st_mode))) {
        *cont = ULK_CONTAINER_RAW; /* no metadata, as real output */
        *direct = 1;
    } else {
        fprintf(stderr, "ulk modulate: %s: complex output goes to a file ending .cf32, .ci16 or .wav\n", out_path);
        return CLI_EXIT_USAGE_IO;
    }
    if (fmt_text && !strcmp(fmt_text, "s16")) *fmt = ULK_FMT_S16;
    else if (fmt_text && strcmp(fmt_text, "f32")) {
        fprintf(stderr, "ulk modulate: --format '%s': expected f32 or s16\n", fmt_text);
        return CLI_EXIT_USAGE_IO;
    }
    return 0;
}

/* The mode of the dictionary's carrier section, after checking the upload was compiled with
 * that dictionary. Returns 0 with *mi, or the exit code (message printed). */
static int pick_mode(const ulk_dict *dict, const char *dict_path, const ulk_upload *up, const char *up_path,
                     const char *mode_name, int *mi)
{
    if (strcmp(dict->sha256, up->dict_sha256)) {
        fprintf(stderr,
                "ulk modulate: %s was compiled with dictionary %s %s (sha256 %.16s...), but %s is %s %s (sha256 "
                "%.16s...): give the dictionary it was compiled with; nothing written\n",
                up_path, up->dict_name ? up->dict_name : "?", up->dict_version ? up->dict_version : "?",
                up->dict_sha256, dict_path, dict->name ? dict->name : "?", dict->version ? dict->version : "?",
                dict->sha256);
        return CLI_EXIT_REFUSED;
    }
    const ulk_carrier *c0 = ulk_dict_carrier(dict);
    if (!c0) {
        fprintf(stderr, "ulk modulate: %s has no carrier section (docs/carrier.md); nothing written\n", dict_path);
        return CLI_EXIT_REFUSED;
    }
    *mi = ulk_carrier_find_mode(c0, mode_name);
    if (*mi >= 0) return 0;
    const char *names[64];
    size_t nn = 0;
    char list[512] = "";
    size_t used = 0;
    for (int k = 0; k < c0->n_modes; k++) {
        if (nn < 64) names[nn++] = c0->modes[k].name;
        if (used + strlen(c0->modes[k].name) + 3 < sizeof list)
            used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", k ? ", " : "", c0->modes[k].name);
    }
    const char *s = ulk_suggest(mode_name, names, nn);
    fprintf(stderr, "ulk modulate: %s: no mode '%s'%s%s%s (modes: %s); nothing written\n", dict_path, mode_name,
            s ? " (did you mean '" : "", s ? s : "", s ? "'?)" : "", list);
    return CLI_EXIT_REFUSED;
}

/* What the complex samples go with. */
typedef struct {
    const char *up_path, *out_path, *rate_norm;
    const ulk_dict *dict;
    const ulk_carrier *cc;
    const ulk_carrier_mode *mo;
    ulk_ratio fs;
    ulk_sample_format fmt;
    ulk_container cont;
} cx_job;

/* Generates the mode's complex baseband into j->out_path (the rate and the folder's free space
 * checked first). Returns 0 with *n_samples, or the exit code with the reason in diag; nothing
 * is left on failure. */
static int generate(const ulk_upload *up, const cx_job *j, uint64_t *n_samples, ulk_diag *diag)
{
    ulk_mod *mod = NULL;
    ulk_cgen *gen = NULL;
    ulk_writer *w = NULL;
    float *buf = NULL;
    char *extra = NULL;
    int code = 0, rc;
    double fs_hz = ulk_ratio_to_double(j->fs);
    double need_hz = 2.5 * (highest_line_hz(j->cc, j->mo) + fabs(ulk_ratio_to_double(j->cc->offset_hz)));
    if (fs_hz < need_hz) {
        ulk_fail(diag, ULK_ELIMIT,
                 "--rate %s Hz is too low for mode '%s': its highest line plus |offset| needs at least %.6g Hz "
                 "(2.5 x, as for real output)", j->rate_norm, j->mo->name, need_hz);
        return CLI_EXIT_REFUSED;
    }
    /* The modulator sets the length in every mode (the upload's duration) and, with data on,
     * feeds the data channel. Its own rate rule (2.5 x (f_sc + R_s)) applies too. */
    ulk_mod_config mcfg = {.upload = up, .fs = j->fs, .format = ULK_FMT_F32};
    rc = ulk_mod_create(&mcfg, &mod, diag);
    if (rc < 0) { code = exit_for(rc); goto out; }
    *n_samples = ulk_mod_n_samples(mod);
    data_src src = {mod, (float)(1.0 / ulk_mod_peak(&up->link))};
    ulk_cgen_config gcfg = {.carrier = j->cc, .mode = j->mo, .fs = j->fs, .data_fn = data_from_mod,
                            .data_user = &src, .n_samples = *n_samples};
    rc = ulk_cgen_create(&gcfg, &gen, diag);
    if (rc < 0) { code = exit_for(rc); goto out; }
    struct stat ost;
    if (!cli_is_std(j->out_path) && (stat(j->out_path, &ost) != 0 || S_ISREG(ost.st_mode))) {
        char dir[4096];
        const char *slash = strrchr(j->out_path, '/');
        if (!slash) snprintf(dir, sizeof dir, ".");
        else if (slash == j->out_path) snprintf(dir, sizeof dir, "/");
        else snprintf(dir, sizeof dir, "%.*s", (int)(slash - j->out_path), j->out_path);
        struct statvfs vs;
        double need = (double)*n_samples * (j->fmt == ULK_FMT_S16 ? 4.0 : 8.0) + 65536.0;
        if (statvfs(dir, &vs) == 0 && vs.f_blocks && need > (double)vs.f_bavail * (double)vs.f_frsize) {
            ulk_fail(diag, ULK_ELIMIT, "%s: %llu complex samples need %.0f bytes but the folder has %.0f free",
                     j->out_path, (unsigned long long)*n_samples, need, (double)vs.f_bavail * (double)vs.f_frsize);
            code = CLI_EXIT_REFUSED;
            goto out;
        }
    }
    char desc[512];
    snprintf(desc, sizeof desc, "ulk modulate --carrier: upload %s (dictionary %s %s), mode %s", j->up_path,
             up->dict_name ? up->dict_name : "?", up->dict_version ? up->dict_version : "?", j->mo->name);
    extra = identity_json(up, j->up_path, j->dict, j->mo, j->cc->offset_hz, j->cc->voice_audio);
    buf = ulk_malloc(2 * CHUNK * sizeof(float));
    if (!extra || !buf) { ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", j->out_path); code = 2; goto out; }
    ulk_sample_info info = {0};
    info.fs_hz = fs_hz;
    info.format = j->fmt;
    info.container = j->cont;
    info.channels = 2;
    info.description = desc;
    info.extra_json = extra;
    info.fs_exact = j->rate_norm;
    rc = ulk_writer_open(j->out_path, &info, &w, diag);
    if (rc < 0) { code = exit_for(rc); goto out; }
    long got;
    while ((got = ulk_cgen_run(gen, buf, CHUNK)) > 0)
        if (ulk_writer_write(w, buf, (size_t)got) < 0) break; /* sticky: the commit says why */
    if (got < 0) {
        ulk_fail(diag, (int)got, "%s: generator failed: %s", j->out_path, ulk_status_str((int)got));
        code = exit_for((int)got);
        goto out;
    }
    rc = ulk_writer_commit(w, diag);
    w = NULL;
    if (rc < 0) code = exit_for(rc);
out:
    ulk_writer_abort(w);
    cJSON_free(extra);
    ulk_free(buf);
    ulk_cgen_destroy(gen);
    ulk_mod_destroy(mod);
    return code;
}

/* Exact rate and offset, and the voice channel number. Returns 0 or the exit code. */
static int parse_values(const args *o, ulk_ratio *fs, ulk_ratio *offset, int *offset_given, int *vchan)
{
    *vchan = -1;
    if (o->vchan_text) {
        char *end;
        long v = strtol(o->vchan_text, &end, 10);
        if (!o->vaudio || end == o->vchan_text || *end || v < 0 || v > 255) {
            fprintf(stderr, "ulk modulate: --voice-channel '%s': %s\n", o->vchan_text,
                    o->vaudio ? "expected a channel number 0..255" : "goes with --voice-audio FILE");
            return CLI_EXIT_USAGE_IO;
        }
        *vchan = (int)v;
    }
    int prc = ulk_ratio_parse(o->rate_text, fs);
    if (prc < 0 || fs->num <= 0) {
        fprintf(stderr, "ulk modulate: --rate '%s': expected a positive decimal number of Hz%s\n", o->rate_text,
                prc == ULK_ELIMIT ? " (too many digits for exact arithmetic)" : "");
        return CLI_EXIT_USAGE_IO;
    }
    *offset = ulk_ratio_make(0, 1);
    *offset_given = 0;
    if (o->offset_text) {
        prc = ulk_ratio_parse(o->offset_text, offset);
        if (prc < 0) {
            fprintf(stderr, "ulk modulate: --offset '%s': expected a decimal number of Hz (may be negative)%s\n",
                    o->offset_text, prc == ULK_ELIMIT ? " (too many digits for exact arithmetic)" : "");
            return CLI_EXIT_USAGE_IO;
        }
        *offset_given = 1;
    }
    return 0;
}

int cmd_modulate_carrier(int argc, char **argv)
{
    args o = {0};
    int first, r = cli_parse(&command, argc, argv, on_opt, &o, &first);
    if (r >= 0) return r;
    if (argc - first > 1) {
        fprintf(stderr, "ulk modulate: more than one upload ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    const char *up_path = first < argc ? argv[first] : NULL, *out_path = o.out_path, *dict_path = o.dict_path;
    if (out_path) {
        const char *ins[] = {up_path, dict_path, o.vaudio}, *what[] = {"upload", "dictionary", "voice audio"};
        if ((r = cli_refuse_overwrite("modulate", out_path, ins, what, 3))) return r;
    }
    if (!up_path || !out_path || !o.rate_text || !o.mode_name || !dict_path) {
        fprintf(stderr, "ulk modulate --carrier: %s is required%s\n",
                !up_path ? "UPLOAD" : !out_path ? "-o OUT" : !o.rate_text ? "--rate HZ" : !o.mode_name ? "--mode NAME" : "--dict DICT",
                !dict_path && up_path && out_path && o.rate_text && o.mode_name
                    ? " (the carrier section comes from the dictionary the upload was compiled with)" : "");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    cx_job j = {.up_path = up_path, .out_path = out_path};
    ulk_ratio offset;
    int offset_given, vchan, direct;
    if ((r = parse_values(&o, &j.fs, &offset, &offset_given, &vchan))) return r;
    if ((r = output_kind(out_path, o.fmt_text, j.fs, &j.fmt, &j.cont, &direct))) return r;

    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk modulate: out of memory\n"); return CLI_EXIT_USAGE_IO; }
    ulk_upload *up = NULL;
    ulk_dict *dict = NULL;
    int code = 0, mi;
    int rc = ulk_upload_read_opts(up_path, ULK_UPLOAD_LEAN, 0, &up, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk modulate: upload %s refused; nothing written\n", up_path);
        code = exit_for(rc);
        goto done;
    }
    if ((code = cli_load_dict("modulate", dict_path, &dict))) {
        fprintf(stderr, "ulk modulate: nothing written\n");
        goto done;
    }
    if ((code = pick_mode(dict, dict_path, up, up_path, o.mode_name, &mi))) goto done;
    /* a copy that only changes the offset: the generator reads the rest as written */
    ulk_carrier cc = *ulk_dict_carrier(dict);
    if (offset_given) cc.offset_hz = offset;
    const ulk_carrier_mode *mo = &cc.modes[mi];
    if (o.vaudio) {
        if (!mo->on[ULK_CH_VOICE]) {
            fprintf(stderr, "ulk modulate: --voice-audio %s: mode '%s' has no voice channel on; nothing written\n",
                    o.vaudio, mo->name);
            code = CLI_EXIT_REFUSED;
            goto done;
        }
        /* the copy points at the caller's file (relative to the working folder); Carson's
         * bandwidth stays the section's audio_bandwidth_hz, or 3400 Hz in place of a tone */
        if (!cc.voice_audio) cc.voice_tone_hz = ulk_ratio_make(3400, 1);
        cc.voice_audio = (char *)o.vaudio;
        cc.voice_audio_channel = vchan;
    }
    fputs(ULK_CAUTION, stderr);
    char rate_norm[64];
    ulk_ratio_format(j.fs, rate_norm, sizeof rate_norm);
    j.rate_norm = rate_norm;
    j.dict = dict;
    j.cc = &cc;
    j.mo = mo;
    uint64_t n_samples = 0;
    if ((code = generate(up, &j, &n_samples, diag))) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk modulate: nothing written\n");
        goto done;
    }
    if (!o.quiet) {
        char off[64];
        ulk_ratio_format(cc.offset_hz, off, sizeof off);
        /* samples on standard output: the summary goes to standard error */
        fprintf(cli_is_std(out_path) ? stderr : stdout,
                "modulated %s -> %s: mode %s, %llu complex samples (%.6f s) at %s Hz, offset %s Hz, %s %s\n", up_path,
                out_path, mo->name, (unsigned long long)n_samples, (double)n_samples / ulk_ratio_to_double(j.fs),
                rate_norm, off, j.fmt == ULK_FMT_S16 ? "s16" : "f32",
                j.cont == ULK_CONTAINER_WAV ? "WAV (left I, right Q)" : direct ? "raw I/Q" : "raw I/Q + SigMF");
    }
done:
    ulk_dict_destroy(dict);
    ulk_upload_destroy(up);
    ulk_diag_destroy(diag);
    return code;
}
