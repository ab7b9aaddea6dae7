/* ulk/profile.h - a link profile behind one small interface, so that compile, the upload
 * file, the symbol stream (modulator, timing table) and decode are written once and the
 * sub-bit profile (docs/spec/subbit.md) and the CCSDS telecommand profile
 * (docs/spec/ccsds-tc.md) are two tables of functions.
 *
 * Why this split: the two profiles differ in three places only.
 *   1. What one command becomes: a W-bit word, or a CLTU (packet -> frame -> randomizer ->
 *      BCH codeblocks); the CCSDS one carries state across commands (packet sequence count
 *      per APID, N(S) of sequence-controlled frames).
 *   2. What fills the gaps: the idle pattern I repeated, or alternating bits starting with
 *      0 on every run; and how many filler units a gap has before waits.
 *   3. How many channel bits a unit has (W, or 8 * CLTU octets).
 * Everything else is shared: the stream layout (filler unit_1 filler ... unit_N filler,
 * waits as max(count, ceil(t * filler_rate))), the expansion of a unit bit to symbols (Z or
 * O; for ccsds-tc Z = "0", O = "1", n = 1), the waveform, the timing-table columns and the
 * dictionary side of compiling (arguments by name -> raw fields -> packed bits).
 *
 * A profile never sees samples and never formats arguments: packed argument bits go in.
 * Besides encoding, the table holds what else differs between profiles: its words in
 * messages, its rates, its security association, its lines in the reports of compile,
 * inspect, validate and verify, the upload reader's check of a unit, and its receiver (the
 * unit decoder from samples to words or frames; the rest is listed
 * in DEVELOPERS.md, "How to add a link profile"). Each profile's table lives in its folder
 * under src/profiles/ and is registered in src/profiles/profile.c.
 *
 * Usage (what ulk_compile does):
 *     const ulk_profile_ops *p = ulk_profile_ops_for(d->link.profile);
 *     void *enc; p->encoder_create(&d->link, &enc);
 *     for each command: p->encode(enc, &req, &upload_cmd, err, sizeof err);
 *     p->encoder_destroy(enc);
 */
#ifndef ULK_PROFILE_H
#define ULK_PROFILE_H

#include <stddef.h>
#include <stdio.h>
#include <stdint.h>

#include "ulk/dict.h"
#include "ulk/link.h"

/* The interface sits in the dictionary layer (the lowest that uses it): the upload types of
 * the layers above are named by their struct tags only, so this header includes nothing
 * above it (scripts/check-layers.py), while the tables themselves live in src/profiles/. */
struct ulk_upload;
struct ulk_upload_cmd;

#ifdef __cplusplus
extern "C" {
#endif

/* One command to encode: what the shared compiler has resolved. */
typedef struct {
    uint32_t system_addr;      /* sub-bit: system address; ccsds-tc: APID */
    uint32_t opcode;
    const uint8_t *arg_bits;   /* packed arguments, 0/1, MSB first, dictionary order, no padding */
    size_t n_arg_bits;
} ulk_unit_request;

/* The upload writer's text buffer: opaque here, see ulk_profile_ops.upload_write_link. */
struct ulk_jbuf;
/* What the receiver gives a profile's unit decoder: opaque here, see ulk_profile_ops.rx_create. */
struct ulk_rx_sink;

/* Which filler run a gap is. */
typedef enum { ULK_GAP_FIRST = 0, ULK_GAP_BETWEEN = 1, ULK_GAP_LAST = 2 } ulk_gap;

typedef struct ulk_profile_ops {
    const char *name;          /* the dictionary's `profile:` value */
    ulk_profile id;

    /* ---- stream layout ---- */
    /* Filler units of a gap before waits: P, G, T idle patterns; or 8 * acquisition_octets,
     * 8 * idle_octets, 8 * idle_octets idle bits. */
    uint64_t (*gap_units)(const ulk_link *l, ulk_gap gap);
    /* Filler units per second, for waits (ceil(t * rate)): R_b, or R. */
    ulk_ratio (*filler_rate)(const ulk_link *l);
    /* Symbol j (0 <= j < n_subbits) of filler unit k (0-based from the start of its run):
     * I[j], or k & 1. */
    int (*filler_symbol)(const ulk_link *l, uint64_t k, int j);
    /* Largest packed argument width in bits a command may have: D, or what fills a
     * 1024-octet frame. */
    size_t (*max_arg_bits)(const ulk_link *l);

    /* ---- units ---- */
    /* Channel bits of command c's unit: W, or 8 * c->n_cltu. */
    uint64_t (*unit_bits)(const ulk_link *l, const struct ulk_upload_cmd *c);
    /* Bit i (0 = first sent) of command c's unit. i < unit_bits(l, c). */
    int (*unit_bit)(const ulk_link *l, const struct ulk_upload_cmd *c, uint64_t i);

    /* ---- encoder (state across one upload's commands) ---- */
    /* Returns 0 with *enc set (NULL is a valid state for a stateless profile), or
     * ULK_ENOMEM. */
    int (*encoder_create)(const ulk_link *l, void **enc);
    /* Builds the unit of one command into out (sub-bit: out->word; ccsds-tc: out->seq_count,
     * frame_seq, and the owned buffers cltu / frame, which ulk_upload_destroy frees).
     * Returns 0; ULK_ELIMIT or ULK_EINVAL with a one-line reason in err ("frame of 1031
     * octets exceeds 1024"); ULK_ENOMEM. */
    int (*encode)(void *enc, const ulk_unit_request *req, struct ulk_upload_cmd *out, char *err, size_t errlen);
    void (*encoder_destroy)(void *enc);  /* NULL does nothing */
    /* ---- words for messages and metadata ---- */
    const char *unit_noun;     /* what a command becomes, plural: "words", "CLTUs" */
    const char *symbol_noun;   /* what the timing table counts: "sub-bits", "channel bits" */
    /* Writes where the packed arguments of one command go, for "its arguments do not fit %s":
     * "the 16-bit argument field", "a 1024-octet TC frame (8152 argument bits at most)". */
    void (*arg_room)(const ulk_link *l, char *buf, size_t n);
    /* ---- sizes and rates ---- */
    /* Channel symbols per second on the subcarrier: R_b * n, or R. */
    ulk_ratio (*symbol_rate)(const ulk_link *l);
    /* Octets command c's unit takes in memory and in the modulator: ceil(W / 8), or the CLTU. */
    size_t (*unit_octets)(const ulk_link *l, const struct ulk_upload_cmd *c);
    /* The security association of a secured link (enabled), else NULL. */
    const ulk_sdls_sa *(*security)(const ulk_link *l);
    /* ---- reports ---- */
    /* The identity of command c as verify's report shows it: the word in hex, or the packet
     * data field (opcode and arguments) read from the frame, in hex. buf holds len chars. */
    void (*unit_hex)(const ulk_link *l, const struct ulk_upload_cmd *c, char *buf, size_t len);
    /* The annotation of command c (k-th, 0-based) in a SigMF file: "word 1, line 3, 1A2B",
     * "CLTU 1, line 3, APID 0x155 count 0 N(S) 0". */
    void (*unit_comment)(const ulk_link *l, const struct ulk_upload_cmd *c, size_t k, char *buf, size_t len);
    /* The lines of compile's summary that describe the units of an upload with n_symbols
     * channel symbols (two lines, each "  <what>  <figures>\n"). Returns what fprintf returns
     * (negative on a write error). */
    int (*print_units)(FILE *out, const struct ulk_upload *u, uint64_t n_symbols);
    /* `ulk inspect`: every unit of upload u with its fields named (path is the name shown),
     * or the same as one JSON document. Return 0, ULK_ENOMEM, or ULK_EIO when out failed. */
    int (*inspect_text)(FILE *out, const char *path, const struct ulk_upload *u);
    int (*inspect_json)(FILE *out, const struct ulk_upload *u);
    /* `ulk validate`: the summary of dictionary d (its link profile's figures), as text, or
     * as a cJSON object (a cJSON *; NULL when out of memory) the caller owns. */
    void (*summary_text)(const ulk_dict *d, FILE *out);
    void *(*summary_json)(const ulk_dict *d);
    /* verify: the scheduled start in seconds of every unit of u (n_cmds >= 1), malloc'd
     * (ulk_free), for breaking ties between equal alignments; NULL when out of memory or the
     * rates are unusable. The operation itself is NULL for a profile without a time preference
     * (ccsds-tc: CLTUs are aligned by content alone). */
    double *(*unit_start_times)(const struct ulk_upload *u);
    /* ---- upload writer ---- */
    /* The link object of an upload file (",\n  \"link\": {...},\n"), and the end of command
     * c's record after its arguments ("],\n ... }"), into the writer's text buffer (opaque
     * here; the library's internal src/io/upload_text.h). */
    void (*upload_write_link)(const ulk_link *l, struct ulk_jbuf *b);
    void (*upload_write_unit)(const ulk_link *l, const struct ulk_upload_cmd *c, struct ulk_jbuf *b);
    /* ---- upload reader ---- */
    /* What ulk_profile_check_unit does for this profile; NULL when the reader checks the
     * unit itself (a sub-bit word is read field by field). */
    int (*check_unit)(const ulk_link *l, const struct ulk_upload_cmd *c, char *err, size_t errlen);
    /* ---- receiver ---- */
    /* The unit decoder of the receiver (ulk/rx.h, src/dsp/rx.c): samples of the data channel
     * in, words or frames out. It owns its blind front end (ulk/demod.h: the sub-bit
     * demodulator with its word stage, or the symbol front end) and reports through sink
     * (src/dsp/rx_sink.h, internal: the receiver's options, its estimates, and the callbacks
     * that queue events). rx_create: for dictionary d at fs_hz; a secured link's keys and
     * receive state are set up here (a receive state created is a notice). Returns 0 with
     * *state, or a negative status with the reason in diag (ULK_EINVAL, ULK_ELIMIT: the
     * sample rate; ULK_EIO, ULK_EPARSE: key or state file; ULK_ENOMEM); state and diag
     * are kept until rx_destroy. */
    int (*rx_create)(const ulk_dict *d, double fs_hz, const struct ulk_rx_sink *sink, void **state, ulk_diag *diag);
    /* n samples (full scale 1.0). Returns 0 or the front end's sticky negative status. */
    int (*rx_push)(void *state, const float *x, size_t n);
    /* End of the samples: the last units reported, sink->est->demod filled. Returns 0 or a
     * negative status. */
    int (*rx_finish)(void *state);
    /* The whole capture was decoded: what the profile keeps across captures is saved (the
     * receive-side anti-replay window), sink->est->state_saved set. Returns 0 or a negative
     * status (reason in diag). NULL for a profile that keeps nothing. */
    int (*rx_commit)(void *state);
    void (*rx_destroy)(void *state); /* NULL does nothing */
} ulk_profile_ops;

/* The table of a profile; NULL for an unknown id. */
const ulk_profile_ops *ulk_profile_ops_for(ulk_profile id);
/* The table of l's profile, for a link the dictionary loader or upload reader made (its
 * profile is one of the registered ones). */
const ulk_profile_ops *ulk_profile_of(const ulk_link *l);

/* Rebuilds what command c's unit must be from its fields (system address, opcode, argument
 * raw values, and for ccsds-tc the sequence count and N(S)) and compares: 0 when c's unit is
 * exactly that, else ULK_EPARSE with the first difference in err. For the upload reader. */
int ulk_profile_check_unit(const ulk_link *l, const struct ulk_upload_cmd *c, char *err, size_t errlen);

#ifdef __cplusplus
}
#endif
#endif
