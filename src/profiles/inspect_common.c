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

void ulk_inspect_text_head(FILE *out, const char *path, const ulk_upload *u)
{
    fprintf(out, "upload     %s (compiled from %s)\n", path, u->source);
    fprintf(out, "dictionary %s %s  sha256 %s\n", u->dict_name, u->dict_version, u->dict_sha256);
}

void ulk_inspect_text_tail(FILE *out, const ulk_upload *u, const char *label, const char *after_what,
                           const char *units, const char *symbols)
{
    char wa[64];
    ulk_ratio_format(u->wait_after, wa, sizeof wa);
    fprintf(out, "\n%-10s %llu %s%s%s%s\n", label, (unsigned long long)u->idles_after, after_what,
            u->wait_after.num ? " (wait " : "", u->wait_after.num ? wa : "", u->wait_after.num ? " s)" : "");
    fprintf(out, "totals     %zu %s, %llu %s, %.9f s\n", u->n_cmds, units, (unsigned long long)ulk_upload_n_subbits(u),
            symbols, ulk_upload_duration_s(u));
}

cJSON *ulk_inspect_json_head(const ulk_upload *u, cJSON **link)
{
    cJSON *root = cJSON_CreateObject();
    cJSON *d = cJSON_AddObjectToObject(root, "dictionary");
    cJSON_AddStringToObject(d, "name", u->dict_name);
    cJSON_AddStringToObject(d, "version", u->dict_version);
    cJSON_AddStringToObject(d, "sha256", u->dict_sha256);
    cJSON_AddStringToObject(root, "source", u->source);
    *link = cJSON_AddObjectToObject(root, "link");
    if (!*link) {
        cJSON_Delete(root);
        return NULL;
    }
    return root;
}

void ulk_inspect_json_unit_head(cJSON *w, size_t k, const ulk_upload_cmd *c, double start_s)
{
    cJSON_AddNumberToObject(w, "index", (double)(k + 1));
    cJSON_AddNumberToObject(w, "line", c->line);
    cJSON_AddStringToObject(w, "mnemonic", c->mnemonic);
    cJSON_AddBoolToObject(w, "critical", c->critical);
    cJSON_AddNumberToObject(w, "start_s", start_s);
    cJSON_AddNumberToObject(w, "idles_before", (double)c->idles_before);
    cJSON_AddItemToObject(w, "wait_s", ulk_inspect_ratio_json(c->wait_before));
}

int ulk_inspect_json_finish(FILE *out, cJSON *root, const ulk_upload *u, const char *units_key, const char *symbols_key)
{
    cJSON_AddNumberToObject(root, "idles_after", (double)u->idles_after);
    cJSON_AddItemToObject(root, "wait_after_s", ulk_inspect_ratio_json(u->wait_after));
    cJSON *t = cJSON_AddObjectToObject(root, "totals");
    cJSON_AddNumberToObject(t, units_key, (double)u->n_cmds);
    cJSON_AddNumberToObject(t, symbols_key, (double)ulk_upload_n_subbits(u));
    cJSON_AddNumberToObject(t, "duration_s", ulk_upload_duration_s(u));
    char *txt = cJSON_Print(root);
    cJSON_Delete(root);
    if (!txt) return ULK_ENOMEM;
    int bad = fputs(txt, out) == EOF || fputc('\n', out) == EOF;
    free(txt);
    return bad ? ULK_EIO : 0;
}

void ulk_inspect_text_unit_head(FILE *out, const char *noun, size_t k, const ulk_upload_cmd *c, double start_s,
                                const char *filler)
{
    fprintf(out, "\n%s %zu  line %d  %s%s\n", noun, k + 1, c->line, c->mnemonic, c->critical ? "  (critical)" : "");
    fprintf(out, "  start     %.9f s  after %llu %s", start_s, (unsigned long long)c->idles_before, filler);
    if (c->wait_before.num) {
        char w[64];
        ulk_ratio_format(c->wait_before, w, sizeof w);
        fprintf(out, " (wait %s s)", w);
    }
    fprintf(out, "\n");
}
