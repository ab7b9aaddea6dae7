/* src/io/upload_read.h - the upload reader's helpers (internal), through which each link
 * profile reads its parts of an upload file back (ulk_profile_ops "upload reader"), as it
 * writes them through src/io/upload_text.h.
 *
 * The reader keeps the first failure only (with its tree path, e.g. "commands[3]"): a helper
 * returns 0 when the value is good, else the status of a failure it recorded (or of one
 * recorded before). A profile's operation returns the same.
 */
#ifndef ULK_UPLOAD_READ_H
#define ULK_UPLOAD_READ_H

#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#include "ulk/link.h"

typedef struct ulk_rd ulk_rd;

/* Records a failure at path (NULL: the file as a whole) unless one is recorded; returns code. */
int ulk_rd_fail(ulk_rd *r, int code, const char *path, const char *fmt, ...) __attribute__((format(printf, 4, 5)));
/* The recorded status (0: none). */
int ulk_rd_status(const ulk_rd *r);
/* The members of obj must be exactly keys[0..n) (each once); partial: missing ones are not an error. */
int ulk_rd_keys(ulk_rd *r, const cJSON *obj, const char *path, const char *const *keys, int n, int partial);
/* Member k of o (NULL when absent). */
const cJSON *ulk_rd_member(const cJSON *o, const char *k);
/* Member k a whole number in [lo, hi], into *out and/or *sout. */
int ulk_rd_int(ulk_rd *r, const cJSON *o, const char *k, const char *path, double lo, double hi, uint64_t *out,
               int64_t *sout);
/* Member k a string of at most maxlen bytes; NULL on failure. */
const char *ulk_rd_str(ulk_rd *r, const cJSON *o, const char *k, const char *path, size_t maxlen);
/* Member k an exact decimal (> 0, or >= 0 with allow_zero). */
int ulk_rd_ratio(ulk_rd *r, const cJSON *o, const char *k, const char *path, int allow_zero, ulk_ratio *out);
/* Member k a string of 0 and 1 of n sub-bits (any 1..ULK_MAX_SUBBITS when n = 0): its length, or < 0. */
int ulk_rd_pattern(ulk_rd *r, const cJSON *o, const char *k, const char *path, int n, uint8_t *out);
int ulk_rd_bool(ulk_rd *r, const cJSON *o, const char *k, const char *path, int *out);
/* The link's "line_code" member and its "subcarrier" object, which every profile's link has. */
int ulk_rd_line_code(ulk_rd *r, const cJSON *lj, ulk_link *l);
int ulk_rd_subcarrier(ulk_rd *r, const cJSON *sc, ulk_link *l);
/* Even-length hex text to at most cap octets: their count, or -1 when it is not that. */
long ulk_rd_hex_octets(const char *s, uint8_t *out, size_t cap);

#endif
