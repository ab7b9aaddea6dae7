/* src/core/text.h - the library's one growable text buffer and its one JSON string writer
 * (internal). The upload writer (src/io/upload.c, and each profile's parts through
 * src/io/upload_text.h) and the dictionary's canonical form (src/dict/dict.c, whose hash
 * decides a dictionary's identity) are byte-exact documents written in a fixed layout, so they
 * are written as text here; every other JSON document is built with cJSON.
 *
 * Every function does nothing once memory has run out (oom set); the writer then fails as a
 * whole, so no partial document is ever used. */
#ifndef ULK_TEXT_H
#define ULK_TEXT_H

#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>

typedef struct ulk_text {
    char *p;       /* NUL-terminated once anything was written; ulk_free it */
    size_t n, cap;
    int oom;       /* 1 once an allocation failed */
} ulk_text;

void ulk_text_put(ulk_text *b, const char *s, size_t n);
void ulk_text_puts(ulk_text *b, const char *s);
void ulk_text_vprintf(ulk_text *b, const char *fmt, va_list ap);
void ulk_text_printf(ulk_text *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* A JSON string: quote and backslash escaped with a backslash, control bytes as \u00xx (lower
 * case), every other byte as it is (UTF-8 passes through); NULL writes null. */
void ulk_text_json_str(ulk_text *b, const char *s);
/* Octets in upper-case hex, two digits each. */
void ulk_text_hex(ulk_text *b, const uint8_t *p, size_t n);
/* Takes back the last n characters (n <= what was written). */
void ulk_text_unput(ulk_text *b, size_t n);

#endif
