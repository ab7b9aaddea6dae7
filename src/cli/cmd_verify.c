/* src/cli/cmd_verify.c - `ulk verify --dict DICT --upload UPLOAD CAPTURE [--json]`: does the
 * capture hold exactly the upload's commands, in order, bit for bit?
 * Exit 0 it does; 1 it does not (report of missing, extra, changed and rejected words);
 * 2 usage or I/O error, or an upload compiled with another dictionary than DICT. */
#include <cjson/cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture.h"
#include "cli.h"
#include "ulk/ccsds.h"
#include "ulk/decode.h"
#include "ulk/dict.h"
#include "ulk/upload.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk verify --dict DICT --upload UPLOAD CAPTURE [--json]\n"
            "                  [--rate HZ --format f32|s16] [--channel N] [--iq] [--mode NAME]\n"
            "                  [--keys FILE [--state STATE]]\n"
            "\n"
            "Decodes CAPTURE blind (as ulk decode does) and compares the accepted words with the\n"
            "upload's words: same count, same order, same bits. Anything else is reported:\n"
            "  missing   an upload word that is not in the capture\n"
            "  extra     an accepted word that is not in the upload\n"
            "  changed   an upload command received with other argument values (field by field)\n"
            "  rejected  words found but refused (check failed, unknown command, ...)\n"
            "The upload must have been compiled with DICT (same dictionary SHA-256).\n"
            "With a ccsds-tc dictionary the words are CLTUs, compared by command, APID, packet\n"
            "sequence count, N(S) and argument values.\n"
            "\n"
            "options:\n"
            "  --dict DICT        the dictionary\n"
            "  --upload UPLOAD    the upload file (from ulk compile)\n"
            "  --json             machine-readable report\n"
            "  --rate HZ, --format f32|s16, --channel N   as for ulk decode\n"
            "  --iq, --mode NAME, --max-offset HZ         complex captures, as for ulk decode\n"
            "  --keys FILE, --state STATE                 authenticate the frames of a secured\n"
            "                     link, as for ulk decode (a frame that fails is 'rejected')\n"
            "  -h, --help         this text\n"
            "\nexit: 0 the capture holds exactly the upload; 1 it does not; 2 usage or I/O error,\n"
            "      or the upload was compiled with another dictionary (refused, nothing compared)\n");
}

static int same_word(const ulk_word *a, const ulk_word *b)
{
    return a->n_bits == b->n_bits && !memcmp(a->bits, b->bits, (size_t)a->n_bits);
}

/* The upload's command and a received word (or CLTU) are the same: the same bits; for
 * ccsds-tc the same command, APID, packet count, N(S) and argument raws (the frame and CLTU
 * are functions of these, checked when the upload was read and when the CLTU was decoded). */
static int same_unit(const ulk_upload_cmd *c, const cli_word *w)
{
    if (!w->tc) return same_word(&c->word, &w->dw.word);
    if (!w->dec.cmd || strcmp(c->mnemonic, w->dec.cmd->mnemonic) || c->system_addr != w->dec.system ||
        c->seq_count != w->seq_count || c->frame_seq != w->frame_seq || c->n_args != w->dec.n_args)
        return 0;
    for (int k = 0; k < c->n_args; k++)
        if (c->args[k].raw != w->dec.args[k].raw) return 0;
    return 1;
}

/* The upload command's identity as the report shows it: the word in hex, or (ccsds-tc) its
 * packet data field, read from the frame. */
static void sent_hex(const ulk_upload *u, const ulk_upload_cmd *c, char *buf, size_t len)
{
    if (u->link.profile != ULK_PROFILE_CCSDS_TC) {
        char hx[40];
        ulk_word_hex(&c->word, hx);
        snprintf(buf, len, "%s", hx);
        return;
    }
    const ulk_ccsds_tc *tc = &u->link.tc.frame;
    size_t a = ULK_TCF_HDR_OCTETS + (tc->segment_header ? 1 : 0) + ULK_SPP_HDR_OCTETS;
    size_t b = c->n_frame - (tc->fecf ? 2 : 0);
    size_t k = 0;
    for (size_t i = a; i < b && k + 3 <= len; i++, k += 2) snprintf(buf + k, 3, "%02X", c->frame[i]);
    buf[k < len ? k : len - 1] = 0;
}

typedef enum { OP_MATCH, OP_CHANGED, OP_MISSING, OP_EXTRA } op_kind;
typedef struct {
    op_kind k;
    size_t ui, ai; /* upload index, accepted index */
} op;

/* Scheduled start of each upload word in seconds from the first word's (sub-bit profile:
 * idles and words of n sub-bits at R_s), and the capture's offset from the first accepted
 * word equal to an upload word. NULL (no time preference) for ccsds-tc, or out of memory. */
static double *schedule(const ulk_upload *u, const cli_word **acc, size_t na, double *offset)
{
    size_t nu = u->n_cmds;
    if (u->link.profile != ULK_PROFILE_SUBBIT || !nu) return NULL;
    double rs = ulk_ratio_to_double(u->link.bit_rate) * u->link.n_subbits;
    if (!(rs > 0)) return NULL;
    double *t = ulk_malloc(nu * sizeof *t);
    if (!t) return NULL;
    double g = 0; /* groups (idle patterns and bits) before word i */
    for (size_t i = 0; i < nu; i++) {
        g += (double)ulk_upload_idles_before(u, i);
        t[i] = g * u->link.n_subbits / rs;
        g += u->link.word_bits;
    }
    double t0 = t[0];
    for (size_t i = 0; i < nu; i++) t[i] -= t0;
    *offset = 0;
    for (size_t j = 0; j < na; j++)
        for (size_t i = 0; i < nu; i++)
            if (same_unit(&u->cmds[i], acc[j])) { *offset = acc[j]->dw.start_s - t[i]; return t; }
    return t;
}

/* Edit script between the upload's words and the accepted words: equal words match (0),
 * the same command with other bits is "changed" (1), else missing/extra (1 each). DP when
 * the table is small enough, else a greedy walk. Among scripts of equal cost, the one whose
 * paired words lie nearest the upload's schedule wins (a tie-break only: the summed penalty
 * stays below one edit), so that when a word is received twice, once where it was sent and
 * once in place of another, the word received where it was sent is the one matched.
 * Returns the op count, ops malloc'd. */
static size_t align(const ulk_upload *u, const cli_word **acc, size_t na, op **out)
{
    size_t nu = u->n_cmds, cap = nu + na + 1, n = 0;
    op *ops = ulk_malloc(cap * sizeof *ops);
    *out = ops;
    if (!ops) return 0;
    if ((nu + 1) * (na + 1) <= 20000000u) {
        unsigned *c = ulk_malloc((nu + 1) * (na + 1) * sizeof *c);
        double off = 0, *sched = (nu + 1) * (na + 1) <= 4000000u ? schedule(u, acc, na, &off) : NULL;
        float *pt = sched ? ulk_malloc((nu + 1) * (na + 1) * sizeof *pt) : NULL;
        if (c) {
#define C(i, j) c[(i) * (na + 1) + (j)]
#define P(i, j) (pt ? pt[(i) * (na + 1) + (j)] : 0.0f)
#define PEN(i, j) (pt ? (float)(fabs(acc[(j)-1]->dw.start_s - off - sched[(i)-1]) / \
                               (1.0 + fabs(acc[(j)-1]->dw.start_s - off - sched[(i)-1])) / (double)(nu + na + 1)) : 0.0f)
            for (size_t i = 0; i <= nu; i++) { C(i, 0) = (unsigned)i; if (pt) pt[i * (na + 1)] = 0; }
            for (size_t j = 0; j <= na; j++) { C(0, j) = (unsigned)j; if (pt) pt[j] = 0; }
            for (size_t i = 1; i <= nu; i++)
                for (size_t j = 1; j <= na; j++) {
                    unsigned best = C(i - 1, j) + 1;
                    float bp = P(i - 1, j);
                    if (C(i, j - 1) + 1 < best || (C(i, j - 1) + 1 == best && P(i, j - 1) < bp)) {
                        best = C(i, j - 1) + 1;
                        bp = P(i, j - 1);
                    }
                    unsigned dc = 0;
                    int diag = 0;
                    if (same_unit(&u->cmds[i - 1], acc[j - 1])) { dc = C(i - 1, j - 1); diag = 1; }
                    else if (!strcmp(u->cmds[i - 1].mnemonic, acc[j - 1]->dec.cmd->mnemonic)) { dc = C(i - 1, j - 1) + 1; diag = 1; }
                    if (diag) {
                        float dp = P(i - 1, j - 1) + PEN(i, j);
                        if (dc < best || (dc == best && dp < bp)) { best = dc; bp = dp; }
                    }
                    C(i, j) = best;
                    if (pt) pt[i * (na + 1) + j] = bp;
                }
            size_t i = nu, j = na;
            while (i > 0 || j > 0) {
                if (i > 0 && j > 0) {
                    int eq = same_unit(&u->cmds[i - 1], acc[j - 1]);
                    int sm = !strcmp(u->cmds[i - 1].mnemonic, acc[j - 1]->dec.cmd->mnemonic);
                    float dp = P(i - 1, j - 1) + PEN(i, j);
                    if (eq && C(i, j) == C(i - 1, j - 1) && dp == P(i, j)) { ops[n++] = (op){OP_MATCH, i - 1, j - 1}; i--; j--; continue; }
                    if (!eq && sm && C(i, j) == C(i - 1, j - 1) + 1 && dp == P(i, j)) { ops[n++] = (op){OP_CHANGED, i - 1, j - 1}; i--; j--; continue; }
                }
                if (i > 0 && C(i, j) == C(i - 1, j) + 1 && P(i - 1, j) == P(i, j)) { ops[n++] = (op){OP_MISSING, i - 1, 0}; i--; continue; }
                if (j > 0 && C(i, j) == C(i, j - 1) + 1 && P(i, j - 1) == P(i, j)) { ops[n++] = (op){OP_EXTRA, 0, j - 1}; j--; continue; }
                /* unreachable: every cell came from one of the moves above; keep the old walk */
                if (i > 0 && (j == 0 || C(i, j) == C(i - 1, j) + 1)) { ops[n++] = (op){OP_MISSING, i - 1, 0}; i--; continue; }
                ops[n++] = (op){OP_EXTRA, 0, j - 1};
                j--;
            }
#undef PEN
#undef P
#undef C
            ulk_free(c);
            ulk_free(pt);
            ulk_free(sched);
            for (size_t a = 0; a < n / 2; a++) { op t = ops[a]; ops[a] = ops[n - 1 - a]; ops[n - 1 - a] = t; }
            return n;
        }
        ulk_free(pt);
        ulk_free(sched);
    }
    /* greedy: walk both lists in order */
    size_t i = 0, j = 0;
    while (i < nu || j < na) {
        if (i < nu && j < na && same_unit(&u->cmds[i], acc[j])) { ops[n++] = (op){OP_MATCH, i++, j++}; continue; }
        if (i < nu && j < na && !strcmp(u->cmds[i].mnemonic, acc[j]->dec.cmd->mnemonic)) { ops[n++] = (op){OP_CHANGED, i++, j++}; continue; }
        if (i < nu) ops[n++] = (op){OP_MISSING, i++, 0};
        else ops[n++] = (op){OP_EXTRA, 0, j++};
    }
    return n;
}

int cmd_verify(int argc, char **argv)
{
    const char *dict_path = NULL, *upload_path = NULL, *capture = NULL;
    int json = 0;
    cli_capture_opts o;
    memset(&o, 0, sizeof o);
    o.format = -1;
    o.channel = -1;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i];
        int r = cli_capture_opt("verify", argc, argv, &i, &o);
        if (r < 0) return 2;
        if (r > 0) continue;
        if (!strcmp(a, "-h") || !strcmp(a, "--help")) { usage(stdout); return 0; }
        else if (!strcmp(a, "--json")) json = 1;
        else if (!strcmp(a, "--dict") || !strcmp(a, "--upload")) {
            if (i + 1 >= argc) { fprintf(stderr, "ulk verify: %s needs a value\n", a); return 2; }
            if (!strcmp(a, "--dict")) dict_path = argv[++i];
            else upload_path = argv[++i];
        } else if (a[0] == '-' && a[1]) {
            fprintf(stderr, "ulk verify: unknown option '%s' (ulk verify --help)\n", a);
            return 2;
        } else if (!capture) capture = a;
        else { fprintf(stderr, "ulk verify: one capture at a time ('%s' is extra)\n", a); return 2; }
    }
    if (!dict_path || !upload_path || !capture) {
        fprintf(stderr, "ulk verify: %s\n", !dict_path ? "--dict DICT is required" : !upload_path ? "--upload UPLOAD is required" : "no capture given");
        usage(stderr);
        return 2;
    }
    if (o.format >= 0 && !(o.rate_hz > 0)) {
        fprintf(stderr, "ulk verify: --format goes with --rate (a raw capture needs both)\n");
        return 2;
    }
    int ret = 2;
    ulk_diag *diag = ulk_diag_create();
    ulk_dict *dict = NULL;
    ulk_upload *u = NULL;
    cli_capture c;
    memset(&c, 0, sizeof c);
    const cli_word **acc = NULL;
    op *ops = NULL;
    cJSON *root = NULL;
    if (!diag) { fprintf(stderr, "ulk verify: out of memory\n"); return 2; }
    if (ulk_dict_load(dict_path, &dict, diag) < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk verify: cannot use dictionary %s\n", dict_path);
        goto out;
    }
    ulk_diag_clear(diag);
    if (ulk_upload_read(upload_path, &u, diag) < 0) {
        ulk_diag_print(diag, stderr);
        fprintf(stderr, "ulk verify: cannot use upload %s\n", upload_path);
        goto out;
    }
    if (strcmp(u->dict_sha256, dict->sha256) != 0) {
        fprintf(stderr,
                "ulk verify: %s was compiled with dictionary %s %s (sha256 %.16s...), not with %s (%s %s, sha256 "
                "%.16s...); verify against the dictionary it was made with\n",
                upload_path, u->dict_name ? u->dict_name : "?", u->dict_version ? u->dict_version : "", u->dict_sha256,
                dict_path, dict->name ? dict->name : "?", dict->version ? dict->version : "", dict->sha256);
        goto out;
    }
    if (cli_capture_decode(dict, capture, &o, &c, diag) < 0) {
        ulk_diag_print(diag, stderr);
        goto out;
    }
    size_t na = 0, nrej = 0;
    acc = ulk_calloc(c.n + 1, sizeof *acc);
    if (!acc) { fprintf(stderr, "ulk verify: out of memory\n"); goto out; }
    for (size_t i = 0; i < c.n; i++) {
        if (c.w[i].dec.status == ULK_WORD_ACCEPTED) acc[na++] = &c.w[i];
        else nrej++;
    }
    size_t nops = align(u, acc, na, &ops);
    if (!ops) { fprintf(stderr, "ulk verify: out of memory\n"); goto out; }
    size_t nmatch = 0, nmiss = 0, nextra = 0, nchg = 0;
    for (size_t k = 0; k < nops; k++) {
        if (ops[k].k == OP_MATCH) nmatch++;
        else if (ops[k].k == OP_MISSING) nmiss++;
        else if (ops[k].k == OP_EXTRA) nextra++;
        else nchg++;
    }
    int good = nmiss == 0 && nextra == 0 && nchg == 0;
    char line[4096];
    if (json) {
        root = cJSON_CreateObject();
        cJSON_AddBoolToObject(root, "match", good);
        cJSON_AddNumberToObject(root, "expected", (double)u->n_cmds);
        cJSON_AddNumberToObject(root, "accepted", (double)na);
        cJSON_AddNumberToObject(root, "matched", (double)nmatch);
        cJSON *jm = cJSON_AddArrayToObject(root, "missing"), *je = cJSON_AddArrayToObject(root, "extra");
        cJSON *jc = cJSON_AddArrayToObject(root, "changed"), *jr = cJSON_AddArrayToObject(root, "rejected");
        for (size_t k = 0; k < nops; k++) {
            const op *p = &ops[k];
            cJSON *e = cJSON_CreateObject();
            if (p->k == OP_MATCH) { cJSON_Delete(e); continue; }
            if (p->k == OP_MISSING || p->k == OP_CHANGED) {
                const ulk_upload_cmd *uc = &u->cmds[p->ui];
                char hx[2 * ULK_TCF_MAX_OCTETS + 1];
                sent_hex(u, uc, hx, sizeof hx);
                cJSON_AddNumberToObject(e, "index", (double)(p->ui + 1));
                cJSON_AddNumberToObject(e, "line", uc->line);
                cJSON_AddStringToObject(e, "mnemonic", uc->mnemonic);
                cJSON_AddStringToObject(e, p->k == OP_CHANGED ? "hex_sent" : "hex", hx);
            }
            if (p->k == OP_EXTRA || p->k == OP_CHANGED) {
                const cli_word *w = acc[p->ai];
                cJSON_AddNumberToObject(e, "start_s", w->dw.start_s);
                if (p->k == OP_EXTRA) cJSON_AddStringToObject(e, "mnemonic", w->dec.cmd->mnemonic);
                cJSON_AddStringToObject(e, p->k == OP_CHANGED ? "hex_received" : "hex", w->tc ? w->data_hex : w->dec.hex);
                if (w->tc) {
                    cJSON_AddNumberToObject(e, "sequence_count", w->seq_count);
                    cJSON_AddNumberToObject(e, "frame_sequence", w->frame_seq);
                }
            }
            if (p->k == OP_CHANGED) {
                const ulk_upload_cmd *uc = &u->cmds[p->ui];
                const cli_word *w = acc[p->ai];
                cJSON *f = cJSON_AddArrayToObject(e, "fields");
                for (int a = 0; a < w->dec.n_args && a < uc->n_args; a++) {
                    if (uc->args[a].raw == w->dec.args[a].raw) continue;
                    char sent[64];
                    ulk_arg_format(w->dec.args[a].arg, uc->args[a].raw, sent, sizeof sent);
                    cJSON *fo = cJSON_CreateObject();
                    cJSON_AddStringToObject(fo, "field", w->dec.args[a].arg->name);
                    cJSON_AddStringToObject(fo, "sent", sent);
                    cJSON_AddStringToObject(fo, "received", w->dec.args[a].text);
                    cJSON_AddItemToArray(f, fo);
                }
            }
            cJSON_AddItemToArray(p->k == OP_MISSING ? jm : p->k == OP_EXTRA ? je : jc, e);
        }
        for (size_t i = 0; i < c.n; i++) {
            if (c.w[i].dec.status == ULK_WORD_ACCEPTED) continue;
            cJSON *e = cJSON_CreateObject();
            cJSON_AddNumberToObject(e, "start_s", c.w[i].dw.start_s);
            cJSON_AddStringToObject(e, "reason", c.w[i].dec.reason);
            cJSON_AddStringToObject(e, "reject", ulk_reject_name(c.w[i].dec.reject));
            cJSON_AddStringToObject(e, "hex", c.w[i].tc ? c.w[i].data_hex : c.w[i].dec.hex);
            cJSON_AddItemToArray(jr, e);
        }
        char *txt = cJSON_Print(root);
        if (!txt) { fprintf(stderr, "ulk verify: out of memory\n"); goto out; }
        printf("%s\n", txt);
        cJSON_free(txt);
    } else {
        printf("%s against %s: %zu upload word(s), %zu accepted, %zu rejected in the capture\n", capture, upload_path,
               u->n_cmds, na, nrej);
        for (size_t k = 0; k < nops; k++) {
            const op *p = &ops[k];
            if (p->k == OP_MISSING) {
                const ulk_upload_cmd *uc = &u->cmds[p->ui];
                printf("  missing  word %zu (line %d): %s\n", p->ui + 1, uc->line, uc->mnemonic);
            } else if (p->k == OP_EXTRA) {
                ulk_decoded_format(&acc[p->ai]->dec, line, sizeof line);
                printf("  extra    at %.6f s: %s\n", acc[p->ai]->dw.start_s, line);
            } else if (p->k == OP_CHANGED) {
                const ulk_upload_cmd *uc = &u->cmds[p->ui];
                const cli_word *w = acc[p->ai];
                printf("  changed  word %zu (line %d) at %.6f s: %s\n", p->ui + 1, uc->line, w->dw.start_s, uc->mnemonic);
                if (w->tc && (uc->seq_count != w->seq_count || uc->frame_seq != w->frame_seq))
                    printf("           packet count / N(S): sent %u / %u, received %u / %u\n", uc->seq_count, uc->frame_seq,
                           w->seq_count, w->frame_seq);
                for (int a = 0; a < w->dec.n_args && a < uc->n_args; a++) {
                    if (uc->args[a].raw == w->dec.args[a].raw) continue;
                    char sent[64];
                    ulk_arg_format(w->dec.args[a].arg, uc->args[a].raw, sent, sizeof sent);
                    printf("           %s: sent %s, received %s\n", w->dec.args[a].arg->name, sent, w->dec.args[a].text);
                }
            }
        }
        for (size_t i = 0; i < c.n; i++)
            if (c.w[i].dec.status != ULK_WORD_ACCEPTED)
                printf("  rejected at %.6f s: %s [hex %s]\n", c.w[i].dw.start_s, c.w[i].dec.reason,
                       c.w[i].tc ? c.w[i].data_hex : c.w[i].dec.hex);
        if (good)
            printf("VERIFIED: the capture holds exactly the upload's %zu word(s), in order\n", u->n_cmds);
        else
            printf("NOT VERIFIED: %zu matched, %zu missing, %zu extra, %zu changed, %zu rejected\n", nmatch, nmiss,
                   nextra, nchg, nrej);
    }
    ret = good ? 0 : 1;
out:
    cJSON_Delete(root);
    ulk_free(ops);
    ulk_free(acc);
    cli_capture_free(&c);
    ulk_upload_destroy(u);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(diag);
    return ret;
}
