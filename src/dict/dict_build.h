/* src/dict/dict_build.h - the dictionary loader's helpers for a link profile's dictionary
 * operations (internal; ulk_profile_ops "dictionary section"): each profile parses, checks and
 * writes the canonical form of its own link section through these, so that every finding has
 * the loader's file:line:col, tree path and wording, and the loader itself names no profile.
 *
 * The readers report what is wrong at the node and return 0; they return 1 with the value
 * when it is good. They accept a NULL node where the loader's own code did (reported as a
 * missing value of the expected type).
 */
#ifndef ULK_DICT_BUILD_H
#define ULK_DICT_BUILD_H

#include <stddef.h>
#include <stdint.h>

#include "doc.h"
#include "text.h"
#include "ulk/dict.h"
#include "ulk/link.h"

typedef struct ulk_dict_build ulk_dict_build; /* one load: dictionary, document, findings */
typedef struct ulk_text ulk_dict_text;        /* the canonical form being written (text.h) */

/* The link being built (of the dictionary being loaded). */
ulk_link *ulk_db_link(ulk_dict_build *b);
/* Room the profile's link_parse keeps its findings in for its command checks (which fields are
 * valid, their widths): ULK_DB_STATE_OCTETS, zeroed when the load starts, aligned for any type. */
#define ULK_DB_STATE_OCTETS 64
void *ulk_db_state(ulk_dict_build *b);
/* Errors reported so far (to tell whether a part of the section was clean). */
size_t ulk_db_errors(const ulk_dict_build *b);
/* 1 when the document is JSON, 0 YAML (for advice on quoting). */
int ulk_db_is_json(const ulk_dict_build *b);

/* Findings at a node: file:line:col and tree path. */
void ulk_db_err(ulk_dict_build *b, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
void ulk_db_warn(ulk_dict_build *b, ulk_node *n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));

/* The node's key for messages ("value" for a list item). */
const char *ulk_db_key_name(ulk_node *n);
/* A mapping (else reported: "<what> must be a mapping, not ..."). */
int ulk_db_want_map(ulk_dict_build *b, ulk_node *n, const char *what);
/* Unknown keys (with did-you-mean) and missing required keys; NULL-terminated lists. */
void ulk_db_check_keys(ulk_dict_build *b, ulk_node *map, const char *what, const char *const *allowed,
                       const char *const *required);
/* An integer in [lo, hi] (what names it in the range message). */
int ulk_db_int(ulk_dict_build *b, ulk_node *n, int64_t lo, int64_t hi, int64_t *out, const char *what);
/* An exact rational > 0 from the number's text. */
int ulk_db_positive_ratio(ulk_dict_build *b, ulk_node *n, ulk_ratio *out, const char *what);
/* An amplitude in (0, 1], as a double and exactly. */
int ulk_db_amplitude(ulk_dict_build *b, ulk_node *n, double *out, ulk_ratio *exact, const char *what);
int ulk_db_bool(ulk_dict_build *b, ulk_node *n, int *out);
int ulk_db_str(ulk_dict_build *b, ulk_node *n, const char **out);
/* One of count words; reports with did-you-mean. The index, or -1. */
int ulk_db_choice(ulk_dict_build *b, ulk_node *n, const char *const *names, size_t count, const char *what);

/* The subcarrier mapping both profiles' link sections share (frequency, waveform, amplitude)
 * into the link. *fsc_ok: the frequency is valid; *amp_ok: the amplitude is (or absent: 1);
 * *amp_exact: the amplitude exactly (1 when absent). Returns the frequency node, NULL when
 * absent (and then *fsc_ok = *amp_ok = 0). */
ulk_node *ulk_db_subcarrier(ulk_dict_build *b, ulk_node *sc, int *fsc_ok, int *amp_ok, ulk_ratio *amp_exact);

/* The canonical form is written into the library's text buffer (src/core/text.h: text, printf,
 * JSON strings); its numbers are written as below: a number as the canonical form writes it,
 * an exact rate as a quoted decimal. */
void ulk_dt_double(ulk_dict_text *t, double v);
void ulk_dt_ratio(ulk_dict_text *t, ulk_ratio r);

#endif
