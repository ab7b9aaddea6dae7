/* src/cli/cmd_validate.c - `ulk validate [--json] DICT...`: load and check dictionaries,
 * print every finding and a summary of each dictionary that loaded.
 *
 * Exit: 0 when every dictionary is clean (warnings allowed), 1 when any has errors, 2 on a
 * usage error or when a file cannot be read (I/O outranks findings).
 */
#include <getopt.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "cli.h"
#include "ulk/ccsds.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "ulk/sdls.h"
#include "ulk/error.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk validate [--json] DICT...\n"
            "\n"
            "Loads each command dictionary (YAML, or JSON when the name ends in .json) and checks\n"
            "it against the dictionary rules and the link profile. Every finding is printed as\n"
            "  FILE:LINE:COL: error|warning: MESSAGE [TREE.PATH]\n"
            "followed by a summary of each dictionary that loaded: name and version, systems,\n"
            "commands, word length W, word duration W/R_b, sub-bit rate R_s, k = f_sc/R_s,\n"
            "critical commands and the SHA-256 of its canonical content. For a ccsds-tc dictionary\n"
            "the summary gives the frame choices (SCID, VCID, service, segment header, FECF,\n"
            "randomizer), the smallest and largest command frame and CLTU, and k = f_sc / R.\n"
            "\n"
            "options:\n"
            "  --json      one JSON document on stdout: findings and summaries\n"
            "  --canonical print only the canonical content of each valid dictionary (the text\n"
            "              whose SHA-256 is its hash; docs/dictionary.md), one per line\n"
            "  -h, --help  this text\n"
            "\n"
            "exit status: 0 clean (warnings allowed), 1 errors found, 2 usage or I/O error\n");
}

typedef struct {
    ulk_ratio rs, k;
    int k_ok;
    double word_s;
    char word_txt[64], rs_txt[64], k_txt[64], rb_txt[64];
} figures;

static void compute(const ulk_dict *d, figures *f)
{
    memset(f, 0, sizeof *f);
    const ulk_link *L = &d->link;
    f->rs = ulk_link_subbit_rate(L);
    ulk_ratio_format(f->rs, f->rs_txt, sizeof f->rs_txt);
    ulk_ratio_format(L->bit_rate, f->rb_txt, sizeof f->rb_txt);
    f->k_ok = ulk_ratio_div(L->fsc, f->rs, &f->k) == 0;
    if (f->k_ok) ulk_ratio_format(f->k, f->k_txt, sizeof f->k_txt);
    ulk_ratio w;
    if (ulk_ratio_div(ulk_ratio_make(L->word_bits, 1), L->bit_rate, &w) == 0) {
        ulk_ratio_format(w, f->word_txt, sizeof f->word_txt);
        f->word_s = ulk_ratio_to_double(w);
    }
}

static int n_critical(const ulk_dict *d)
{
    int n = 0;
    for (int i = 0; i < d->n_commands; i++) n += d->commands[i].critical != 0;
    return n;
}

/* ccsds-tc: the largest command's frame and CLTU (one packet per frame, one frame per CLTU). */
typedef struct {
    size_t min_frame, max_frame, max_cltu;
    const char *max_mnemonic;
    char cltu_txt[64];
} tc_figures;

static void compute_tc(const ulk_dict *d, tc_figures *t)
{
    memset(t, 0, sizeof *t);
    const ulk_ccsds_tc *tc = &d->link.tc.frame;
    for (int i = 0; i < d->n_commands; i++) {
        size_t data = 1 + ((size_t)d->commands[i].packed_bits + 7) / 8;
        size_t fr = ulk_tcf_octets(tc, ULK_SPP_HDR_OCTETS + data);
        if (!t->min_frame || fr < t->min_frame) t->min_frame = fr;
        if (fr > t->max_frame) {
            t->max_frame = fr;
            t->max_mnemonic = d->commands[i].mnemonic;
        }
    }
    t->max_cltu = ulk_cltu_octets(t->max_frame);
    ulk_ratio s;
    if (ulk_ratio_div(ulk_ratio_make((int64_t)t->max_cltu * 8, 1), d->link.bit_rate, &s) == 0)
        ulk_ratio_format(s, t->cltu_txt, sizeof t->cltu_txt);
}

static void print_summary_tc(const ulk_dict *d, FILE *out)
{
    figures f;
    tc_figures t;
    compute(d, &f);
    compute_tc(d, &t);
    const ulk_link *L = &d->link;
    const ulk_tc_params *T = &L->tc;
    fprintf(out, "%s: dictionary %s version %s\n", d->file, d->name, d->version);
    fprintf(out, "  profile:        ccsds-tc (one Space Packet per TC frame per CLTU)\n");
    fprintf(out, "  systems:        %d (APIDs)\n", d->n_systems);
    fprintf(out, "  commands:       %d (%d critical)\n", d->n_commands, n_critical(d));
    fprintf(out, "  frames:         SCID %u, VCID %u, ", T->frame.spacecraft_id, T->frame.virtual_channel);
    if (T->frame.service == ULK_TC_SEQUENCE_CONTROLLED)
        fprintf(out, "sequence-controlled (Type-AD, first N(S) %u)", T->first_sequence);
    else
        fprintf(out, "expedited (Type-BD)");
    if (T->frame.segment_header) fprintf(out, ", segment header MAP ID %u", T->frame.map_id);
    else fprintf(out, ", no segment header");
    fprintf(out, ", FECF %s, randomizer %s\n", T->frame.fecf ? "on" : "off", T->frame.randomize ? "on" : "off");
    if (T->security.enabled)
        fprintf(out, "  security:       SPI %u, key '%s', %s, aes-256-gcm, IV %d + MAC %d octets per frame, window %u\n",
                (unsigned)T->security.spi, T->security.key, ulk_sdls_service_name(T->security.service),
                T->security.iv_octets, T->security.mac_octets, (unsigned)T->security.window);
    fprintf(out, "  frame size:     %zu..%zu octets (largest: %s), CLTU up to %zu octets = %s s at R\n", t.min_frame,
            t.max_frame, t.max_mnemonic ? t.max_mnemonic : "?", t.max_cltu, t.cltu_txt);
    fprintf(out, "  channel:        acquisition %u octets, idle %u octets, start sequence errors tolerated %d, BCH %s\n",
            T->acquisition_octets, T->idle_octets, T->frame.start_errors,
            T->frame.correction == ULK_BCH_TED ? "ted (detection only)" : "sec (single error correction)");
    fprintf(out, "  bit rate:       R = R_s = %s bit/s (%s)\n", f.rb_txt, ulk_line_code_name(L->line_code));
    fprintf(out, "  subcarrier:     k = f_sc / R = %s (%s)\n", f.k_ok ? f.k_txt : "?", ulk_waveform_name(L->waveform));
    fprintf(out, "  critical:      ");
    int any = 0;
    for (int i = 0; i < d->n_commands; i++)
        if (d->commands[i].critical) { fprintf(out, " %s", d->commands[i].mnemonic); any = 1; }
    fprintf(out, "%s\n", any ? "" : " (none)");
    fprintf(out, "  sha256:         %s\n", d->sha256);
}

static void print_summary(const ulk_dict *d, FILE *out)
{
    if (d->link.profile == ULK_PROFILE_CCSDS_TC) {
        print_summary_tc(d, out);
        return;
    }
    figures f;
    compute(d, &f);
    const ulk_link *L = &d->link;
    fprintf(out, "%s: dictionary %s version %s\n", d->file, d->name, d->version);
    fprintf(out, "  systems:        %d\n", d->n_systems);
    fprintf(out, "  commands:       %d (%d critical)\n", d->n_commands, n_critical(d));
    fprintf(out, "  word length W:  %d bits (vehicle %d + system %d + opcode %d + arguments %d + %s %d)\n",
            L->word_bits, L->vehicle_bits, L->system_bits, L->opcode_bits, L->argument_bits,
            ulk_check_name(L->check), L->check_bits);
    fprintf(out, "  word duration:  %s s = W / R_b (R_b = %s bit/s)\n", f.word_txt, f.rb_txt);
    fprintf(out, "  sub-bit rate:   R_s = %s sub-bit/s (n = %d)\n", f.rs_txt, L->n_subbits);
    fprintf(out, "  subcarrier:     k = f_sc / R_s = %s\n", f.k_ok ? f.k_txt : "?");
    fprintf(out, "  critical:      ");
    int any = 0;
    for (int i = 0; i < d->n_commands; i++)
        if (d->commands[i].critical) { fprintf(out, " %s", d->commands[i].mnemonic); any = 1; }
    fprintf(out, "%s\n", any ? "" : " (none)");
    fprintf(out, "  sha256:         %s\n", d->sha256);
}

static cJSON *summary_json(const ulk_dict *d)
{
    figures f;
    compute(d, &f);
    const ulk_link *L = &d->link;
    cJSON *s = cJSON_CreateObject();
    cJSON_AddStringToObject(s, "name", d->name);
    cJSON_AddStringToObject(s, "version", d->version);
    cJSON_AddStringToObject(s, "profile", ulk_profile_of(L)->name);
    cJSON_AddNumberToObject(s, "systems", d->n_systems);
    cJSON_AddNumberToObject(s, "commands", d->n_commands);
    if (L->profile == ULK_PROFILE_CCSDS_TC) {
        const ulk_tc_params *T = &L->tc;
        tc_figures t;
        compute_tc(d, &t);
        cJSON *tc = cJSON_AddObjectToObject(s, "tc");
        cJSON_AddNumberToObject(tc, "spacecraft_id", T->frame.spacecraft_id);
        cJSON_AddNumberToObject(tc, "virtual_channel", T->frame.virtual_channel);
        cJSON_AddStringToObject(tc, "service", T->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled" : "expedited");
        cJSON_AddNumberToObject(tc, "first_sequence", T->first_sequence);
        if (T->frame.segment_header) cJSON_AddNumberToObject(tc, "map_id", T->frame.map_id);
        else cJSON_AddNullToObject(tc, "map_id");
        cJSON_AddBoolToObject(tc, "fecf", T->frame.fecf);
        cJSON_AddBoolToObject(tc, "randomize", T->frame.randomize);
        cJSON_AddNumberToObject(tc, "acquisition_octets", T->acquisition_octets);
        cJSON_AddNumberToObject(tc, "idle_octets", T->idle_octets);
        cJSON_AddNumberToObject(tc, "start_errors", T->frame.start_errors);
        cJSON_AddStringToObject(tc, "correction", T->frame.correction == ULK_BCH_TED ? "ted" : "sec");
        if (T->security.enabled) {
            cJSON *sj = cJSON_AddObjectToObject(tc, "security");
            cJSON_AddNumberToObject(sj, "spi", T->security.spi);
            cJSON_AddStringToObject(sj, "key", T->security.key);
            cJSON_AddStringToObject(sj, "service", ulk_sdls_service_name(T->security.service));
            cJSON_AddStringToObject(sj, "algorithm", "aes-256-gcm");
            cJSON_AddNumberToObject(sj, "iv_octets", T->security.iv_octets);
            cJSON_AddNumberToObject(sj, "mac_octets", T->security.mac_octets);
            cJSON_AddNumberToObject(sj, "window", T->security.window);
        }
        cJSON_AddNumberToObject(s, "min_frame_octets", (double)t.min_frame);
        cJSON_AddNumberToObject(s, "max_frame_octets", (double)t.max_frame);
        cJSON_AddNumberToObject(s, "max_cltu_octets", (double)t.max_cltu);
        cJSON_AddNumberToObject(s, "bit_rate", ulk_ratio_to_double(L->bit_rate));
        if (f.k_ok) {
            cJSON_AddNumberToObject(s, "subcarrier_k", ulk_ratio_to_double(f.k));
            cJSON_AddStringToObject(s, "subcarrier_k_exact", f.k_txt);
        }
        cJSON *crit = cJSON_AddArrayToObject(s, "critical");
        for (int i = 0; i < d->n_commands; i++)
            if (d->commands[i].critical) cJSON_AddItemToArray(crit, cJSON_CreateString(d->commands[i].mnemonic));
        cJSON_AddStringToObject(s, "sha256", d->sha256);
        return s;
    }
    cJSON_AddNumberToObject(s, "word_bits", L->word_bits);
    cJSON_AddNumberToObject(s, "word_duration_s", f.word_s);
    cJSON_AddStringToObject(s, "word_duration_exact_s", f.word_txt);
    cJSON_AddNumberToObject(s, "bit_rate", ulk_ratio_to_double(L->bit_rate));
    cJSON_AddNumberToObject(s, "subbits_per_bit", L->n_subbits);
    cJSON_AddNumberToObject(s, "subbit_rate", ulk_ratio_to_double(f.rs));
    cJSON_AddStringToObject(s, "subbit_rate_exact", f.rs_txt);
    if (f.k_ok) {
        cJSON_AddNumberToObject(s, "subcarrier_k", ulk_ratio_to_double(f.k));
        cJSON_AddStringToObject(s, "subcarrier_k_exact", f.k_txt);
    }
    cJSON *crit = cJSON_AddArrayToObject(s, "critical");
    for (int i = 0; i < d->n_commands; i++)
        if (d->commands[i].critical) cJSON_AddItemToArray(crit, cJSON_CreateString(d->commands[i].mnemonic));
    cJSON_AddStringToObject(s, "sha256", d->sha256);
    return s;
}

static cJSON *findings_json(const ulk_diag *dg)
{
    static const char *sev[] = {"error", "warning", "note"};
    cJSON *a = cJSON_CreateArray();
    for (size_t i = 0; i < ulk_diag_count(dg); i++) {
        const ulk_finding *f = ulk_diag_get(dg, i);
        cJSON *o = cJSON_CreateObject();
        if (f->file) cJSON_AddStringToObject(o, "file", f->file);
        else cJSON_AddNullToObject(o, "file");
        cJSON_AddNumberToObject(o, "line", f->line);
        cJSON_AddNumberToObject(o, "col", f->col);
        cJSON_AddStringToObject(o, "severity", sev[f->sev]);
        cJSON_AddStringToObject(o, "message", f->msg);
        if (f->path) cJSON_AddStringToObject(o, "path", f->path);
        else cJSON_AddNullToObject(o, "path");
        cJSON_AddItemToArray(a, o);
    }
    return a;
}

static const struct option opts[] = {{"json", no_argument, NULL, 'j'},
                                     {"canonical", no_argument, NULL, 'c'},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"validate", opts, usage};

typedef struct {
    int json, canonical;
} args;

static int on_opt(int v, const char *arg, void *ctx)
{
    args *a = ctx;
    if (v == 'j') a->json = 1;
    else if (v == 'c') a->canonical = 1;
    return 0;
}

int cmd_validate(int argc, char **argv)
{
    args a = {0};
    int optind_ = 0, r = cli_parse(&command, argc, argv, on_opt, &a, &optind_);
    if (r >= 0) return r;
    int json = a.json, canonical = a.canonical;
    if (optind_ >= argc) {
        fprintf(stderr, "ulk validate: no dictionary given\n");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    int worst = 0;
    cJSON *root = json ? cJSON_CreateObject() : NULL;
    cJSON *arr = json ? cJSON_AddArrayToObject(root, "dictionaries") : NULL;
    size_t tot_err = 0, tot_warn = 0;
    for (int i = optind_; i < argc; i++) {
        ulk_diag *dg = ulk_diag_create();
        if (!dg) { fprintf(stderr, "ulk validate: out of memory\n"); cJSON_Delete(root); return 2; }
        ulk_dict *d = NULL;
        int rc = ulk_dict_load(argv[i], &d, dg);
        int code = cli_exit_for(rc);
        if (code > worst) worst = code;
        tot_err += ulk_diag_errors(dg);
        tot_warn += ulk_diag_warnings(dg);
        if (canonical) {
            char *txt = NULL;
            ulk_diag_print(dg, stderr);
            if (d && ulk_dict_canonical(d, &txt, NULL) == 0) printf("%s\n", txt);
            else if (d) { fprintf(stderr, "ulk validate: out of memory\n"); worst = 2; }
            free(txt);
        } else if (json) {
            cJSON *o = cJSON_CreateObject();
            cJSON_AddStringToObject(o, "file", argv[i]);
            cJSON_AddStringToObject(o, "status", code == 0 ? "ok" : code == 1 ? "invalid" : "unreadable");
            cJSON_AddNumberToObject(o, "errors", (double)ulk_diag_errors(dg));
            cJSON_AddNumberToObject(o, "warnings", (double)ulk_diag_warnings(dg));
            cJSON_AddItemToObject(o, "findings", findings_json(dg));
            if (d) cJSON_AddItemToObject(o, "summary", summary_json(d));
            else cJSON_AddNullToObject(o, "summary");
            cJSON_AddItemToArray(arr, o);
        } else {
            ulk_diag_print(dg, code == 2 ? stderr : stdout);
            if (rc && ulk_diag_count(dg) == 0) /* the message itself could not be stored */
                fprintf(stderr, "ulk validate: %s: %s\n", argv[i], ulk_status_str(rc));
            if (d) print_summary(d, stdout);
            else if (code == 1)
                printf("%s: refused: %zu error%s, %zu warning%s\n", argv[i], ulk_diag_errors(dg),
                       ulk_diag_errors(dg) == 1 ? "" : "s", ulk_diag_warnings(dg), ulk_diag_warnings(dg) == 1 ? "" : "s");
            if (d && ulk_diag_warnings(dg))
                printf("  %zu warning%s\n", ulk_diag_warnings(dg), ulk_diag_warnings(dg) == 1 ? "" : "s");
        }
        ulk_dict_destroy(d);
        ulk_diag_destroy(dg);
    }
    if (json) {
        cJSON_AddNumberToObject(root, "errors", (double)tot_err);
        cJSON_AddNumberToObject(root, "warnings", (double)tot_warn);
        cJSON_AddNumberToObject(root, "exit", worst);
        char *txt = cJSON_Print(root);
        if (txt) { printf("%s\n", txt); free(txt); }
        else { fprintf(stderr, "ulk validate: out of memory\n"); worst = 2; }
        cJSON_Delete(root);
    }
    return worst;
}
