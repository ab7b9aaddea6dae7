/* src/io/upload_text.h - the upload writer's text buffer (internal), through which each link
 * profile writes its parts of an upload file (ulk_profile_ops.upload_write_link and
 * upload_write_unit). Every function does nothing once the buffer has run out of memory; the
 * writer then fails as a whole, so no partial file is ever written. */
#ifndef ULK_UPLOAD_TEXT_H
#define ULK_UPLOAD_TEXT_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/link.h"

#include "text.h"

/* The buffer is the library's text buffer: text, printf, JSON strings, hex and unput are
 * ulk_text_puts, ulk_text_printf, ulk_text_json_str, ulk_text_hex and ulk_text_unput
 * (src/core/text.h); what the upload file writes its own way is below. */
typedef struct ulk_text ulk_jbuf;

void ulk_jb_ratio(ulk_jbuf *b, ulk_ratio r);                      /* its exact decimal text, quoted */
void ulk_jb_double(ulk_jbuf *b, double v);                        /* the shortest round trip; null if not finite */
int ulk_jb_oom(const ulk_jbuf *b);                                /* 1 once memory ran out */

#endif
