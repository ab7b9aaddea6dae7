/* src/profiles/inspect_common.c - what the profiles' inspection texts share: argument values
 * as shown, fields in hex, exact rates in JSON. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "inspect_common.h"

/* The value the raw field encodes (calibration applied), with the shortest command-list text
 * that compiles to the same raw beside it when that reads differently ("1.11 deg (list
 * text 1)"): what goes up is the encoded value, not the text. */
const char *ulk_inspect_argval(const ulk_upload_arg *a, char *buf, size_t len)
{
    const char *u = a->units ? a->units : "", *sp = a->units ? " " : "";
    if (a->type == ULK_ARG_ENUM || a->type == ULK_ARG_BOOLEAN) {
        snprintf(buf, len, "%s%s%s", a->text, sp, u);
        return buf;
    }
    char eng[64];
    snprintf(eng, sizeof eng, "%.12g", a->eng);
    if (strtod(eng, NULL) == strtod(a->text, NULL)) snprintf(buf, len, "%s%s%s", a->text, sp, u);
    else snprintf(buf, len, "%s%s%s (list text %s)", eng, sp, u, a->text);
    return buf;
}

/* A field in hex at its full width: ceil(bits / 4) digits ("0x0A5C" for 16 bits). */
void ulk_inspect_hex_field(uint64_t v, int bits, char *buf, size_t len)
{
    snprintf(buf, len, "0x%0*llX", bits > 0 ? (bits + 3) / 4 : 1, (unsigned long long)v);
}

cJSON *ulk_inspect_ratio_json(ulk_ratio r)
{
    char b[64];
    ulk_ratio_format(r, b, sizeof b);
    return cJSON_CreateString(b);
}
