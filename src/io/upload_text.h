/* src/io/upload_text.h - the upload writer's text buffer (internal), through which each link
 * profile writes its parts of an upload file (ulk_profile_ops.upload_write_link and
 * upload_write_unit). Every function does nothing once the buffer has run out of memory; the
 * writer then fails as a whole, so no partial file is ever written. */
#ifndef ULK_UPLOAD_TEXT_H
#define ULK_UPLOAD_TEXT_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/link.h"

typedef struct ulk_text ulk_jbuf; /* src/core/text.h */

void ulk_jb_put(ulk_jbuf *b, const char *s);                      /* text as it is */
void ulk_jb_printf(ulk_jbuf *b, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
void ulk_jb_str(ulk_jbuf *b, const char *s);                      /* a JSON string; NULL: null */
void ulk_jb_ratio(ulk_jbuf *b, ulk_ratio r);                      /* its exact decimal text, quoted */
void ulk_jb_double(ulk_jbuf *b, double v);                        /* the shortest round trip; null if not finite */
void ulk_jb_hex(ulk_jbuf *b, const uint8_t *p, size_t n);         /* octets in upper-case hex */
void ulk_jb_unput(ulk_jbuf *b, size_t n);                         /* takes back the last n chars */
int ulk_jb_oom(const ulk_jbuf *b);                                /* 1 once memory ran out */

#endif
