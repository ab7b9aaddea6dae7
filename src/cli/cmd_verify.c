/* src/cli/cmd_verify.c - `ulk verify --dict DICT --upload UPLOAD CAPTURE [--json]`: does the
 * capture hold exactly the upload's commands, in order, bit for bit?
 * The receiver (include/ulk/rx.h) decodes, include/ulk/verify.h aligns; this file parses the
 * options and prints the report. Exit (docs/cli.md) 0 it does; 1 it does not (report of
 * missing, extra, changed and rejected words) or a broken dictionary; 2 usage or I/O error,
 * or an upload compiled with another dictionary than DICT. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture_opts.h"
#include "cli.h"
#include "ulk/decode.h"
#include "ulk/dict.h"
#include "ulk/profile.h"
#include "ulk/rx.h"
#include "ulk/upload.h"
#include "ulk/verify.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk verify --dict DICT --upload UPLOAD CAPTURE [--json]\n"
            "                  [--rate HZ [--format f32|s16|cf32|ci16]] [--channel N] [--iq] [--mode NAME]\n"
            "                  [--keys FILE [--state STATE]]\n"
            "\n"
            "Decodes CAPTURE blind (as ulk decode does) and compares the accepted words with the\n"
            "upload's words: same count, same order, same bits. Anything else is reported:\n"
            "  missing   an upload word that is not in the capture\n"
            "  extra     an accepted word that is not in the upload\n"
            "  changed   an upload command received with other argument values (field by field:\n"
            "            sent and received values as encoded, both raw fields)\n"
            "  rejected  words found but refused (check failed, unknown command, ...)\n"
            "Each command is shown with its fields as encoded, the upload's list text beside a\n"
            "value where it reads differently.\n"
            "The upload must have been compiled with DICT (same dictionary SHA-256).\n"
            "With a ccsds-tc dictionary the words are CLTUs, compared by command, APID, packet\n"
            "sequence count, N(S) and argument values.\n"
            "\n"
            "options:\n"
            "  --dict DICT        the dictionary\n"
            "  --upload UPLOAD    the upload file (from ulk compile)\n"
            "  --json             machine-readable report\n"
            "  --rate HZ, --format TYPE, --channel N      as for ulk decode\n"
            "  --iq, --mode NAME, --max-offset HZ         complex captures, as for ulk decode\n"
            "  --keys FILE, --state STATE                 authenticate the frames of a secured\n"
            "                     link, as for ulk decode (a frame that fails is 'rejected')\n"
            "  -h, --help         this text\n"
            "\nexit: 0 the capture holds exactly the upload; 1 it does not, or the dictionary has\n"
            "      errors; 2 usage or I/O error, or the upload was compiled with another dictionary\n"
            "      (refused, nothing compared)\n");
}

/* The dictionary's command an upload command was compiled from (the digests agree, so it is
 * there; NULL only for an upload read without it). */
static const ulk_command *sent_command(const ulk_dict *dict, const ulk_upload_cmd *uc)
{
    return ulk_dict_find_opcode(dict, uc->system_addr, uc->opcode);
}

/* A field at its full width in hex ("0x03" for 8 bits). */
static void raw_hex(uint64_t raw, int bits, char *buf, size_t len)
{
    snprintf(buf, len, "0x%0*llX", bits > 0 ? (bits + 3) / 4 : 1, (unsigned long long)raw);
}

/* The unit written after a number, as the command list takes it ("" for labels, booleans and
 * arguments without units). */
static const char *unit_of(const ulk_arg *a)
{
    return a->units && a->type != ULK_ARG_ENUM && a->type != ULK_ARG_BOOLEAN ? a->units : "";
}

/* 1 when the list text reads as another value than the encoded one ("1" beside "1.11"). */
static int text_differs(const ulk_arg *a, const char *enc, const char *text)
{
    if (a->type == ULK_ARG_ENUM || a->type == ULK_ARG_BOOLEAN) return strcmp(enc, text) != 0;
    return strtod(enc, NULL) != strtod(text, NULL);
}

/* One sent argument: its encoded value, the upload's list text beside it where that reads
 * differently ("angle=1.11deg (list text 1deg)"). */
static void sent_value(const ulk_arg *a, const ulk_upload_arg *ua, char *buf, size_t len)
{
    char enc[64];
    ulk_arg_encoded(a, ua->raw, enc, sizeof enc);
    const char *un = unit_of(a);
    if (ua->text && text_differs(a, enc, ua->text)) snprintf(buf, len, "%s%s (list text %s%s)", enc, un, ua->text, un);
    else snprintf(buf, len, "%s%s", enc, un);
}

/* The sent command with its fields: "CAM_CONFIG mode=FAST exposure=0.25s". */
static void sent_text(const ulk_dict *dict, const ulk_upload_cmd *uc, char *buf, size_t len)
{
    const ulk_command *c = sent_command(dict, uc);
    size_t n = (size_t)snprintf(buf, len, "%s", uc->mnemonic);
    for (int k = 0; k < uc->n_args && n < len; k++) {
        char v[200];
        if (c && k < c->n_args) sent_value(&c->args[k], &uc->args[k], v, sizeof v);
        else snprintf(v, sizeof v, "%s", uc->args[k].text ? uc->args[k].text : "?");
        n += (size_t)snprintf(buf + n, len - n, " %s=%s", uc->args[k].name, v);
    }
    if (uc->critical && n < len) snprintf(buf + n, len - n, " confirm");
}

/* The changed fields of one command: argument name, value sent (encoded, with the list text
 * where it differs), value received (encoded), both raw fields. Returns the count. */
static int changed_fields(const ulk_upload_cmd *uc, const ulk_verify_unit *w, cJSON *f)
{
    int n = 0;
    for (int a = 0; a < w->n_args && a < uc->n_args; a++) {
        if (uc->args[a].raw == w->raw[a]) continue;
        const ulk_arg *arg = &w->cmd->args[a];
        char enc_s[64], recv[64], rs[24], rr[24];
        ulk_arg_encoded(arg, uc->args[a].raw, enc_s, sizeof enc_s);
        ulk_arg_encoded(arg, w->raw[a], recv, sizeof recv);
        raw_hex(uc->args[a].raw, arg->bits, rs, sizeof rs);
        raw_hex(w->raw[a], arg->bits, rr, sizeof rr);
        n++;
        if (f) {
            cJSON *fo = cJSON_CreateObject();
            cJSON_AddStringToObject(fo, "field", arg->name);
            cJSON_AddStringToObject(fo, "sent", enc_s);
            if (uc->args[a].text && text_differs(arg, enc_s, uc->args[a].text))
                cJSON_AddStringToObject(fo, "sent_list_text", uc->args[a].text);
            cJSON_AddStringToObject(fo, "received", recv);
            cJSON_AddStringToObject(fo, "raw_sent", rs);
            cJSON_AddStringToObject(fo, "raw_received", rr);
            cJSON_AddItemToArray(f, fo);
        } else {
            const char *lt = uc->args[a].text && text_differs(arg, enc_s, uc->args[a].text) ? uc->args[a].text : NULL;
            printf("           %s: sent %s%s (%s%s%sraw %s), received %s%s (raw %s)\n", arg->name, enc_s, unit_of(arg),
                   lt ? "list text " : "", lt ? lt : "", lt ? ", " : "", rs, recv, unit_of(arg), rr);
        }
    }
    return n;
}

/* A time in seconds to the microsecond, as the human report prints it. */
static cJSON *time_json(double t)
{
    char buf[64];
    snprintf(buf, sizeof buf, "%.6f", t);
    return cJSON_CreateRaw(buf);
}

/* A rounded number, or null when there is no estimate (as in ulk decode --json). */
static cJSON *num_or_null(int have, double v)
{
    if (!have || !isfinite(v)) return cJSON_CreateNull();
    char buf[64];
    ulk_fmt_double(v, buf, sizeof buf);
    return cJSON_CreateRaw(buf);
}

/* The search-limit members, named and rounded as in ulk decode --json
 * (docs/spec/decode-output.md section 3): the clock-error estimate and whether it reached the
 * edge of the range searched; for a complex capture the carrier offset and its search range. */
static void search_limits_json(cJSON *root, const ulk_rx_estimates *c)
{
    const ulk_demod_estimates *d = &c->demod;
    int s = d->signal_found;
    cJSON *e = cJSON_AddObjectToObject(root, "estimates");
    cJSON_AddItemToObject(e, "rate_error_ppm", num_or_null(s, round(d->rate_error_ppm * 100) / 100));
    cJSON_AddBoolToObject(e, "signal_found", s);
    cJSON_AddBoolToObject(e, "at_search_limit", s && d->at_search_limit);
    cJSON_AddNumberToObject(e, "search_limit_ppm", d->search_limit_ppm);
    if (!c->complex_) return;
    cJSON *k = cJSON_AddObjectToObject(root, "carrier");
    int a = c->crec.n_acquired > 0;
    cJSON_AddItemToObject(k, "offset_hz", num_or_null(1, round(c->crec.mean_freq_hz * 1000) / 1000));
    cJSON_AddBoolToObject(k, "acquired", a);
    cJSON_AddBoolToObject(k, "at_search_limit", a && c->crec.at_limit);
    cJSON_AddNumberToObject(k, "search_limit_hz", c->max_offset_hz);
}

/* One entry of the JSON report for a missing, extra or changed command. */
static cJSON *op_json(const ulk_dict *dict, const ulk_upload *u, const ulk_verify *v, const ulk_verify_op *p)
{
    cJSON *e = cJSON_CreateObject();
    if (p->kind == ULK_VERIFY_MISSING || p->kind == ULK_VERIFY_CHANGED) {
        const ulk_upload_cmd *uc = &u->cmds[p->upload_index];
        char hx[ULK_UNIT_HEX_CHARS], txt[4096];
        ulk_verify_sent_hex(u, uc, hx, sizeof hx);
        sent_text(dict, uc, txt, sizeof txt);
        cJSON_AddNumberToObject(e, "index", (double)(p->upload_index + 1));
        cJSON_AddNumberToObject(e, "line", uc->line);
        cJSON_AddStringToObject(e, "mnemonic", uc->mnemonic);
        cJSON_AddStringToObject(e, p->kind == ULK_VERIFY_CHANGED ? "sent" : "text", txt);
        cJSON_AddStringToObject(e, p->kind == ULK_VERIFY_CHANGED ? "hex_sent" : "hex", hx);
    }
    if (p->kind == ULK_VERIFY_EXTRA || p->kind == ULK_VERIFY_CHANGED) {
        const ulk_verify_unit *w = ulk_verify_accepted(v, p->accepted_index);
        cJSON_AddItemToObject(e, "start_s", time_json(w->start_s));
        if (p->kind == ULK_VERIFY_EXTRA) cJSON_AddStringToObject(e, "mnemonic", w->cmd->mnemonic);
        cJSON_AddStringToObject(e, p->kind == ULK_VERIFY_CHANGED ? "received" : "text", w->text);
        cJSON_AddStringToObject(e, p->kind == ULK_VERIFY_CHANGED ? "hex_received" : "hex", w->hex);
        if (w->tc) {
            cJSON_AddNumberToObject(e, "sequence_count", w->seq_count);
            cJSON_AddNumberToObject(e, "frame_sequence", w->frame_seq);
        }
    }
    if (p->kind == ULK_VERIFY_CHANGED)
        changed_fields(&u->cmds[p->upload_index], ulk_verify_accepted(v, p->accepted_index),
                       cJSON_AddArrayToObject(e, "fields"));
    return e;
}

typedef struct {
    size_t match, miss, extra, chg;
} tally;

static tally count_ops(const ulk_verify *v)
{
    tally t = {0, 0, 0, 0};
    for (size_t k = 0; k < ulk_verify_n_ops(v); k++) {
        ulk_verify_op_kind kd = ulk_verify_op_at(v, k)->kind;
        if (kd == ULK_VERIFY_MATCH) t.match++;
        else if (kd == ULK_VERIFY_MISSING) t.miss++;
        else if (kd == ULK_VERIFY_EXTRA) t.extra++;
        else t.chg++;
    }
    return t;
}

static int print_json(const ulk_dict *dict, const ulk_upload *u, const ulk_verify *v)
{
    cJSON *root = cJSON_CreateObject();
    cJSON_AddBoolToObject(root, "match", ulk_verify_good(v));
    cJSON_AddNumberToObject(root, "expected", (double)u->n_cmds);
    cJSON_AddNumberToObject(root, "accepted", (double)ulk_verify_n_accepted(v));
    cJSON_AddNumberToObject(root, "matched", (double)count_ops(v).match);
    cJSON *jm = cJSON_AddArrayToObject(root, "missing"), *je = cJSON_AddArrayToObject(root, "extra");
    cJSON *jc = cJSON_AddArrayToObject(root, "changed"), *jr = cJSON_AddArrayToObject(root, "rejected");
    for (size_t k = 0; k < ulk_verify_n_ops(v); k++) {
        const ulk_verify_op *p = ulk_verify_op_at(v, k);
        if (p->kind == ULK_VERIFY_MATCH) continue;
        cJSON_AddItemToArray(p->kind == ULK_VERIFY_MISSING ? jm : p->kind == ULK_VERIFY_EXTRA ? je : jc, op_json(dict, u, v, p));
    }
    for (size_t i = 0; i < ulk_verify_n_rejected(v); i++) {
        const ulk_verify_unit *w = ulk_verify_rejected(v, i);
        cJSON *e = cJSON_CreateObject();
        cJSON_AddItemToObject(e, "start_s", time_json(w->start_s));
        cJSON_AddStringToObject(e, "unit", w->tc ? "CLTU" : "word");
        cJSON_AddStringToObject(e, "reason", w->text);
        cJSON_AddStringToObject(e, "reject", ulk_reject_name(w->reject));
        if (w->hex[0]) cJSON_AddStringToObject(e, "hex", w->hex); /* none when nothing was recovered */
        cJSON_AddItemToArray(jr, e);
    }
    if (ulk_verify_estimates(v)) search_limits_json(root, ulk_verify_estimates(v));
    char *txt = cJSON_Print(root);
    cJSON_Delete(root);
    if (!txt) { fprintf(stderr, "ulk verify: out of memory\n"); return -1; }
    printf("%s\n", txt);
    cJSON_free(txt);
    return 0;
}

static void print_op(const ulk_dict *dict, const ulk_upload *u, const ulk_verify *v, const ulk_verify_op *p)
{
    const ulk_upload_cmd *uc = p->kind != ULK_VERIFY_EXTRA ? &u->cmds[p->upload_index] : NULL;
    const ulk_verify_unit *w = p->kind != ULK_VERIFY_MISSING ? ulk_verify_accepted(v, p->accepted_index) : NULL;
    const char *unit = ulk_profile_of(&u->link)->unit_noun_one;
    char txt[4096];
    if (p->kind == ULK_VERIFY_MISSING) {
        sent_text(dict, uc, txt, sizeof txt);
        printf("  missing  %s %zu (line %d): %s\n", unit, p->upload_index + 1, uc->line, txt);
    } else if (p->kind == ULK_VERIFY_EXTRA) {
        printf("  extra    at %.6f s: %s\n", w->start_s, w->text);
    } else if (p->kind == ULK_VERIFY_CHANGED) {
        sent_text(dict, uc, txt, sizeof txt);
        printf("  changed  %s %zu (line %d) at %.6f s: %s\n", unit, p->upload_index + 1, uc->line, w->start_s, txt);
        int shown = 0;
        if (w->tc && (uc->seq_count != w->seq_count || uc->frame_seq != w->frame_seq)) {
            printf("           packet count / N(S): sent %u / %u, received %u / %u\n", uc->seq_count, uc->frame_seq,
                   w->seq_count, w->frame_seq);
            shown = 1;
        }
        shown += changed_fields(uc, w, NULL);
        if (!shown) { /* the same fields, other bits: show them */
            char hx[ULK_UNIT_HEX_CHARS];
            ulk_verify_sent_hex(u, uc, hx, sizeof hx);
            printf("           %s: sent %s, received %s\n", w->tc ? "packet data" : "bits", hx, w->hex);
        }
    }
}

/* "1 word", "2 words". */
static const char *plural(size_t n) { return n == 1 ? "" : "s"; }

static void print_human(const char *capture, const char *upload_path, const ulk_dict *dict, const ulk_upload *u,
                        const ulk_verify *v)
{
    size_t nrej = ulk_verify_n_rejected(v);
    const char *unit = ulk_profile_of(&u->link)->unit_noun_one;
    printf("%s against %s: %zu upload %s%s, %zu accepted, %zu rejected in the capture\n", capture, upload_path,
           u->n_cmds, unit, plural(u->n_cmds), ulk_verify_n_accepted(v), nrej);
    for (size_t k = 0; k < ulk_verify_n_ops(v); k++) print_op(dict, u, v, ulk_verify_op_at(v, k));
    for (size_t i = 0; i < nrej; i++) {
        const ulk_verify_unit *w = ulk_verify_rejected(v, i);
        /* the bits or packet data as read, unless none were recovered or the reason shows them */
        int hx = w->hex[0] && !strstr(w->text, w->hex);
        printf("  rejected %s at %.6f s (%s): %s%s%s%s\n", w->tc ? "CLTU" : "word", w->start_s,
               ulk_reject_name(w->reject), w->text, hx ? (w->tc ? " [data " : " [hex ") : "", hx ? w->hex : "",
               hx ? "]" : "");
    }
    tally t = count_ops(v);
    if (ulk_verify_good(v))
        printf("VERIFIED: the capture holds exactly the upload's %zu %s%s, in order\n", u->n_cmds, unit,
               plural(u->n_cmds));
    else
        printf("NOT VERIFIED: %zu matched, %zu missing, %zu extra, %zu changed, %zu rejected\n", t.match, t.miss,
               t.extra, t.chg, nrej);
}

static int on_event(const ulk_rx_event *ev, void *user)
{
    if (ev->kind == ULK_RX_WARNING) fprintf(stderr, "warning: %s\n", ev->text);
    if (ev->kind == ULK_RX_NOTICE) fprintf(stderr, "notice: %s\n", ev->text);
    return ulk_verify_add(user, ev);
}

enum { O_DICT = CLI_LONG, O_UPLOAD, O_JSON };
static const struct option opts[] = {{"dict", required_argument, 0, O_DICT},
                                     {"upload", required_argument, 0, O_UPLOAD},
                                     {"json", no_argument, 0, O_JSON},
                                     CLI_CAPTURE_OPTIONS,
                                     {"help", no_argument, 0, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"verify", opts, usage};

typedef struct {
    const char *dict_path, *upload_path, *capture;
    int json;
    cli_capture_opts o;
} ver_args;

static int on_opt(int v, const char *arg, void *ctx)
{
    ver_args *a = ctx;
    switch (v) {
    case O_DICT: a->dict_path = arg; break;
    case O_UPLOAD: a->upload_path = arg; break;
    case O_JSON: a->json = 1; break;
    default: return cli_capture_option("verify", v, arg, &a->o);
    }
    return 0;
}

/* Parses the options: returns -1 to go on, else the exit code (0 after --help). A capture '-'
 * becomes a temporary copy of standard input. */
static int parse_args(int argc, char **argv, ver_args *a)
{
    memset(a, 0, sizeof *a);
    cli_capture_init(&a->o);
    int first, pr = cli_parse(&command, argc, argv, on_opt, a, &first);
    if (pr >= 0) return pr;
    pr = cli_capture_positional("verify", argc, argv, first,
                                !a->dict_path     ? "--dict DICT is required"
                                : !a->upload_path ? "--upload UPLOAD is required"
                                                  : NULL,
                                usage, &a->capture);
    if (pr >= 0) return pr;
    if ((pr = cli_capture_check("verify", &a->o, a->capture, a->dict_path, a->upload_path))) return pr;
    if (cli_is_std(a->upload_path) && cli_is_std(a->capture)) {
        fprintf(stderr, "ulk verify: standard input ('-') can be only one of the inputs\n");
        return CLI_EXIT_USAGE_IO;
    }
    if (!(a->capture = cli_input("verify", a->capture))) return CLI_EXIT_USAGE_IO; /* "-": a copy of stdin */
    return -1;
}

/* Loads the dictionary and the upload and refuses an upload made with another dictionary.
 * Returns 0, or the exit code: a broken dictionary 1 (as from every command), an upload that
 * cannot be used or was made with another dictionary 2 (nothing compared). */
static int load(const ver_args *a, ulk_dict **dict, ulk_upload **u, ulk_diag *diag)
{
    int ret = cli_load_dict("verify", a->dict_path, dict);
    if (ret) return ret;
    if (ulk_upload_read(a->upload_path, u, diag) < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk verify: cannot use upload %s\n", a->upload_path);
        return CLI_EXIT_USAGE_IO;
    }
    const ulk_dict *d = *dict;
    const ulk_upload *up = *u;
    if (strcmp(up->dict_sha256, d->sha256) != 0) {
        fprintf(stderr,
                "ulk verify: %s was compiled with dictionary %s %s (sha256 %.16s...), not with %s (%s %s, sha256 "
                "%.16s...); verify against the dictionary it was made with\n",
                a->upload_path, up->dict_name ? up->dict_name : "?", up->dict_version ? up->dict_version : "",
                up->dict_sha256, a->dict_path, d->name ? d->name : "?", d->version ? d->version : "", d->sha256);
        return CLI_EXIT_USAGE_IO;
    }
    return 0;
}

int cmd_verify(int argc, char **argv)
{
    ver_args a;
    int r = parse_args(argc, argv, &a);
    if (r >= 0) return r;
    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_upload *u = NULL;
    ulk_verify *v = NULL;
    if (!diag) { fprintf(stderr, "ulk verify: out of memory\n"); return 2; }
    if ((ret = load(&a, &dict, &u, diag))) goto out;
    ret = CLI_EXIT_USAGE_IO;
    if (ulk_verify_create(dict, u, &v, diag) < 0 || (r = ulk_rx_run_file(dict, a.capture, &a.o.f, &a.o.r, on_event, v, diag)) < 0) {
        if (r == ULK_ENOMEM && !ulk_diag_count(diag)) fprintf(stderr, "ulk verify: out of memory\n");
        else ulk_diag_print(diag, stderr);
        goto out;
    }
    if (ulk_verify_compare(v) < 0) { fprintf(stderr, "ulk verify: out of memory\n"); goto out; }
    if (a.json) {
        if (print_json(dict, u, v) < 0) goto out;
    } else {
        print_human(a.capture, a.upload_path, dict, u, v);
    }
    ret = ulk_verify_good(v) ? 0 : 1;
out:
    ulk_verify_destroy(v);
    ulk_upload_destroy(u);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}
