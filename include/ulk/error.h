/* ulk/error.h - one status type and a per-call diagnostics object.
 *
 * Why: every stage reports problems with the place they come from (file:line:col and
 * the node path in the dictionary tree), and keeps going where it can so that one run
 * lists all errors. A status (did the call work?) is kept apart from a verdict (did a
 * word pass its check?): a failed check is a result, never a status.
 *
 * Usage:
 *     ulk_diag *d = ulk_diag_create();
 *     if (ulk_dict_load("demo.yaml", &dict, d) < 0) ulk_diag_print(d, stderr);
 *     ulk_diag_destroy(d);
 */
#ifndef ULK_ERROR_H
#define ULK_ERROR_H

#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>

#ifdef __cplusplus
extern "C" {
#endif

/* 0 is success, negative codes are failures. */
typedef enum {
    ULK_OK = 0,
    ULK_EINVAL = -1,     /* bad argument from the caller */
    ULK_ENOMEM = -2,     /* allocation failed */
    ULK_EIO = -3,        /* file could not be read or written */
    ULK_EPARSE = -4,     /* input text is malformed or breaks a rule (see the diagnostics) */
    ULK_ELIMIT = -5,     /* input exceeds a documented limit */
    ULK_EFORMAT = -6,    /* file is not of the expected format/version */
    ULK_EINTEGRITY = -7, /* digest mismatch: the file was changed */
    ULK_EMISMATCH = -8   /* objects that must agree do not (e.g. dictionary hash) */
} ulk_status;

const char *ulk_status_str(int status);

typedef enum { ULK_SEV_ERROR = 0, ULK_SEV_WARNING = 1, ULK_SEV_NOTE = 2 } ulk_severity;

/* Where a finding comes from. Any field may be empty: file NULL, line/col 0, path NULL. */
typedef struct {
    const char *file;
    int line; /* 1-based, 0 = unknown */
    int col;  /* 1-based, 0 = unknown */
    const char *path; /* node path, e.g. "commands[12].arguments[0].bits" */
} ulk_loc;

typedef struct {
    ulk_severity sev;
    char *file;  /* owned by the diag object; may be NULL */
    int line, col;
    char *path;  /* may be NULL */
    char *msg;
} ulk_finding;

typedef struct ulk_diag ulk_diag;

/* Returns a new empty diagnostics object, or NULL when out of memory. */
ulk_diag *ulk_diag_create(void);
/* Frees d; NULL does nothing. */
void ulk_diag_destroy(ulk_diag *d);

/* Records a finding at loc (may be NULL). Returns ULK_EPARSE for an error, ULK_OK for a
 * warning or note, so an error path is one `return ulk_diag_add(...)`. When d is NULL
 * nothing is recorded. When memory runs out the finding is counted but its text lost. */
int ulk_diag_add(ulk_diag *d, ulk_severity sev, const ulk_loc *loc, const char *fmt, ...)
    __attribute__((format(printf, 4, 5)));
int ulk_diag_vadd(ulk_diag *d, ulk_severity sev, const ulk_loc *loc, const char *fmt, va_list ap);

/* Records an error without a source location (I/O, memory) and returns code. */
int ulk_fail(ulk_diag *d, int code, const char *fmt, ...) __attribute__((format(printf, 3, 4)));

size_t ulk_diag_count(const ulk_diag *d);
size_t ulk_diag_errors(const ulk_diag *d);
size_t ulk_diag_warnings(const ulk_diag *d);
const ulk_finding *ulk_diag_get(const ulk_diag *d, size_t i);
/* The first error recorded, or NULL. */
const ulk_finding *ulk_diag_first_error(const ulk_diag *d);

/* Prints every finding as `file:line:col: error|warning: message [path]`, one per line.
 * Missing parts are left out (`file: error: ...`, no `[path]`). */
void ulk_diag_print(const ulk_diag *d, FILE *out);
/* Formats one finding into buf as above (no newline). */
void ulk_finding_format(const ulk_finding *f, char *buf, size_t len);
/* Orders the findings by file, line and column (stable), so a list's errors read top down. */
void ulk_diag_sort(ulk_diag *d);
/* Drops all findings. */
void ulk_diag_clear(ulk_diag *d);

#ifdef __cplusplus
}
#endif
#endif
