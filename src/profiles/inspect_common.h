/* src/profiles/inspect_common.h - helpers of the profiles' inspection texts (internal). */
#ifndef ULK_INSPECT_COMMON_H
#define ULK_INSPECT_COMMON_H

#include <stddef.h>
#include <stdio.h>
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

/* The text's first two lines: the upload file (path as shown) and the dictionary it came from. */
void ulk_inspect_text_head(FILE *out, const char *path, const ulk_upload *u);
/* The first two lines of unit k (0-based): "CLTU 2  line 5  MNEMONIC  (critical)", and its
 * scheduled start after its filler ("after 64 idle bits", with the wait if any). */
void ulk_inspect_text_unit_head(FILE *out, const char *noun, size_t k, const ulk_upload_cmd *c, double start_s,
                                const char *filler);
/* The text's closing lines: the filler after the last unit ("postamble  3 idle patterns",
 * "idle       128 bits after the last CLTU", with the final wait if any) and the totals
 * ("totals     5 words, 4096 sub-bits, 2.048000000 s"). label is the first column,
 * after_what what the filler count counts, units and symbols the plural nouns. */
void ulk_inspect_text_tail(FILE *out, const ulk_upload *u, const char *label, const char *after_what,
                           const char *units, const char *symbols);
/* The JSON document's root with its "dictionary" and "source" members and an empty "link"
 * object (*link), for the profile to fill; NULL when out of memory. */
cJSON *ulk_inspect_json_head(const ulk_upload *u, cJSON **link);
/* The document's closing members (idles_after, wait_after_s, totals with the unit and symbol
 * counts under units_key and symbols_key, and duration_s), then root printed to out and
 * deleted. Returns 0, ULK_ENOMEM, or ULK_EIO when out failed. */
int ulk_inspect_json_finish(FILE *out, cJSON *root, const ulk_upload *u, const char *units_key, const char *symbols_key);
/* The members every unit's JSON object starts with: index (1-based k + 1), line, mnemonic,
 * critical, start_s (its scheduled start), idles_before, wait_s. */
void ulk_inspect_json_unit_head(cJSON *w, size_t k, const ulk_upload_cmd *c, double start_s);

#endif
