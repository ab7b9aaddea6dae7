/* src/cli/capture.c - one pass over a capture: reader -> blind demodulator -> dictionary. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture.h"
#include "ulk/sampleio.h"
#include "ulk/tc_decode.h"
#include "util.h"

#define CHUNK 65536

int cli_capture_opt(const char *cmd, int argc, char **argv, int *i, cli_capture_opts *o)
{
    const char *a = argv[*i];
    int is_rate = !strcmp(a, "--rate"), is_fmt = !strcmp(a, "--format"), is_ch = !strcmp(a, "--channel");
    if (!is_rate && !is_fmt && !is_ch) return 0;
    if (*i + 1 >= argc) { fprintf(stderr, "ulk %s: %s needs a value\n", cmd, a); return -1; }
    const char *v = argv[++*i];
    char *end;
    if (is_rate) {
        ulk_ratio r;
        if (ulk_ratio_parse(v, &r) < 0 || r.num <= 0) {
            fprintf(stderr, "ulk %s: --rate '%s' is not a positive sample rate in Hz\n", cmd, v);
            return -1;
        }
        o->rate_hz = ulk_ratio_to_double(r);
    } else if (is_fmt) {
        if (!strcmp(v, "f32")) o->format = ULK_FMT_F32;
        else if (!strcmp(v, "s16")) o->format = ULK_FMT_S16;
        else { fprintf(stderr, "ulk %s: --format '%s': expected f32 or s16\n", cmd, v); return -1; }
    } else {
        long ch = strtol(v, &end, 10);
        if (*end || ch < 0 || ch > 255) {
            fprintf(stderr, "ulk %s: --channel '%s': expected a channel number 0..255\n", cmd, v);
            return -1;
        }
        o->channel = (int)ch;
    }
    return 1;
}

typedef struct {
    const ulk_dict *dict;
    const cli_capture_opts *o;
    cli_capture *c;
    int err;
    ulk_tc_decoder *tc;      /* ccsds-tc: the CLTU decoder the soft symbols go to */
    size_t nb;
    double bt[1024];
    float bv[1024];
} run_ctx;

/* ccsds-tc: one CLTU as a cli_word. */
static void on_tc_unit(const ulk_tc_unit *t, void *user)
{
    run_ctx *x = user;
    cli_capture *c = x->c;
    if (x->err) return;
    cli_word *nw = ulk_realloc(c->w, (c->n + 1) * sizeof *nw);
    if (!nw) { x->err = ULK_ENOMEM; return; }
    c->w = nw;
    cli_word *cw = &c->w[c->n];
    memset(cw, 0, sizeof *cw);
    cw->data_hex = ulk_strdup(t->data_hex);
    if (!cw->data_hex) { x->err = ULK_ENOMEM; return; }
    c->n++;
    cw->tc = 1;
    cw->dw.start_s = t->start_s;
    cw->dw.polarity = t->polarity;
    cw->dw.margin = t->n_codeblocks ? 1.0 - (double)t->n_corrected / t->n_codeblocks : 0;
    cw->seq_count = t->seq_count;
    cw->frame_seq = t->frame_seq;
    cw->n_corrected = t->n_corrected;
    ulk_decoded *d = &cw->dec;
    d->status = t->status == ULK_TC_ACCEPTED ? ULK_WORD_ACCEPTED : ULK_WORD_REJECTED;
    d->reject = t->reject;
    snprintf(d->reason, sizeof d->reason, "%s", t->reason);
    d->cmd = t->cmd;
    d->system = t->apid;
    d->opcode = t->opcode;
    if (t->n_args > ULK_DECODE_MAX_ARGS && d->status == ULK_WORD_ACCEPTED) {
        d->status = ULK_WORD_REJECTED;
        d->reject = ULK_REJ_LENGTH;
        snprintf(d->reason, sizeof d->reason, "more than %d arguments", ULK_DECODE_MAX_ARGS);
    }
    d->n_args = t->n_args < ULK_DECODE_MAX_ARGS ? t->n_args : ULK_DECODE_MAX_ARGS;
    for (int k = 0; k < d->n_args; k++) {
        d->args[k].arg = t->args[k].arg;
        d->args[k].raw = t->args[k].raw;
        d->args[k].eng = t->args[k].eng;
        d->args[k].label = t->args[k].label;
        memcpy(d->args[k].text, t->args[k].text, sizeof d->args[k].text);
    }
    snprintf(d->hex, sizeof d->hex, "%.32s", t->data_hex);
    if (x->o->on_word) x->o->on_word(t->start_s, cw->dw.margin, d->status == ULK_WORD_ACCEPTED, x->o->user);
}

static void tc_flush(run_ctx *x)
{
    if (x->nb && ulk_tc_decoder_push(x->tc, x->bt, x->bv, x->nb) < 0 && !x->err) x->err = ULK_ENOMEM;
    x->nb = 0;
}

static void on_tc_soft(double t, float v, void *user)
{
    run_ctx *x = user;
    if (x->o->on_soft) x->o->on_soft(t, v, x->o->user);
    x->bt[x->nb] = t;
    x->bv[x->nb] = v;
    if (++x->nb == 1024) tc_flush(x);
}

static void on_word(const ulk_demod_word *w, void *user)
{
    run_ctx *x = user;
    cli_capture *c = x->c;
    if (x->err) return;
    cli_word *nw = ulk_realloc(c->w, (c->n + 1) * sizeof *nw);
    if (!nw) { x->err = ULK_ENOMEM; return; }
    c->w = nw;
    cli_word *cw = &c->w[c->n++];
    memset(cw, 0, sizeof *cw);
    cw->dw = *w;
    ulk_decode_word(x->dict, &w->word, &cw->dec);
    if (x->o->on_word) x->o->on_word(w->start_s, w->margin, cw->dec.status == ULK_WORD_ACCEPTED, x->o->user);
}

static void on_soft(double t, float v, void *user)
{
    run_ctx *x = user;
    x->o->on_soft(t, v, x->o->user);
}

int cli_capture_decode(const ulk_dict *dict, const char *path, const cli_capture_opts *o, cli_capture *out,
                       ulk_diag *diag)
{
    memset(out, 0, sizeof *out);
    ulk_sample_info hint;
    memset(&hint, 0, sizeof hint);
    hint.fs_hz = o->rate_hz;
    hint.format = o->format == ULK_FMT_S16 ? ULK_FMT_S16 : ULK_FMT_F32;
    hint.container = ULK_CONTAINER_RAW;
    hint.channels = 1;
    ulk_reader *r = NULL;
    int rc = ulk_reader_open(path, o->rate_hz > 0 ? &hint : NULL, o->channel, &r, diag);
    if (rc < 0) return rc;
    const ulk_sample_info *info = ulk_reader_info(r);
    out->fs_hz = info->fs_hz;
    run_ctx *x = ulk_calloc(1, sizeof *x); /* holds the soft-symbol batch: not on the stack */
    if (!x) {
        ulk_reader_close(r);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    }
    x->dict = dict;
    x->o = o;
    x->c = out;
    ulk_demod_options dopt;
    memset(&dopt, 0, sizeof dopt);
    dopt.on_word = on_word;
    dopt.on_soft = o->on_soft ? on_soft : NULL;
    dopt.user = x;
    ulk_demod *d = NULL;
    ulk_link front = dict->link;
    if (dict->link.profile == ULK_PROFILE_CCSDS_TC) {
        /* The shared front end gives soft symbols; the CLTU decoder does the rest. */
        ulk_tc_front_end_link(&dict->link, &front);
        dopt.on_word = NULL;
        dopt.on_soft = on_tc_soft;
        rc = ulk_tc_decoder_create(dict, on_tc_unit, x, &x->tc, diag);
        if (rc < 0) {
            ulk_free(x);
            ulk_reader_close(r);
            return rc;
        }
    }
    rc = ulk_demod_create(&front, info->fs_hz, &dopt, &d, diag);
    if (rc < 0) {
        ulk_tc_decoder_destroy(x->tc);
        ulk_free(x);
        ulk_reader_close(r);
        return rc;
    }
    float *buf = ulk_malloc(CHUNK * sizeof *buf);
    if (!buf) { rc = ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path); goto done; }
    uint64_t total = 0;
    for (;;) {
        long got = ulk_reader_read(r, buf, CHUNK);
        if (got < 0) { rc = ulk_fail(diag, (int)got, "%s: read error after %llu samples", path, (unsigned long long)total); goto done; }
        if (got == 0) break;
        total += (uint64_t)got;
        rc = ulk_demod_push(d, buf, (size_t)got);
        if (rc < 0 || x->err) { rc = ulk_fail(diag, rc < 0 ? rc : x->err, "%s: out of memory while decoding", path); goto done; }
    }
    rc = ulk_demod_finish(d);
    if (rc >= 0 && x->tc) {
        tc_flush(x);
        if (ulk_tc_decoder_finish(x->tc) < 0 && !x->err) x->err = ULK_ENOMEM;
    }
    if (rc < 0 || x->err) { rc = ulk_fail(diag, rc < 0 ? rc : x->err, "%s: out of memory while decoding", path); goto done; }
    ulk_demod_get_estimates(d, &out->est);
    out->duration_s = (double)total / info->fs_hz;
    rc = 0;
done:
    ulk_free(buf);
    ulk_demod_destroy(d);
    ulk_tc_decoder_destroy(x->tc);
    ulk_free(x);
    ulk_reader_close(r);
    if (rc < 0) cli_capture_free(out);
    return rc;
}

void cli_capture_free(cli_capture *c)
{
    if (!c) return;
    for (size_t i = 0; i < c->n && c->w; i++) ulk_free(c->w[i].data_hex);
    ulk_free(c->w);
    c->w = NULL;
    c->n = 0;
}
