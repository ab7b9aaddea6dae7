/* src/dsp/rx_sink.h - what the receiver (src/dsp/rx.c) hands a link profile's unit decoder
 * (ulk_profile_ops, "receiver"): the receiver's options, the estimates the profile fills, and
 * the callbacks by which the profile queues its events. Internal to the library: the profile
 * table (include/ulk/profile.h) names it by its struct tag only, as it does the upload
 * writer's text buffer, so the interface includes nothing above the dictionary layer.
 *
 * Why callbacks and not a queue of the profile's own: events wait in one queue (rx.c) until
 * pulled, in the order they were found, whichever stage found them (a warning of the carrier
 * recovery, a CLTU, a notice of a receive state created), and the totals are counted there.
 */
#ifndef ULK_RX_SINK_H
#define ULK_RX_SINK_H

#include "ulk/decode.h"
#include "ulk/rx.h"

struct ulk_rx_sink {
    /* The receiver's options as the unit decoder sees them: fs_hz is the rate of the samples
     * pushed to it (after a complex capture's decimation), name the capture's name for
     * messages, on_soft / user the caller's soft-symbol hook (plots), keys_path and
     * state_path a secured link's key file and receive state. */
    const ulk_rx_options *opt;
    /* The profile fills: demod at finish (ulk_demod_get_estimates), secured and authenticated
     * at create, state_saved at commit. */
    ulk_rx_estimates *est;
    void *rx;                 /* the first argument of every callback */
    /* A received unit (ULK_RX_WORD or ULK_RX_CLTU in ev->kind): ev and its interpretation
     * dec are copied into the queue (ev->dec is set to the copy). hex: the unit's identity
     * text, copied (NULL: dec->hex). sec_refused: a secured frame the security check refused
     * (counted apart from damage). Nothing is queued once the receiver has failed. Returns 0,
     * or ULK_ENOMEM (the receiver has then failed). */
    int (*unit)(void *rx, const ulk_rx_event *ev, const ulk_decoded *dec, const char *hex, int sec_refused);
    /* One line of information (ULK_RX_NOTICE), copied. Returns 0 or ULK_ENOMEM. */
    int (*notice)(void *rx, const char *line);
    /* The unit decoder failed during a push or finish (status < 0, e.g. ULK_ENOMEM): the
     * receiver fails from now on and queues no more units. */
    void (*fail)(void *rx, int status);
};

#endif
