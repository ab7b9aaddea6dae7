/* src/profiles/ccsds/tc_rx.c - the CCSDS telecommand profile's receiver (ulk_profile_ops,
 * "receiver"; docs/spec/ccsds-tc.md section 4): the blind symbol front end
 * (ulk_demod_create_symbols, one symbol per channel bit), its soft symbols in batches to the
 * CLTU decoder (tc_decode.c), every CLTU turned into a receiver event; on a secured link
 * (link.tc.security, docs/sdls.md) the keys, the receive-side anti-replay state and the
 * verifier the CLTU decoder calls.
 */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "rx_sink.h"
#include "ulk/sdls.h"
#include "ulk/tc_decode.h"
#include "util.h"

#define SOFT_BATCH 1024

typedef struct {
    const ulk_dict *dict;
    const struct ulk_rx_sink *sink;
    ulk_diag *diag;
    ulk_demod *demod;
    ulk_tc_decoder *tc;       /* the CLTU decoder the soft symbols go to */
    size_t nb;                /* soft symbols batched for tc */
    double bt[SOFT_BATCH];
    float bv[SOFT_BATCH];
    /* with link.tc.security: */
    ulk_sdls_keys *keys;
    ulk_sdls_state *state;    /* receive-side window, saved back at commit */
    ulk_sdls_rx *srx;         /* the verifier the CLTU decoder calls */
    int lock_fd;              /* the state's lock, held from create to destroy (-1: none) */
    char *state_path;
} tc_rx;

/* A CLTU as a receiver event: its interpretation in the receiver's terms (the sub-bit
 * decoder's status and reject kinds; the APID in system). */
static void on_tc_unit(const ulk_tc_unit *t, void *user)
{
    tc_rx *s = user;
    ulk_rx_event e;
    memset(&e, 0, sizeof e);
    e.kind = ULK_RX_CLTU;
    e.dw.start_s = t->start_s;
    e.dw.polarity = t->polarity;
    e.dw.margin = t->n_codeblocks ? 1.0 - (double)t->n_corrected / t->n_codeblocks : 0;
    e.seq_count = t->seq_count;
    e.frame_seq = t->frame_seq;
    e.n_corrected = t->n_corrected;
    e.secured = t->secured;
    e.sec_verdict = t->sec_verdict;
    e.spi = t->spi;
    e.iv_counter = t->iv_counter;
    ulk_decoded d;
    memset(&d, 0, sizeof d);
    d.status = t->status == ULK_TC_ACCEPTED ? ULK_WORD_ACCEPTED : ULK_WORD_REJECTED;
    d.reject = t->reject;
    snprintf(d.reason, sizeof d.reason, "%s", t->reason);
    d.cmd = t->cmd;
    d.system = t->apid;
    d.opcode = t->opcode;
    if (t->n_args > ULK_DECODE_MAX_ARGS && d.status == ULK_WORD_ACCEPTED) {
        d.status = ULK_WORD_REJECTED;
        d.reject = ULK_REJ_LENGTH;
        snprintf(d.reason, sizeof d.reason, "more than %d arguments", ULK_DECODE_MAX_ARGS);
    }
    d.n_args = t->n_args < ULK_DECODE_MAX_ARGS ? t->n_args : ULK_DECODE_MAX_ARGS;
    for (int k = 0; k < d.n_args; k++) {
        d.args[k].arg = t->args[k].arg;
        d.args[k].raw = t->args[k].raw;
        d.args[k].eng = t->args[k].eng;
        d.args[k].label = t->args[k].label;
        memcpy(d.args[k].text, t->args[k].text, sizeof d.args[k].text);
    }
    snprintf(d.hex, sizeof d.hex, "%.32s", t->data_hex);
    int sec_refused = t->secured && t->sec_verdict != ULK_SEC_ACCEPTED && t->sec_verdict != ULK_SEC_UNCHECKED &&
                      d.status != ULK_WORD_ACCEPTED;
    s->sink->unit(s->sink->rx, &e, &d, t->data_hex, sec_refused);
}

static void tc_flush(tc_rx *s)
{
    if (s->nb && ulk_tc_decoder_push(s->tc, s->bt, s->bv, s->nb) < 0) s->sink->fail(s->sink->rx, ULK_ENOMEM);
    s->nb = 0;
}

static void on_tc_soft(double t, float v, void *user)
{
    tc_rx *s = user;
    const ulk_rx_options *o = s->sink->opt;
    if (o->on_soft) o->on_soft(t, v, o->user);
    s->bt[s->nb] = t;
    s->bv[s->nb] = v;
    if (++s->nb == SOFT_BATCH) tc_flush(s);
}

/* Keys, receive state and verifier of a secured link (sa, docs/sdls.md); the CLTU decoder
 * verifies every frame through ulk_tc_decoder_set_security. Without keys a secured frame is
 * reported secured, not authenticated. */
static int tc_rx_security(tc_rx *s, const ulk_sdls_sa *sa)
{
    const ulk_rx_options *o = s->sink->opt;
    s->sink->est->secured = 1;
    if (!o->keys_path) {
        if (o->state_path)
            return ulk_fail(s->diag, ULK_EINVAL, "--state needs --keys (only authenticated frames move the window)");
        return 0;
    }
    int created = 0, rc = ulk_sdls_keys_load(o->keys_path, &s->keys, s->diag);
    if (rc >= 0 && o->state_path) {
        s->state_path = ulk_strdup(o->state_path);
        if (!s->state_path) return ulk_fail(s->diag, ULK_ENOMEM, "out of memory");
        /* held until destroy: two runs never read the same window */
        if ((s->lock_fd = ulk_sdls_state_lock(o->state_path, s->diag)) < 0) return s->lock_fd;
        rc = ulk_sdls_state_load(o->state_path, ULK_SDLS_RECEIVE, &s->state, &created, s->diag);
    }
    if (rc >= 0) rc = ulk_sdls_rx_create(sa, s->keys, s->state, &s->srx, s->diag);
    if (rc >= 0) rc = ulk_tc_decoder_set_security(s->tc, s->srx);
    if (rc < 0) return rc;
    s->sink->est->authenticated = 1;
    if (created) {
        char line[600];
        snprintf(line, sizeof line, "%s does not exist: a new receive-side state starts with no counter accepted for SPI %u",
                 o->state_path, (unsigned)sa->spi);
        if (s->sink->notice(s->sink->rx, line) < 0) return ulk_fail(s->diag, ULK_ENOMEM, "out of memory");
    }
    return 0;
}

int ulk_tc_rx_create(const ulk_dict *d, double fs_hz, const struct ulk_rx_sink *sink, void **state, ulk_diag *diag)
{
    *state = NULL;
    tc_rx *s = ulk_calloc(1, sizeof *s);
    if (!s) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    s->dict = d;
    s->sink = sink;
    s->diag = diag;
    s->lock_fd = -1;
    /* the CLTU decoder first, then the front end that feeds it, then the security that the
     * decoder verifies with (the order of the checks, and so of their messages) */
    ulk_demod_options dopt = {NULL, on_tc_soft, s, 0, 0};
    ulk_demod_symbols sym;
    ulk_tc_symbols(&d->link, &sym);
    int rc = ulk_tc_decoder_create(d, on_tc_unit, s, &s->tc, diag);
    if (rc >= 0) rc = ulk_demod_create_symbols(&sym, fs_hz, &dopt, &s->demod, diag);
    const ulk_sdls_sa *sa = ulk_profile_ccsds_tc.security(&d->link);
    if (rc >= 0 && sa) rc = tc_rx_security(s, sa);
    if (rc < 0) {
        ulk_tc_rx_destroy(s);
        return rc;
    }
    *state = s;
    return 0;
}

int ulk_tc_rx_push(void *state, const float *x, size_t n)
{
    tc_rx *s = state;
    return ulk_demod_push(s->demod, x, n);
}

int ulk_tc_rx_finish(void *state)
{
    tc_rx *s = state;
    int rc = ulk_demod_finish(s->demod);
    if (rc >= 0) {
        tc_flush(s);
        if (ulk_tc_decoder_finish(s->tc) < 0) s->sink->fail(s->sink->rx, ULK_ENOMEM);
    }
    ulk_demod_get_estimates(s->demod, &s->sink->est->demod);
    return rc;
}

/* The receive window moves only when the whole capture was decoded. */
int ulk_tc_rx_commit(void *state)
{
    tc_rx *s = state;
    if (!s->state) return 0;
    int rc = ulk_sdls_state_save(s->state, s->state_path, s->diag);
    if (rc < 0) return rc;
    s->sink->est->state_saved = 1;
    return 0;
}

void ulk_tc_rx_destroy(void *state)
{
    tc_rx *s = state;
    if (!s) return;
    ulk_demod_destroy(s->demod);
    ulk_tc_decoder_destroy(s->tc);
    ulk_sdls_rx_destroy(s->srx);
    ulk_sdls_state_destroy(s->state);
    ulk_sdls_keys_destroy(s->keys);
    ulk_sdls_state_unlock(s->lock_fd);
    ulk_free(s->state_path);
    ulk_free(s);
}
