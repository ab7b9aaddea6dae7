/* src/profiles/inspect_common.h - helpers of the profiles' inspection texts (internal). */
#ifndef ULK_INSPECT_COMMON_H
#define ULK_INSPECT_COMMON_H

#include <stddef.h>
#include <stdint.h>

#include <cjson/cJSON.h>

#include "ulk/upload.h"

/* The value the raw field encodes, with the command-list text beside it when that reads
 * differently ("1.11 deg (list text 1)"). Returns buf. */
const char *ulk_inspect_argval(const ulk_upload_arg *a, char *buf, size_t len);
/* A field in hex at its full width: ceil(bits / 4) digits ("0x0A5C" for 16 bits). */
void ulk_inspect_hex_field(uint64_t v, int bits, char *buf, size_t len);
/* An exact rate as its decimal text; NULL when out of memory. */
cJSON *ulk_inspect_ratio_json(ulk_ratio r);

#endif
