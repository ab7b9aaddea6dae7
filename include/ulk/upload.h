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

typedef struct {
    char *name;
    uint64_t raw;      /* raw field */
    double eng;        /* engineering value */
    char *text;        /* engineering value as written back in command-list syntax */
} ulk_upload_arg;

typedef struct {
    int line;                 /* source line in the command list */
    char *mnemonic;
    int critical;
    double wait_before_s;     /* sum of waits directly before this command */
    uint64_t idles_before;    /* idle patterns before this word (preamble or gap) */
    ulk_upload_arg *args;
    int n_args;
    uint32_t system_addr, opcode;
    ulk_word word;
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
} ulk_upload;

void ulk_upload_destroy(ulk_upload *u);

/* Total sub-bits of the stream: n * (sum idles + n_cmds * W). */
uint64_t ulk_upload_n_subbits(const ulk_upload *u);

/* Writes u to path atomically (temporary file in the same folder, renamed on success).
 * Returns 0, or ULK_EIO with the reason in diag; nothing is left behind on failure. */
int ulk_upload_write(const ulk_upload *u, const char *path, ulk_diag *diag);
/* Reads and checks an upload file (format, version, integrity digest). */
int ulk_upload_read(const char *path, ulk_upload **out, ulk_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
