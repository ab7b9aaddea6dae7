/* src/profiles/subbit/subbit_rx.c - the sub-bit profile's receiver (ulk_profile_ops,
 * "receiver"; docs/spec/subbit.md sections 3-5): the blind demodulator with its word stage
 * (ulk_demod_create on the dictionary's link), every word interpreted against the dictionary
 * (ulk_decode_demod_word) and handed on as a receiver event.
 */
#include <string.h>

#include "profiles.h"
#include "rx_sink.h"
#include "util.h"

typedef struct {
    const ulk_dict *dict;
    const struct ulk_rx_sink *sink;
    ulk_demod *demod;
} subbit_rx;

static void on_word(const ulk_demod_word *w, void *user)
{
    subbit_rx *s = user;
    ulk_rx_event e;
    memset(&e, 0, sizeof e);
    e.kind = ULK_RX_WORD;
    e.dw = *w;
    ulk_decoded d;
    memset(&d, 0, sizeof d);
    ulk_decode_demod_word(s->dict, w, &d); /* ambiguous alignment: rejected */
    s->sink->unit(s->sink->rx, &e, &d, NULL, 0);
}

static void on_soft(double t, float v, void *user)
{
    subbit_rx *s = user;
    s->sink->opt->on_soft(t, v, s->sink->opt->user);
}

int ulk_subbit_rx_create(const ulk_dict *d, double fs_hz, const struct ulk_rx_sink *sink, void **state, ulk_diag *diag)
{
    *state = NULL;
    subbit_rx *s = ulk_calloc(1, sizeof *s);
    if (!s) return ulk_fail(diag, ULK_ENOMEM, "out of memory");
    s->dict = d;
    s->sink = sink;
    ulk_demod_options dopt = {on_word, sink->opt->on_soft ? on_soft : NULL, s, 0, 0};
    int rc = ulk_demod_create(&d->link, fs_hz, &dopt, &s->demod, diag);
    if (rc < 0) {
        ulk_subbit_rx_destroy(s);
        return rc;
    }
    *state = s;
    return 0;
}

int ulk_subbit_rx_push(void *state, const float *x, size_t n)
{
    subbit_rx *s = state;
    return ulk_demod_push(s->demod, x, n);
}

int ulk_subbit_rx_finish(void *state)
{
    subbit_rx *s = state;
    int rc = ulk_demod_finish(s->demod);
    ulk_demod_get_estimates(s->demod, &s->sink->est->demod);
    return rc;
}

void ulk_subbit_rx_destroy(void *state)
{
    subbit_rx *s = state;
    if (!s) return;
    ulk_demod_destroy(s->demod);
    ulk_free(s);
}
