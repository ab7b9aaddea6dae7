/* ulk/upload.h - compiled uploads: the command-list compiler's result and its file.
 *
 * An upload is what goes up: the dictionary identity, the link parameters, and for each
 * command its source line, mnemonic, argument values (engineering and raw) and word bits,
 * with the idle patterns before it. The file format is documented in docs/upload-format.md.
 */
#ifndef ULK_UPLOAD_H
#define ULK_UPLOAD_H

#include <stdint.h>
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/link.h"
#include "ulk/word.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ulk_upload_arg {
    char *name;
    uint64_t raw;      /* raw field */
    double eng;        /* engineering value */
    char *text;        /* engineering value as written back in command-list syntax */
    ulk_arg_type type; /* the dictionary's type, so that the file explains itself */
    int bits;          /* raw width; the arguments of a word are packed in this order */
    char *units;       /* NULL when none */
} ulk_upload_arg;

typedef struct ulk_upload_cmd {
    int line;                 /* source line in the command list */
    char *mnemonic;
    int critical;
    double wait_before_s;     /* sum of waits directly before this command */
    uint64_t idles_before;    /* idle patterns before this word (preamble or gap) */
    ulk_upload_arg *args;
    int n_args;
    uint32_t system_addr, opcode;
    ulk_word word;
    char *system_name;        /* the dictionary's system name */
    ulk_ratio wait_before;    /* exact seconds (0/1 when none); wait_before_s is its value */
    char *block_;             /* private: one allocation holds args and the strings */
    /* ccsds-tc only (0 / NULL for the sub-bit profile; idles_before then counts idle bits): */
    uint16_t seq_count;       /* Space Packet sequence count (per APID, mod 16384) */
    uint8_t frame_seq;        /* N(S) of the TC frame (0 for expedited service) */
    uint8_t *cltu;            /* the CLTU, start sequence to tail sequence, n_cltu octets */
    size_t n_cltu;
    uint8_t *frame;           /* the TC Transfer Frame it carries (before randomizing) */
    size_t n_frame;           /* cltu and frame share one allocation, freed with the upload */
} ulk_upload_cmd;

typedef struct ulk_upload {
    int format_version;
    char *dict_name, *dict_version;
    char dict_sha256[65];
    char *source;             /* command-list file name */
    ulk_link link;
    ulk_upload_cmd *cmds;
    size_t n_cmds;
    double wait_after_s;
    uint64_t idles_after;     /* postamble */
    ulk_ratio wait_after;     /* exact seconds of the waits after the last command */
    struct ulk_upload_lean *lean; /* NULL for a full upload; see ulk_upload_read_opts() */
} ulk_upload;

/* The lean form of an upload (ULK_UPLOAD_LEAN): only what the stream (modulator, timing
 * table) needs, in compact arrays. Then cmds holds the first n_full commands only (in full,
 * for annotations) while n_cmds counts them all; read commands through the
 * ulk_upload_idles_before() / ulk_upload_unit_*() accessors, which work on both forms. */
typedef struct ulk_upload_lean {
    size_t n_full;          /* commands also held in full in ulk_upload.cmds (the first ones) */
    uint64_t *idles;        /* idles_before of every command, n_cmds entries */
    uint8_t *units;         /* every command's unit (word or CLTU) packed MSB first, back to back */
    uint32_t *unit_off;     /* ccsds-tc: octet offset of command i's CLTU, n_cmds + 1 entries;
                               NULL for the sub-bit profile (fixed stride ceil(W / 8)) */
    size_t unit_stride;     /* sub-bit: ceil(W / 8) octets a word */
    uint64_t n_subbits;     /* total sub-bits (channel bits) of the stream */
} ulk_upload_lean;

/* Limits that ulk_upload_read enforces (and the compiler and ulk_upload_write never exceed).
 * MAX_CMDS and MAX_UNIT_OCTETS are what keeps `ulk modulate` (the lean form: about 8 bytes a
 * command plus its word or CLTU octets) under 64 MB resident for every accepted upload
 * (docs/upload-format.md, "Reader and memory"). */
#define ULK_UPLOAD_FORMAT_VERSION 1
#define ULK_UPLOAD_MAX_BYTES ((size_t)1 << 30)
#define ULK_UPLOAD_MAX_CMDS 1000000u
#define ULK_UPLOAD_MAX_UNIT_OCTETS ((size_t)16 << 20) /* words (ceil(W/8) octets each) or CLTUs, all commands */
#define ULK_UPLOAD_LEAN_FULL_BYTES ((size_t)10 << 20) /* lean: memory for the commands kept in full */
#define ULK_UPLOAD_MAX_VALUE_BYTES ((size_t)256 << 10) /* one command (or header member) as text */
#define ULK_UPLOAD_MAX_IDLES 1000000000000ull   /* idle patterns before one word or after the last */

/* Frees u and everything it holds; NULL does nothing. */
void ulk_upload_destroy(ulk_upload *u);

/* Total duration of the stream in seconds: patterns / R_b (ccsds-tc: channel bits / R). */
double ulk_upload_duration_s(const ulk_upload *u);

/* Total sub-bits of the stream: n * (sum idles + n_cmds * W); for ccsds-tc the channel bits,
 * sum idle bits + sum 8 * CLTU octets. */
uint64_t ulk_upload_n_subbits(const ulk_upload *u);

/* Writes u to path atomically (temporary file in the same folder, renamed on success).
 * Returns 0; ULK_ELIMIT when u is beyond the reader's limits (more than ULK_UPLOAD_MAX_CMDS
 * commands or ULK_UPLOAD_MAX_UNIT_OCTETS of words/CLTUs: the modulator could not take it);
 * ULK_EIO with the reason in diag; nothing is left behind on failure. u must be full. */
int ulk_upload_write(const ulk_upload *u, const char *path, ulk_diag *diag);
/* Called by ulk_upload_write_hook once the upload is written and fsynced under its temporary
 * name, before it is renamed into place; a non-zero return aborts the write (the temporary
 * file is removed, nothing is written) and is returned. */
typedef int (*ulk_upload_commit_fn)(void *user, ulk_diag *diag);
/* ulk_upload_write with a hook between "safely written" and "in place": `ulk compile --state`
 * saves the anti-replay state there, so that no counter is handed out twice (docs/sdls.md). */
int ulk_upload_write_hook(const ulk_upload *u, const char *path, ulk_upload_commit_fn before_rename, void *user,
                          ulk_diag *diag);
/* Reads and checks an upload file: format name and version (ULK_EFORMAT), the integrity
 * digest (ULK_EINTEGRITY: "the file was changed after it was written"), then every field
 * (ULK_EPARSE naming the field, e.g. "commands[3].word"), limits (ULK_ELIMIT). Each word
 * is checked against its fields: vehicle, system, opcode, packed arguments and check.
 * Never crashes on hostile input. Returns 0 with *out set (free with
 * ulk_upload_destroy()), or the status with *out NULL and the reason in diag. */
int ulk_upload_read(const char *path, ulk_upload **out, ulk_diag *diag);
/* The same from memory; name is used in messages. */
int ulk_upload_read_mem(const char *name, const char *text, size_t len, ulk_upload **out, ulk_diag *diag);

/* Reader options (flags of ulk_upload_read_opts). */
#define ULK_UPLOAD_LEAN 1u /* keep the lean form (ulk_upload_lean) instead of every command in full */
/* ulk_upload_read with options: the same checks, byte for byte, whatever the flags. With
 * ULK_UPLOAD_LEAN the upload keeps every command's idles and unit (word or CLTU) compactly
 * and only the first n_full commands in full in cmds (mnemonic, line, arguments ...); such
 * an upload serves ulk_stream_*, ulk_timing_*, ulk_mod_*, ulk_upload_n_subbits and the
 * accessors below, not inspect/verify/print/write. The commands kept in full stop at n_full
 * or when they would take more than ULK_UPLOAD_LEAN_FULL_BYTES, whichever comes first.
 * Without ULK_UPLOAD_LEAN, n_full is ignored. */
int ulk_upload_read_opts(const char *path, unsigned flags, size_t n_full, ulk_upload **out, ulk_diag *diag);
int ulk_upload_read_mem_opts(const char *name, const char *text, size_t len, unsigned flags, size_t n_full,
                             ulk_upload **out, ulk_diag *diag);

/* Commands of u held in full in u->cmds: n_cmds, or the lean form's n_full. */
size_t ulk_upload_n_full(const ulk_upload *u);
/* Idle patterns (ccsds-tc: idle bits) before command i (0-based, i < n_cmds), either form. */
uint64_t ulk_upload_idles_before(const ulk_upload *u, size_t i);
/* Channel bits of command i's unit (W, or 8 x CLTU octets), either form. */
uint64_t ulk_upload_unit_bits(const ulk_upload *u, size_t i);
/* Bit b (0 = first sent, b < ulk_upload_unit_bits) of command i's unit, either form. */
int ulk_upload_unit_bit(const ulk_upload *u, size_t i, uint64_t b);

/* Prints u back as a command list (docs/spec/command-list.md syntax): waits, each command with its
 * arguments in engineering form, 'confirm' on critical ones. Each command stays on its
 * source line (blank or comment lines fill the gaps), so compiling the output under the
 * same file name gives an identical upload. Returns 0 or ULK_EIO. */
int ulk_upload_print_list(const ulk_upload *u, FILE *out);

#ifdef __cplusplus
}
#endif
#endif
