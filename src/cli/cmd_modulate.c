/* src/cli/cmd_modulate.c - `ulk modulate UPLOAD -o OUT --rate HZ [--format f32|s16]
 * [--timing TABLE.csv]`: samples of docs/spec/subbit.md section 4 and the timing table of
 * section 6. Exit 0 written; 1 refused (rate too low, 16-bit output would clip, upload
 * refused); 2 usage or I/O error. Nothing is left behind on failure. */
#include <cjson/cJSON.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>
#include <sys/stat.h>
#include <sys/statvfs.h>
#include <time.h>
#include <unistd.h>

#include "cli.h"
#include "ulk/mod.h"
#include "ulk/profile.h"
#include "ulk/sampleio.h"
#include "ulk/upload.h"
#include "util.h"

#define CHUNK 65536              /* samples per write: 256 KiB of floats */
#define MAX_ANNOTATIONS 10000    /* SigMF annotations kept in memory (one per word) */
#define PROGRESS_MIN_SAMPLES 20000000ull

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk modulate UPLOAD -o OUT --rate HZ [--format f32|s16] [--timing TABLE.csv]\n"
            "       ulk modulate UPLOAD --timing TABLE.csv --rate HZ        (timing table only)\n"
            "       ulk modulate UPLOAD --carrier --mode NAME --dict DICT -o OUT.cf32|.ci16|.wav --rate HZ\n"
            "                    (complex composite carrier: ulk modulate --carrier --help)\n"
            "\n"
            "Turns an upload (from ulk compile) into PSK-on-subcarrier samples, exactly as the\n"
            "sub-bit profile's section 4 defines them, and/or writes its timing table (one row per\n"
            "sub-bit: index,start_s,first_sample,word,bit,bit_value,subbit,level,phase_deg).\n"
            "A ccsds-tc upload is one symbol per channel bit (n = 1, R_s = R, no pilot): word is\n"
            "the CLTU number, bit the index in the CLTU, -1 on acquisition and idle rows.\n"
            "\n"
            "  OUT ending .wav          WAV file, float (f32, default) or 16-bit PCM (s16)\n"
            "  OUT ending .f32 / .s16   raw little-endian samples, with OUT's base + .sigmf-meta\n"
            "                           (SigMF: rate, type, subcarrier, rates, upload identity, words)\n"
            "\n"
            "options:\n"
            "  -o, --output OUT   sample file to write (atomically: nothing is left on failure)\n"
            "  --rate HZ          sample rate, read exactly as a decimal (44100, 62500.5); it must be\n"
            "                     at least 2 x (subcarrier + sub-bit rate) and 2 x the pilot (a\n"
            "                     square subcarrier below 2 x (3 x subcarrier + sub-bit rate)\n"
            "                     draws a warning: its harmonics alias)\n"
            "  --format f32|s16   sample type (default: from the extension, else f32); s16 is\n"
            "                     round(32767 s) and is refused when the amplitudes could clip\n"
            "  --timing TABLE     write the timing table (CSV) too, or alone\n"
            "  -q, --quiet        no summary, no progress bar\n"
            "  -h, --help         this text\n"
            "\nexit: 0 written, 1 refused (rate, clipping, upload), 2 usage or I/O error\n\n%s",
            ULK_CAUTION);
}

static int exit_for(int rc) { return cli_exit_for(rc); }

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* Free bytes in the folder that will hold path, or -1 when it cannot be told. */
static double free_bytes_for(const char *path)
{
    char dir[4096];
    const char *slash = strrchr(path, '/');
    if (!slash) snprintf(dir, sizeof dir, ".");
    else if (slash == path) snprintf(dir, sizeof dir, "/");
    else snprintf(dir, sizeof dir, "%.*s", (int)(slash - path), path);
    struct statvfs vs;
    if (statvfs(dir, &vs) != 0 || vs.f_blocks == 0) return -1; /* /proc and the like: no size */
    return (double)vs.f_bavail * (double)vs.f_frsize;
}

/* "4.4 MB", "1.2 GB": sizes for people. */
static void human_bytes(double b, char *buf, size_t len)
{
    static const char *u[] = {"bytes", "kB", "MB", "GB", "TB", "PB"};
    int k = 0;
    while (b >= 1000 && k < 5) { b /= 1000; k++; }
    snprintf(buf, len, k ? "%.1f %s" : "%.0f %s", b, u[k]);
}

/* The upload's identity and link as "ulk:" SigMF fields (object members without braces).
 * Returns a malloc'd string (free with cJSON_free) or NULL when out of memory. */
static char *identity_json(const ulk_upload *u, const char *upload_path, uint64_t n_subbits)
{
    cJSON *o = cJSON_CreateObject();
    cJSON *id = cJSON_AddObjectToObject(o, "ulk:upload");
    if (!o || !id) { cJSON_Delete(o); return NULL; }
    const ulk_link *l = &u->link;
    char buf[64];
    int ok = 1;
    ok &= cJSON_AddStringToObject(id, "file", upload_path) != NULL;
    ok &= cJSON_AddStringToObject(id, "source", u->source ? u->source : "") != NULL;
    ok &= cJSON_AddStringToObject(id, "dictionary", u->dict_name ? u->dict_name : "") != NULL;
    ok &= cJSON_AddStringToObject(id, "dictionary_version", u->dict_version ? u->dict_version : "") != NULL;
    ok &= cJSON_AddStringToObject(id, "dictionary_sha256", u->dict_sha256) != NULL;
    ok &= cJSON_AddNumberToObject(id, "words", (double)u->n_cmds) != NULL;
    ok &= cJSON_AddNumberToObject(id, "subbits", (double)n_subbits) != NULL;
    ulk_ratio_format(l->bit_rate, buf, sizeof buf);
    ok &= cJSON_AddStringToObject(o, "ulk:bit_rate_exact", buf) != NULL;
    ulk_ratio_format(l->fsc, buf, sizeof buf);
    ok &= cJSON_AddStringToObject(o, "ulk:subcarrier_hz_exact", buf) != NULL;
    ok &= cJSON_AddNumberToObject(o, "ulk:subbits_per_bit", l->n_subbits) != NULL;
    ok &= cJSON_AddStringToObject(o, "ulk:profile", ulk_profile_of(l)->name) != NULL;
    ok &= cJSON_AddStringToObject(o, "ulk:waveform", ulk_waveform_name(l->waveform)) != NULL;
    ok &= cJSON_AddStringToObject(o, "ulk:line_code", ulk_line_code_name(l->line_code)) != NULL;
    ok &= cJSON_AddNumberToObject(o, "ulk:amplitude", l->amplitude) != NULL;
    if (l->has_pilot) {
        ulk_ratio_format(l->fp, buf, sizeof buf);
        ok &= cJSON_AddStringToObject(o, "ulk:pilot_hz_exact", buf) != NULL;
        ok &= cJSON_AddNumberToObject(o, "ulk:pilot_amplitude", l->pilot_amplitude) != NULL;
    }
    char *s = ok ? cJSON_PrintUnformatted(o) : NULL;
    cJSON_Delete(o);
    if (!s) return NULL;
    /* drop the outer braces: the writer takes members */
    size_t n = strlen(s);
    if (n >= 2) {
        memmove(s, s + 1, n - 2);
        s[n - 2] = 0;
    }
    return s;
}

/* One SigMF annotation per word (ccsds-tc: per CLTU): its samples, mnemonic, source line and
 * hex (ccsds-tc: APID, packet count and N(S)). */
static int annotate_words(ulk_writer *w, const ulk_upload *u, ulk_ratio fs)
{
    const ulk_link *l = &u->link;
    const ulk_profile_ops *prof = ulk_profile_ops_for(l->profile);
    uint64_t pat = 0; /* patterns before the current point */
    for (size_t k = 0; k < ulk_upload_n_full(u) && k < MAX_ANNOTATIONS; k++) {
        pat += u->cmds[k].idles_before;
        uint64_t s0, s1, bits = prof->unit_bits(l, &u->cmds[k]);
        if (ulk_mod_first_sample(l, fs, pat * (uint64_t)l->n_subbits, &s0) < 0 ||
            ulk_mod_first_sample(l, fs, (pat + bits) * (uint64_t)l->n_subbits, &s1) < 0)
            return 0; /* rates too fine: the modulator would have refused already */
        pat += bits;
        char comment[160];
        prof->unit_comment(l, &u->cmds[k], k, comment, sizeof comment);
        int rc = ulk_writer_annotate(w, s0, s1 - s0, u->cmds[k].mnemonic, comment);
        if (rc < 0) return rc;
    }
    return 0;
}

enum { O_OUTPUT = 'o', O_QUIET = 'q', O_RATE = CLI_LONG, O_FORMAT, O_TIMING };
static const struct option opts[] = {{"output", required_argument, NULL, O_OUTPUT},
                                     {"rate", required_argument, NULL, O_RATE},
                                     {"format", required_argument, NULL, O_FORMAT},
                                     {"timing", required_argument, NULL, O_TIMING},
                                     {"quiet", no_argument, NULL, O_QUIET},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"modulate", opts, usage};

typedef struct {
    const char *out_path, *rate_text, *fmt_text, *timing_path;
    int quiet;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    if (v == O_OUTPUT) a->out_path = arg;
    else if (v == O_RATE) a->rate_text = arg;
    else if (v == O_FORMAT) a->fmt_text = arg;
    else if (v == O_TIMING) a->timing_path = arg;
    else if (v == O_QUIET) a->quiet = 1;
    return 0;
}

/* The sample type and container of OUT from --format and the extension, and the rate checks a
 * WAV needs. Returns 0 or the exit code (message printed). */
static int output_kind(const char *out_path, const char *fmt_text, ulk_ratio fs, ulk_sample_format *fmt,
                       ulk_container *cont)
{
    *fmt = ULK_FMT_F32;
    *cont = ULK_CONTAINER_RAW; /* devices and pipes get raw samples */
    int fmt_given = 0;
    if (fmt_text) {
        if (!strcmp(fmt_text, "f32")) *fmt = ULK_FMT_F32;
        else if (!strcmp(fmt_text, "s16")) *fmt = ULK_FMT_S16;
        else {
            fprintf(stderr, "ulk modulate: --format '%s': expected f32 or s16\n", fmt_text);
            return CLI_EXIT_USAGE_IO;
        }
        fmt_given = 1;
    }
    if (!out_path) return 0;
    size_t n = strlen(out_path);
    const char *ext = n >= 4 ? out_path + n - 4 : "";
    int ext_fmt = -1;
    if (!strcasecmp(ext, ".wav")) *cont = ULK_CONTAINER_WAV;
    else if (!strcasecmp(ext, ".f32")) ext_fmt = ULK_FMT_F32;
    else if (!strcasecmp(ext, ".s16")) ext_fmt = ULK_FMT_S16;
    if (ext_fmt >= 0) {
        if (fmt_given && (int)*fmt != ext_fmt) {
            fprintf(stderr, "ulk modulate: %s: the extension says %s but --format %s was given\n", out_path,
                    ext_fmt == ULK_FMT_F32 ? "f32" : "s16", fmt_text);
            return CLI_EXIT_USAGE_IO;
        }
        *fmt = (ulk_sample_format)ext_fmt;
    }
    if (*cont == ULK_CONTAINER_WAV && (fs.den != 1 || fs.num > INT_MAX)) {
        char rt[64];
        ulk_ratio_format(fs, rt, sizeof rt);
        fprintf(stderr,
                "ulk modulate: %s: WAV %s, not %s Hz; write raw .f32 or .s16 samples with SigMF metadata "
                "instead\n",
                out_path, fs.den != 1 ? "holds whole-number sample rates only" : "(as libsndfile writes it) holds sample rates up to 2147483647 Hz",
                rt);
        return CLI_EXIT_USAGE_IO;
    }
    return 0;
}

/* What the samples go with: rate, format, where. */
typedef struct {
    const char *up_path, *out_path;
    ulk_ratio fs;
    ulk_sample_format fmt;
    ulk_container cont;
    const char *rate_norm;
    int quiet;
} sample_job;

/* Modulates up into j->out_path (refusing a size the folder cannot hold before anything is
 * created). Returns 0 with *n_samples, or the exit code with the reason in diag; nothing of
 * the samples is left on failure. */
static int write_samples(const ulk_upload *up, const sample_job *j, uint64_t *n_samples, ulk_diag *diag)
{
    ulk_mod *mod = NULL;
    ulk_writer *w = NULL;
    float *buf = NULL;
    char *extra = NULL;
    int code = 0, rc;
    ulk_mod_config cfg = {.upload = up, .fs = j->fs, .format = j->fmt};
    rc = ulk_mod_create(&cfg, &mod, diag);
    if (rc < 0) { code = exit_for(rc); goto out; }
    *n_samples = ulk_mod_n_samples(mod);
    struct stat ost;
    int regular = !cli_is_std(j->out_path) && (stat(j->out_path, &ost) != 0 || S_ISREG(ost.st_mode));
    double need = (double)*n_samples * (j->fmt == ULK_FMT_S16 ? 2.0 : 4.0) + 65536.0;
    double avail = regular ? free_bytes_for(j->out_path) : -1;
    if (avail >= 0 && need > avail) {
        char hn[32], ha[32];
        human_bytes(need, hn, sizeof hn);
        human_bytes(avail, ha, sizeof ha);
        ulk_fail(diag, ULK_ELIMIT, "%s: %llu samples at %s Hz need %s but the folder has %s free", j->out_path,
                 (unsigned long long)*n_samples, j->rate_norm, hn, ha);
        code = CLI_EXIT_REFUSED;
        goto out;
    }
    ulk_ratio rs = ulk_link_subbit_rate(&up->link);
    char desc[512];
    snprintf(desc, sizeof desc, "ulk modulate: upload %s (list %s, dictionary %s %s), %zu %s", j->up_path,
             up->source ? up->source : "?", up->dict_name ? up->dict_name : "?",
             up->dict_version ? up->dict_version : "?", up->n_cmds,
             ulk_profile_of(&up->link)->unit_noun);
    extra = identity_json(up, j->up_path, ulk_upload_n_subbits(up));
    buf = ulk_malloc(CHUNK * sizeof(float));
    if (!extra || !buf) { ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", j->out_path); code = 2; goto out; }
    ulk_sample_info info = {0};
    info.fs_hz = ulk_ratio_to_double(j->fs);
    info.format = j->fmt;
    info.container = j->cont;
    info.channels = 1;
    info.fsc_hz = ulk_ratio_to_double(up->link.fsc);
    info.bit_rate = ulk_ratio_to_double(up->link.bit_rate);
    info.subbit_rate = ulk_ratio_to_double(rs);
    info.description = desc;
    info.extra_json = extra;
    info.fs_exact = j->rate_norm;
    rc = ulk_writer_open(j->out_path, &info, &w, diag);
    if (rc < 0) { code = exit_for(rc); goto out; }
    rc = annotate_words(w, up, j->fs);
    if (rc < 0) { ulk_fail(diag, rc, "%s: out of memory", j->out_path); code = 2; goto out; }
    int show = !j->quiet && isatty(2) && *n_samples >= PROGRESS_MIN_SAMPLES;
    double t_last = now_s();
    long got;
    while ((got = ulk_mod_run(mod, buf, CHUNK)) > 0) {
        if (ulk_writer_write(w, buf, (size_t)got) < 0) break; /* sticky: the commit says why */
        if (show) {
            double t = now_s();
            if (t - t_last >= 0.25) {
                t_last = t;
                uint64_t pos = ulk_mod_position(mod);
                fprintf(stderr, "\rulk modulate: %3d%%  %.1f of %.1f s of signal",
                        (int)(100.0 * (double)pos / (double)*n_samples), (double)pos / info.fs_hz,
                        (double)*n_samples / info.fs_hz);
            }
        }
    }
    if (show) fprintf(stderr, "\r%60s\r", "");
    rc = ulk_writer_commit(w, diag);
    w = NULL;
    if (rc < 0) code = exit_for(rc);
out:
    ulk_writer_abort(w);
    cJSON_free(extra);
    ulk_free(buf);
    ulk_mod_destroy(mod);
    return code;
}

/* The samples landed but their timing table did not: take the samples (and metadata) back. */
static void take_back(const char *out_path, ulk_container cont)
{
    if (!out_path || cli_is_std(out_path)) return;
    remove(out_path);
    size_t n = strlen(out_path);
    if (cont == ULK_CONTAINER_RAW && n > 4) {
        char *mp = ulk_malloc(n + 12);
        if (mp) {
            memcpy(mp, out_path, n - 4);
            memcpy(mp + n - 4, ".sigmf-meta", 12);
            remove(mp);
            ulk_free(mp);
        }
    }
}

static void summary(const ulk_upload *up, const sample_job *j, const char *timing_path, uint64_t n_samples)
{
    /* samples or table on standard output: the summary goes to standard error */
    FILE *say = cli_is_std(j->out_path) || cli_is_std(timing_path) ? stderr : stdout;
    if (j->out_path)
        fprintf(say, "modulated %s -> %s: %llu samples (%.6f s) at %s Hz, %s %s\n", j->up_path, j->out_path,
                (unsigned long long)n_samples, (double)n_samples / ulk_ratio_to_double(j->fs), j->rate_norm,
                j->fmt == ULK_FMT_S16 ? "s16" : "f32",
                j->cont == ULK_CONTAINER_WAV ? "WAV" : cli_is_std(j->out_path) ? "raw" : "raw + SigMF");
    if (timing_path && !cli_is_std(timing_path))
        fprintf(say, "timing table %s: %llu %s at %s Hz\n", timing_path, (unsigned long long)ulk_upload_n_subbits(up),
                ulk_profile_of(&up->link)->symbol_noun, j->rate_norm);
}

int cmd_modulate(int argc, char **argv)
{
    for (int i = 1; i < argc; i++) /* complex composite-carrier output: cmd_modulate_carrier.c */
        if (!strcmp(argv[i], "--carrier")) return cmd_modulate_carrier(argc, argv);
    args o = {0};
    int first, r = cli_parse(&command, argc, argv, on_opt, &o, &first);
    if (r >= 0) return r;
    if (argc - first > 1) {
        fprintf(stderr, "ulk modulate: more than one upload ('%s' and '%s')\n", argv[first], argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    const char *up_path = first < argc ? argv[first] : NULL, *out_path = o.out_path, *rate_text = o.rate_text,
               *timing_path = o.timing_path;
    const char *ins[] = {up_path, timing_path}, *what[] = {"upload", "timing table"};
    if (out_path && (r = cli_refuse_overwrite("modulate", out_path, ins, what, 2))) return r;
    if (timing_path && (r = cli_refuse_overwrite("modulate", timing_path, ins, what, 1))) return r;
    if (cli_is_std(out_path) && cli_is_std(timing_path)) {
        fprintf(stderr, "ulk modulate: the samples and the timing table cannot both go to standard output\n");
        return CLI_EXIT_USAGE_IO;
    }
    if (!up_path || !rate_text || (!out_path && !timing_path)) {
        fprintf(stderr, "ulk modulate: %s is required\n",
                !up_path ? "UPLOAD" : !rate_text ? "--rate HZ" : "-o OUT or --timing TABLE");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    char rate_norm[64];
    sample_job j = {.up_path = up_path, .out_path = out_path, .rate_norm = rate_norm, .quiet = o.quiet};
    int prc = ulk_ratio_parse(rate_text, &j.fs);
    if (prc < 0 || j.fs.num <= 0) {
        fprintf(stderr, "ulk modulate: --rate '%s': expected a positive decimal number of Hz%s\n", rate_text,
                prc == ULK_ELIMIT ? " (too many digits for exact arithmetic)" : "");
        return CLI_EXIT_USAGE_IO;
    }
    ulk_ratio_format(j.fs, rate_norm, sizeof rate_norm);
    if ((r = output_kind(out_path, o.fmt_text, j.fs, &j.fmt, &j.cont))) return r;

    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk modulate: out of memory\n"); return CLI_EXIT_USAGE_IO; }
    ulk_upload *up = NULL;
    ulk_afile tf;
    int have_tf = 0, code = 0, rc;
    /* lean: idles and words/CLTUs only, the first MAX_ANNOTATIONS commands in full for the
     * annotations; what keeps any accepted upload under 64 MB (docs/upload-format.md) */
    rc = ulk_upload_read_opts(up_path, ULK_UPLOAD_LEAN, MAX_ANNOTATIONS, &up, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk modulate: upload %s refused; nothing written\n", up_path);
        code = exit_for(rc);
        goto done;
    }
    fputs(ULK_CAUTION, stderr);
    /* timing table first into its temporary, so both outputs land together or not at all;
     * "-", devices and pipes are written directly at the end */
    struct stat tst;
    int timing_direct = timing_path && (cli_is_std(timing_path) ||
                                        (stat(timing_path, &tst) == 0 && !S_ISREG(tst.st_mode)));
    if (timing_path && !timing_direct) {
        rc = ulk_afile_open(&tf, timing_path, diag);
        if (rc == 0) {
            have_tf = 1;
            rc = ulk_timing_write_fp(up, j.fs, tf.fp, timing_path, diag);
        }
        if (rc < 0) { code = exit_for(rc); goto fail; }
    }
    uint64_t n_samples = 0;
    if (out_path && (code = write_samples(up, &j, &n_samples, diag))) goto fail;
    if (have_tf) {
        have_tf = 0;
        if (ulk_afile_commit(&tf, diag) < 0) {
            take_back(out_path, j.cont);
            code = CLI_EXIT_USAGE_IO;
            goto fail;
        }
    }
    if (timing_direct && (rc = ulk_timing_write(up, j.fs, timing_path, diag)) < 0) {
        ulk_diag_print(diag, stderr);
        code = exit_for(rc);
        goto done;
    }
    if (ulk_diag_warnings(diag)) ulk_diag_print(diag, stderr);
    if (!o.quiet) summary(up, &j, timing_path, n_samples);
    goto done;

fail:
    ulk_diag_print(diag, stderr);
    fprintf(stderr, "ulk modulate: nothing written\n");
    if (have_tf) ulk_afile_abort(&tf);
done:
    ulk_upload_destroy(up);
    ulk_diag_destroy(diag);
    return code;
}
