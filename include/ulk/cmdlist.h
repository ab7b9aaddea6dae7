/* ulk/cmdlist.h - operator command lists and the compiler that turns one into an upload.
 *
 * Why two steps: the parser knows only the syntax (lines, tokens, columns), the compiler
 * knows the dictionary. Both keep going after an error so that one run lists every problem
 * of a list, each as `file:line:col: error: ...` with a did-you-mean where one fits.
 *
 * Syntax (docs/spec/command-list.md):
 *
 *     # comment to end of line
 *     MNEMONIC name=value name=value      # a value may carry its unit: delay=250ms
 *     wait 2.5s                           # also ms and min
 *     MNEMONIC name=value confirm         # required on every critical command
 *
 * Usage:
 *     ulk_cmdlist *l = NULL; ulk_upload *u = NULL;
 *     ulk_cmdlist_load("pass.cmd", &l, diag);          // syntax errors go to diag
 *     if (l && ulk_compile(dict, l, &u, diag) == 0 && ulk_diag_errors(diag) == 0) ...
 *     ulk_upload_destroy(u); ulk_cmdlist_destroy(l);
 */
#ifndef ULK_CMDLIST_H
#define ULK_CMDLIST_H

#include <stddef.h>
#include "ulk/dict.h"
#include "ulk/error.h"
#include "ulk/link.h"
#include "ulk/upload.h"

#ifdef __cplusplus
extern "C" {
#endif

#define ULK_CMDLIST_MAX_LINE 4096     /* characters per line, newline excluded */
#define ULK_CMDLIST_MAX_WAIT_S 86400  /* one wait, and the waits before one word together */
#define ULK_CMDLIST_MAX_BYTES ((size_t)1 << 30)

/* One `name=value` of a command line. value is the text after '=' as written (number and
 * unit together; the compiler splits them because only the argument's type tells whether
 * "5V" is a number with a unit or a label). Columns are 1-based byte columns. */
typedef struct {
    char *name;
    char *value;
    int col;        /* of the name */
    int value_col;  /* of the value */
} ulk_cl_arg;

typedef enum { ULK_CL_COMMAND = 0, ULK_CL_WAIT = 1 } ulk_cl_kind;

typedef struct {
    ulk_cl_kind kind;
    int line, col;       /* of the mnemonic or of 'wait' */
    char *mnemonic;      /* command only */
    ulk_cl_arg *args;
    int n_args;
    int confirm;         /* the line carries 'confirm' */
    ulk_ratio wait_s;    /* wait only: exact seconds (0 <= wait <= ULK_CMDLIST_MAX_WAIT_S) */
} ulk_cl_item;

typedef struct ulk_cmdlist {
    char *file;          /* name used in locations */
    ulk_cl_item *items;  /* the lines that parsed, in order */
    size_t n_items;
    size_t n_commands;   /* items of kind ULK_CL_COMMAND */
    size_t n_errors;     /* syntax errors found (their lines are not in items) */
} ulk_cmdlist;

/* Parses a command list from memory (text need not be NUL-terminated; len bytes). name is
 * used in locations. Every syntax error goes to diag. Returns 0 when the list is clean,
 * ULK_EPARSE when errors were found -- *out is set in both cases, holding the lines that
 * parsed, so that the compiler can still report the other lines' errors; ULK_ENOMEM (then
 * *out is NULL). The caller frees *out with ulk_cmdlist_destroy(). */
int ulk_cmdlist_parse(const char *name, const char *text, size_t len, ulk_cmdlist **out, ulk_diag *diag);
/* The same from a file. ULK_EIO / ULK_ELIMIT (message in diag, *out NULL) when it cannot
 * be read. */
int ulk_cmdlist_load(const char *path, ulk_cmdlist **out, ulk_diag *diag);
/* Frees l; NULL does nothing. */
void ulk_cmdlist_destroy(ulk_cmdlist *l);

/* Compiles l against d (docs/spec/subbit.md sections 2 and 3): resolves mnemonics and
 * arguments (by name, any order; missing ones take their default), converts values,
 * refuses critical commands without 'confirm', packs and checks each word, and counts the
 * idle patterns (waits exact: max(G, ceil(t * R_b))). Every error goes to diag with its
 * file:line:col. Returns 0 with *out set (caller frees with ulk_upload_destroy()) only when
 * neither l nor this call found any error; otherwise ULK_EPARSE (or ULK_ENOMEM / ULK_ELIMIT)
 * and *out is NULL. An empty list (no command) is refused. */
int ulk_compile(const ulk_dict *d, const ulk_cmdlist *l, ulk_upload **out, ulk_diag *diag);

/* Idle patterns a wait of t seconds asks for at rate R_b: ceil(t * R_b), exact. Returns 0,
 * or ULK_ELIMIT when the product does not fit. */
int ulk_wait_patterns(ulk_ratio t_s, ulk_ratio bit_rate, uint64_t *n_patterns);

#ifdef __cplusplus
}
#endif
#endif
