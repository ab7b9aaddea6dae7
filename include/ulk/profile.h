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
 * Besides encoding, the table holds what else differs between profiles: its dictionary
 * section (parse, rules, canonical form), its words in messages, its rates, its security
 * association and compile's session over it (keys, counters), its lines in the reports of
 * compile, inspect, validate and verify, its
 * records in the upload file (write and read back), and its receiver (the unit decoder from
 * samples to words or frames); DEVELOPERS.md, "How to add a link profile", lists them. Each
 * profile's table lives in its folder
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
/* The room unit_hex needs at most, with its NUL: a unit's identity of up to 1024 octets in hex
 * (the longest any registered profile writes; each profile checks it fits at compile time). */
#define ULK_UNIT_HEX_CHARS (2 * 1024 + 1)
struct ulk_upload_cmd;
struct ulk_upload_arg;
/* The dictionary loader's and the upload reader's internals, named by struct tag only: the
 * loader's build context and canonical text (src/dict/dict_build.h), a node of the document
 * tree (src/core/doc.h), the upload reader and its JSON values (src/io/upload_read.h,
 * cJSON). A profile's dictionary and reader operations work through those private headers. */
struct ulk_dict_build;
struct ulk_text;
struct ulk_node;
struct ulk_rd;
struct cJSON;

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
struct ulk_text;
/* What the receiver gives a profile's unit decoder: opaque here, see ulk_profile_ops.rx_create. */
struct ulk_rx_sink;

/* Which filler run a gap is. */
typedef enum { ULK_GAP_FIRST = 0, ULK_GAP_BETWEEN = 1, ULK_GAP_LAST = 2 } ulk_gap;

typedef struct ulk_profile_ops {
    const char *name;          /* the dictionary's `profile:` value */
    ulk_profile id;

    /* ---- dictionary section ---- */
    /* The link section of a dictionary with this `profile:` (the first registered profile also
     * reads a link section without one). The loader has checked that link is a mapping and set
     * l->profile = id and l->amplitude = 1; link_parse fills the rest of the link through the
     * loader's helpers, reporting each finding with its file:line:col, and keeps what its
     * command checks below need in ulk_dict_build_state (zeroed before: nothing known). */
    void (*link_parse)(struct ulk_dict_build *b, struct ulk_node *link);
    /* A system's `address` node: read, checked and reported like the rest of the section;
     * 1 with *out set when it is valid. */
    int (*system_address)(struct ulk_dict_build *b, struct ulk_node *n, uint32_t *out);
    /* What the loader calls a system's address in its duplicate message: "address",
     * "address (APID)". */
    const char *address_noun;
    /* 1 when one bit error can turn a unit for one system into a unit for another (nothing
     * covers the address: a word); the loader then warns of addresses one bit apart. */
    int address_unprotected;
    /* A command's opcode v (>= 0): 1 when the profile's unit has room for it, else reported
     * at n and 0. */
    int (*opcode_fits)(struct ulk_dict_build *b, struct ulk_node *n, int64_t v);
    /* A command whose arguments all have a width: the packed width k->packed_bits against
     * the unit's room (argument field D, or a frame), reported at args. */
    void (*command_check)(struct ulk_dict_build *b, const ulk_command *k, struct ulk_node *args);
    /* The link object of the canonical form (docs/spec/dictionary.md section 6): every
     * member, keys in byte order, through the loader's canonical text. It decides the hash. */
    void (*link_canonical)(struct ulk_text *t, const ulk_link *l);
    /* Information bits per second of the link, for the composite carrier's data channel:
     * R_b, or R * 56/64 (what a BCH codeblock carries). */
    ulk_ratio (*info_bit_rate)(const ulk_link *l);

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
    const char *unit_noun_one; /* the same, singular: "word", "CLTU" */
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
    /* ---- security: compile's authenticated commanding ----
     * (docs/sdls.md, "Counters: the rule"). All NULL for a profile without security (the
     * sub-bit table). The caller owns its files and calls them at fixed points:
     *     secure_describe   does the link secure its units? (before anything else is read)
     *     secure_begin      key file loaded, state locked and read (before the list is compiled)
     *     secure_upload     every unit secured with fresh counters, reserved for the upload
     *     ulk_upload_write_hook(u, path, hook, ...), the hook calling secure_commit: the state is
     *                       saved after the upload's temporary file is fsynced and before it is
     *                       renamed into place (a crash between the two skips the counters,
     *                       never reuses them; the next secure_begin names the skipped range)
     *     secure_summary    compile's summary line, or secure_abandoned after a failed write
     *     secure_end        the lock released, the keys wiped.
     * Lines for the user go to msg, each starting with who ("ulk compile"). */
    /* 1 when link l secures its units, with what secures them in buf for messages
     * ("link.tc.security: SPI 257, key 'harrowick3-uplink'"); 0 (buf "") when it does not. */
    int (*secure_describe)(const ulk_link *l, char *buf, size_t n);
    /* For a link that secures its units: loads the key file keys_path, locks the send-side
     * state state_path (the lock is held until secure_end) and loads it (a fresh state at
     * counter 1 when absent). Returns 0 with *session, the notices printed (a state created;
     * counters reserved for an upload that does not exist: skipped, never used again);
     * ULK_EINVAL when the key file lacks the link's key (the line saying so printed, diag
     * untouched); ULK_EIO, ULK_EPARSE, ULK_EMISMATCH, ULK_ENOMEM with the reason in diag.
     * On failure *session is NULL and nothing is held. */
    int (*secure_begin)(const ulk_link *l, const char *keys_path, const char *state_path, const char *who, FILE *msg,
                        void **session, ulk_diag *diag);
    /* Secures every unit of u in command order with the state's next counters and reserves
     * them for the upload at out_path, in memory (secure_commit writes the state). An empty
     * upload takes none. Returns 0, or ULK_EINVAL / ULK_ELIMIT (the counters would run out) /
     * ULK_ENOMEM, the reason in diag where there is one: u must then not be written. */
    int (*secure_upload)(void *session, struct ulk_upload *u, const char *out_path, ulk_diag *diag);
    /* Saves the state with the reservation (atomically): the hook between "upload written and
     * fsynced" and "upload renamed", called only when secure_upload took counters. Returns 0,
     * or ULK_EIO / ULK_ENOMEM with the reason in diag (the state file unchanged). */
    int (*secure_commit)(void *session, ulk_diag *diag);
    /* Compile's summary line of the counters secure_upload took ("  security  SPI 257,
     * authentication, IV counters 1..18 (next 19 in ops.state)\n") on out; returns what
     * fprintf returns, 0 when no counters were taken (nothing printed). */
    int (*secure_summary)(void *session, FILE *out);
    /* After the upload failed to be written: what became of its counters, read back from the
     * state file, as one line on msg (reserved and unused, or the state unchanged); nothing
     * when no counters were taken. */
    void (*secure_abandoned)(void *session);
    void (*secure_end)(void *session); /* NULL does nothing */
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
    void (*upload_write_link)(const ulk_link *l, struct ulk_text *b);
    void (*upload_write_unit)(const ulk_link *l, const struct ulk_upload_cmd *c, struct ulk_text *b);
    /* ---- upload reader ---- */
    /* Through the reader's helpers (src/io/upload_read.h): each returns 0, or the status of
     * the first failure it reported there with its tree path. */
    /* The link object lj of an upload file of this profile (every member present: the
     * dictionary's rules, the writer's spelling); l is zeroed. */
    int (*upload_read_link)(struct ulk_rd *r, const struct cJSON *lj, ulk_link *l);
    /* The members of the link object, in the writer's order: what the reader checks first
     * when the first registered profile stands in for a missing or unknown profile name. */
    const char *const *upload_link_members;
    int n_upload_link_members;
    /* The members of a command record, in the writer's order. */
    const char *const *upload_cmd_members;
    int n_upload_cmd_members;
    /* The largest system address and opcode a record may carry. */
    uint64_t (*upload_max_address)(const ulk_link *l);
    uint64_t (*upload_max_opcode)(const ulk_link *l);
    /* The filler runs by ulk_gap, in the reader's messages: "preamble", "gap", "postamble";
     * or "acquisition sequence", "idle sequence", "idle sequence". */
    const char *gap_names[3];
    /* The unit members of record cj (path "commands[i]") into c: the word, or the counts,
     * frame and CLTU (owned buffers). */
    int (*upload_read_unit)(struct ulk_rd *r, const struct cJSON *cj, const char *path, const ulk_link *l,
                            struct ulk_upload_cmd *c);
    /* Argument a of c (path ap), after pos argument bits before it: it fits the unit, and
     * (a word) its raw value is in the word. */
    int (*upload_check_arg)(struct ulk_rd *r, const char *ap, const ulk_link *l, const struct ulk_upload_cmd *c,
                            int pos, const struct ulk_upload_arg *a);
    /* The whole unit of c after its n_arg_bits argument bits: exactly what its fields make. */
    int (*upload_check_unit)(struct ulk_rd *r, const char *path, const ulk_link *l, const struct ulk_upload_cmd *c,
                             int n_arg_bits);
    /* The counts that run across records (packet count per APID, N(S)): state for one read
     * (*st NULL is valid; 0 or ULK_ENOMEM), the check of record idx, and its end. */
    int (*upload_counts_create)(const ulk_link *l, void **st);
    int (*upload_counts_check)(void *st, struct ulk_rd *r, const char *path, const ulk_link *l,
                               const struct ulk_upload_cmd *c, size_t idx);
    void (*upload_counts_destroy)(void *st);
    /* The lean reader: octets every unit takes when all take the same (ceil(W / 8)), else 0
     * (the reader keeps an offset per unit); and unit_octets(l, c) octets of c's unit, the
     * first channel bit in the high bit of dst[0]. */
    size_t (*unit_stride)(const ulk_link *l);
    void (*unit_pack)(const ulk_link *l, const struct ulk_upload_cmd *c, uint8_t *dst);
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
/* The table whose name is the `profile:` value name; NULL when none is. */
const ulk_profile_ops *ulk_profile_ops_by_name(const char *name);
/* The i-th registered table (0 first), NULL past the last: for listing the names. */
const ulk_profile_ops *ulk_profile_ops_at(size_t i);
/* The table of l's profile, for a link the dictionary loader or upload reader made (its
 * profile is one of the registered ones). */
const ulk_profile_ops *ulk_profile_of(const ulk_link *l);

#ifdef __cplusplus
}
#endif
#endif
