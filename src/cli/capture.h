/* src/cli/capture.h - shared by `ulk decode` and `ulk verify`: options that name a capture,
 * and one pass of the blind demodulator plus word interpretation over it. For a ccsds-tc
 * dictionary each "word" is a CLTU (ulk/tc_decode.h): dec holds its command (system = APID)
 * and the tc members its packet's identity and data field. */
#ifndef ULK_CLI_CAPTURE_H
#define ULK_CLI_CAPTURE_H

#include <stddef.h>

#include "ulk/carrier.h"
#include "ulk/decode.h"
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/error.h"

typedef struct {
    double rate_hz;        /* --rate (raw captures); 0 = from the file or its .sigmf-meta */
    int format;            /* ULK_FMT_F32 / ULK_FMT_S16, -1 = not given */
    int channel;           /* --channel, -1 = refuse multi-channel files */
    /* complex captures (composite carrier, docs/carrier.md): */
    int iq;                /* --iq: a two-channel WAV is I (left) and Q (right) */
    const char *mode;      /* --mode NAME: the carrier mode; NULL = from the SigMF metadata */
    double max_offset_hz;  /* --max-offset HZ: coarse carrier search +-; 0 = 5000 */
    const char *voice_path;/* decode --voice OUT.wav: FM voice demodulated to a WAV file */
    int ranging;           /* decode --ranging: code phase of the ranging channel */
    /* ccsds-tc with link.tc.security (ulk/sdls.h, docs/sdls.md): */
    const char *keys_path; /* --keys FILE: authenticate every frame; NULL = secured, not authenticated */
    const char *state_path;/* --state STATE: receive-side anti-replay window, read and saved back */
    ulk_demod_soft_fn on_soft; /* optional, for plots */
    void (*on_word)(double t_s, double margin, int accepted, void *user);
    void *user;
} cli_capture_opts;

typedef struct {
    ulk_demod_word dw;       /* ccsds-tc: start_s, polarity, margin = 1 - corrected/codeblocks */
    ulk_decoded dec;
    /* ccsds-tc only: */
    int tc;
    uint16_t seq_count;      /* packet sequence count */
    uint8_t frame_seq;       /* N(S) */
    int n_corrected;         /* codeblocks with one bit corrected */
    char *data_hex;          /* packet data field (opcode, arguments) in hex, "" when not read; owned */
    int secured;             /* the frame carried SDLS fields: */
    int sec_verdict;         /* ulk_sdls_verdict: 0 authenticated, 1 not checked (no keys), else rejected */
    unsigned spi;
    unsigned long long iv_counter;
} cli_word;

typedef struct {
    cli_word *w;
    size_t n;
    ulk_demod_estimates est;
    double fs_hz;
    double duration_s;
    /* complex captures only: */
    int complex_;            /* 1 when the capture was read as I/Q */
    char mode[64];           /* carrier mode used */
    double m_data;           /* data index the quadrature was divided by (0: data off in the mode) */
    double loop_bw_hz;       /* B_L of the carrier loop */
    ulk_crec_status crec;    /* carrier recovery: coarse and tracked offset */
    int has_ranging;
    ulk_ranging_result ranging;
    int voice_rate_hz;       /* voice WAV written (0: not asked) */
    uint64_t voice_samples;
    int secured;             /* the link has security: */
    int authenticated;       /* 1 when --keys was given (frames verified) */
} cli_capture;

/* Parses one capture option at argv[*i] ("--rate", "--format", "--channel", "--iq", "--mode",
 * "--max-offset", "--keys", "--state"); returns 1 when it
 * was one (and advances *i past its value), 0 when not, -1 on a bad value (message printed,
 * prefixed with cmd). */
int cli_capture_opt(const char *cmd, int argc, char **argv, int *i, cli_capture_opts *o);

/* Reads path, demodulates with dict's link and interprets every word. With o->keys_path the
 * frames of a secured link are authenticated (and o->state_path's receive window used and
 * saved back atomically after a successful decode; created with a notice when absent). A complex capture (a
 * .cf32/.ci16 or complex .sigmf-data, or a two-channel WAV with o->iq) goes through carrier
 * recovery first: the data channel is the quadrature of the de-rotated signal (sin of the
 * composite phase) divided by the mode's data index;
 * with o->voice_path / o->ranging the voice WAV is written (atomically, only on success) and
 * the code phase measured. Returns 0, or a
 * negative status with the reason in diag. The caller frees out with cli_capture_free. */
int cli_capture_decode(const ulk_dict *dict, const char *path, const cli_capture_opts *o, cli_capture *out,
                       ulk_diag *diag);
void cli_capture_free(cli_capture *c);

/* What the SigMF metadata beside a raw capture says: *complex_ = 1 for a .cf32/.ci16 name or a
 * complex core:datatype, mode = global "ulk:carrier".mode ("" when absent; ulk modulate
 * --carrier and ulk impair record it). Quietly nothing when there is no readable metadata
 * (the reader reports real problems). Returns 0, or ULK_ENOMEM. */
int cli_sniff_meta(const char *path, int *complex_, char *mode, size_t mode_len);

#endif
