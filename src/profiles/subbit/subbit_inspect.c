/* src/profiles/subbit/subbit_inspect.c - `ulk inspect` of a sub-bit upload: every word with
 * its fields named, hex, binary, sub-bits and start time; as text or JSON. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "inspect_common.h"
#include "profiles.h"
#include "ulk/subbit.h"
#include "ulk/word.h"
#include "util.h"

static void pattern_of(const ulk_link *l, const ulk_word *w, char *buf, int spaced)
{
    size_t k = 0;
    for (int i = 0; i < w->n_bits; i++) {
        const uint8_t *p = w->bits[i] ? l->one : l->zero;
        if (spaced && i) buf[k++] = ' ';
        for (int j = 0; j < l->n_subbits; j++) buf[k++] = (char)('0' + p[j]);
    }
    buf[k] = 0;
}


int ulk_subbit_inspect_text(FILE *out, const char *path, const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    ulk_word_layout y = ulk_word_layout_of(l);
    char rb[64], pz[17], po[17], pi[17];
    ulk_ratio_format(l->bit_rate, rb, sizeof rb);
    for (int i = 0; i < l->n_subbits; i++) {
        pz[i] = (char)('0' + l->zero[i]);
        po[i] = (char)('0' + l->one[i]);
        pi[i] = (char)('0' + l->idle[i]);
    }
    pz[l->n_subbits] = po[l->n_subbits] = pi[l->n_subbits] = 0;
    ulk_inspect_text_head(out, path, u);
    fprintf(out, "link       %s bit/s, %d sub-bits per bit (0 -> %s, 1 -> %s, idle %s), %s\n", rb, l->n_subbits, pz, po,
           pi, ulk_line_code_name(l->line_code));
    fprintf(out, "word       W = %d bits: vehicle %d + system %d + opcode %d + arguments %d + check %d (%s)\n",
           l->word_bits, l->vehicle_bits, l->system_bits, l->opcode_bits, l->argument_bits, l->check_bits,
           ulk_check_name(l->check));
    char *sub = malloc((size_t)l->word_bits * (size_t)(l->n_subbits + 1) + 1);
    if (!sub) return ULK_ENOMEM;
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        char hex[40], bin[ULK_MAX_WORD_BITS + 1], v[600];
        ulk_word_hex(&c->word, hex);
        ulk_word_bin(&c->word, bin);
        ulk_inspect_text_unit_head(out, "word", i, c, ulk_stream_start_next(u, &cur), "idle patterns");
        if (l->vehicle_bits)
            fprintf(out, "  vehicle   0x%llX  (bits %d-%d)\n", (unsigned long long)ulk_word_get(&c->word, y.vehicle_pos, l->vehicle_bits),
                   y.vehicle_pos, y.vehicle_pos + l->vehicle_bits - 1);
        else
            fprintf(out, "  vehicle   (no vehicle address field)\n");
        if (l->system_bits)
            fprintf(out, "  system    %s = 0x%X  (bits %d-%d)\n", c->system_name, c->system_addr, y.system_pos,
                   y.system_pos + l->system_bits - 1);
        else
            fprintf(out, "  system    %s  (no system address field)\n", c->system_name);
        fprintf(out, "  opcode    0x%X = %s  (bits %d-%d)\n", c->opcode, c->mnemonic, y.opcode_pos, y.opcode_pos + l->opcode_bits - 1);
        int pos = y.args_pos;
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            char rh[24];
            ulk_inspect_hex_field(a->raw, a->bits, rh, sizeof rh);
            fprintf(out, "  arg       %s = %s  raw %s (%s, %d bit%s at %d)\n", a->name, ulk_inspect_argval(a, v, sizeof v), rh,
                   ulk_arg_type_name(a->type), a->bits, a->bits == 1 ? "" : "s", pos);
            pos += a->bits;
        }
        if (pos < y.check_pos)
            fprintf(out, "  padding   %d zero bit%s at %d\n", y.check_pos - pos, y.check_pos - pos == 1 ? "" : "s", pos);
        char ck[24];
        ulk_inspect_hex_field(ulk_word_get(&c->word, y.check_pos, l->check_bits), l->check_bits, ck, sizeof ck);
        if (l->check_bits)
            fprintf(out, "  check     %s %s  %s\n", ulk_check_name(l->check), ck, ulk_word_check_ok(l, &c->word) ? "ok" : "WRONG");
        else
            fprintf(out, "  check     none\n");
        fprintf(out, "  hex       %s\n  binary    %s\n", hex, bin);
        pattern_of(l, &c->word, sub, 1);
        fprintf(out, "  sub-bits  %s\n", sub);
    }
    free(sub);
    ulk_inspect_text_tail(out, u, "postamble", "idle patterns", "words", "sub-bits");
    return 0;
}

int ulk_subbit_inspect_json(FILE *out, const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    ulk_word_layout y = ulk_word_layout_of(l);
    cJSON *lj = NULL, *root = ulk_inspect_json_head(u, &lj);
    if (!root) return ULK_ENOMEM;
    cJSON_AddItemToObject(lj, "bit_rate", ulk_inspect_ratio_json(l->bit_rate));
    cJSON_AddNumberToObject(lj, "n_subbits", l->n_subbits);
    {
        char pz[17], po[17], pi[17];
        for (int i = 0; i < l->n_subbits; i++) {
            pz[i] = (char)('0' + l->zero[i]);
            po[i] = (char)('0' + l->one[i]);
            pi[i] = (char)('0' + l->idle[i]);
        }
        pz[l->n_subbits] = po[l->n_subbits] = pi[l->n_subbits] = 0;
        cJSON *sb = cJSON_AddObjectToObject(lj, "subbits");
        cJSON_AddStringToObject(sb, "zero", pz);
        cJSON_AddStringToObject(sb, "one", po);
        cJSON_AddStringToObject(sb, "idle", pi);
    }
    cJSON_AddNumberToObject(lj, "word_bits", l->word_bits);
    cJSON_AddStringToObject(lj, "check", ulk_check_name(l->check));
    cJSON *words = cJSON_AddArrayToObject(root, "words");
    char *sub = malloc((size_t)l->word_bits * (size_t)l->n_subbits + 1);
    if (!root || !sub) { free(sub); cJSON_Delete(root); return ULK_ENOMEM; }
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        char hex[40], bin[ULK_MAX_WORD_BITS + 1], b[40];
        ulk_word_hex(&c->word, hex);
        ulk_word_bin(&c->word, bin);
        pattern_of(l, &c->word, sub, 0);
        cJSON *w = cJSON_CreateObject();
        cJSON_AddItemToArray(words, w);
        ulk_inspect_json_unit_head(w, i, c, ulk_stream_start_next(u, &cur));
        cJSON_AddStringToObject(w, "hex", hex);
        cJSON_AddStringToObject(w, "binary", bin);
        cJSON_AddStringToObject(w, "subbits", sub);
        cJSON_AddNumberToObject(w, "vehicle", (double)ulk_word_get(&c->word, y.vehicle_pos, l->vehicle_bits));
        cJSON *s = cJSON_AddObjectToObject(w, "system");
        cJSON_AddStringToObject(s, "name", c->system_name);
        cJSON_AddNumberToObject(s, "address", c->system_addr);
        cJSON_AddNumberToObject(w, "opcode", c->opcode);
        cJSON *args = cJSON_AddObjectToObject(w, "args");
        cJSON *fields = cJSON_AddArrayToObject(w, "fields");
        int pos = y.args_pos;
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            /* as the decode JSON: labels for enums, engineering values for the rest */
            if (a->type == ULK_ARG_ENUM) cJSON_AddStringToObject(args, a->name, a->text);
            else if (a->type == ULK_ARG_BOOLEAN) cJSON_AddBoolToObject(args, a->name, a->raw != 0);
            else cJSON_AddNumberToObject(args, a->name, a->eng);
            cJSON *f = cJSON_CreateObject();
            cJSON_AddItemToArray(fields, f);
            cJSON_AddStringToObject(f, "name", a->name);
            cJSON_AddStringToObject(f, "type", ulk_arg_type_name(a->type));
            cJSON_AddNumberToObject(f, "pos", pos);
            cJSON_AddNumberToObject(f, "bits", a->bits);
            snprintf(b, sizeof b, "0x%llX", (unsigned long long)a->raw);
            cJSON_AddStringToObject(f, "raw", b);
            cJSON_AddNumberToObject(f, "eng", a->eng);
            cJSON_AddStringToObject(f, "text", a->text);
            if (a->units) cJSON_AddStringToObject(f, "units", a->units);
            else cJSON_AddNullToObject(f, "units");
            pos += a->bits;
        }
        cJSON *ck = cJSON_AddObjectToObject(w, "check");
        cJSON_AddStringToObject(ck, "kind", ulk_check_name(l->check));
        ulk_inspect_hex_field(ulk_word_get(&c->word, y.check_pos, l->check_bits), l->check_bits, b, sizeof b);
        cJSON_AddStringToObject(ck, "value", b);
        cJSON_AddBoolToObject(ck, "ok", ulk_word_check_ok(l, &c->word));
    }
    free(sub);
    return ulk_inspect_json_finish(out, root, u, "words", "subbits");
}
