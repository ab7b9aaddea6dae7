/* src/profiles/subbit/subbit_upload.c - the sub-bit profile's parts of the upload file
 * (docs/spec/upload.md): the link object and each command's word, written and read back. */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "upload_read.h"
#include "upload_text.h"
#include "ulk/word.h"

static void pattern_str(const uint8_t *p, int n, char *out)
{
    for (int i = 0; i < n; i++) out[i] = (char)('0' + (p[i] & 1));
    out[n] = 0;
}

/* The link object of a sub-bit upload: the dictionary's link section, every default applied. */
void ulk_subbit_upload_write_link(const ulk_link *l, ulk_jbuf *b)
{
    char pz[17], po[17], pi[17];
    pattern_str(l->zero, l->n_subbits, pz);
    pattern_str(l->one, l->n_subbits, po);
    pattern_str(l->idle, l->n_subbits, pi);
    ulk_text_puts(b, ",\n  \"link\": {\n    \"profile\": \"subbit\",\n    \"bit_rate\": ");
    ulk_jb_ratio(b, l->bit_rate);
    ulk_text_printf(b, ",\n    \"subbits\": {\"zero\": \"%s\", \"one\": \"%s\", \"idle\": \"%s\"},\n", pz, po, pi);
    ulk_text_printf(b, "    \"line_code\": \"%s\",\n    \"subcarrier\": {\"frequency\": ", ulk_line_code_name(l->line_code));
    ulk_jb_ratio(b, l->fsc);
    ulk_text_printf(b, ", \"waveform\": \"%s\", \"amplitude\": ", ulk_waveform_name(l->waveform));
    ulk_jb_double(b, l->amplitude);
    ulk_text_puts(b, "},\n    \"pilot\": ");
    if (l->has_pilot) {
        ulk_text_puts(b, "{\"frequency\": ");
        ulk_jb_ratio(b, l->fp);
        ulk_text_puts(b, ", \"amplitude\": ");
        ulk_jb_double(b, l->pilot_amplitude);
        ulk_text_puts(b, "}");
    } else {
        ulk_text_puts(b, "null");
    }
    ulk_text_printf(b, ",\n    \"framing\": {\"preamble\": %d, \"gap\": %d, \"postamble\": %d},\n", l->preamble, l->gap,
              l->postamble);
    ulk_text_printf(b,
              "    \"word\": {\"vehicle_address\": {\"bits\": %d, \"value\": %u}, \"system_address_bits\": %d, "
              "\"opcode_bits\": %d, \"argument_bits\": %d, \"check\": \"%s\", \"word_bits\": %d}\n  },\n",
              l->vehicle_bits, l->vehicle_value, l->system_bits, l->opcode_bits, l->argument_bits,
              ulk_check_name(l->check), l->word_bits);
}

/* The end of a command record: its word in hex. */
void ulk_subbit_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, ulk_jbuf *b)
{
    (void)l;
    char hex[40];
    ulk_word_hex(&c->word, hex);
    ulk_text_printf(b, "],\n     \"word\": \"%s\"}", hex);
}

/* ---------------------------------------------------------------- reader */

const char *const ulk_subbit_upload_link_members[8] = {"profile", "bit_rate", "subbits", "line_code",
                                                       "subcarrier", "pilot", "framing", "word"};
const char *const ulk_subbit_upload_cmd_members[10] = {"line", "mnemonic", "system", "system_address", "opcode",
                                                       "critical", "wait_s", "idles_before", "args", "word"};

/* The link object of a sub-bit upload (every member present; the dictionary's rules). */
int ulk_subbit_upload_read_link(ulk_rd *r, const cJSON *lj, ulk_link *l)
{
    if (ulk_rd_keys(r, lj, "link", ulk_subbit_upload_link_members, 8, 0)) return ulk_rd_status(r);
    l->profile = ULK_PROFILE_SUBBIT;
    if (ulk_rd_ratio(r, lj, "bit_rate", "link", 0, &l->bit_rate)) return ulk_rd_status(r);
    const cJSON *sb = ulk_rd_member(lj, "subbits");
    static const char *const sk[] = {"zero", "one", "idle"};
    if (ulk_rd_keys(r, sb, "link.subbits", sk, 3, 0)) return ulk_rd_status(r);
    int n = ulk_rd_pattern(r, sb, "zero", "link.subbits", 0, l->zero);
    if (n < 0) return ulk_rd_status(r);
    l->n_subbits = n;
    if (ulk_rd_pattern(r, sb, "one", "link.subbits", n, l->one) < 0) return ulk_rd_status(r);
    if (ulk_rd_pattern(r, sb, "idle", "link.subbits", n, l->idle) < 0) return ulk_rd_status(r);
    if (!memcmp(l->zero, l->one, (size_t)n)) return ulk_rd_fail(r, ULK_EPARSE, "link.subbits", "zero and one patterns are equal");
    if (ulk_rd_line_code(r, lj, l)) return ulk_rd_status(r);
    if (ulk_rd_subcarrier(r, ulk_rd_member(lj, "subcarrier"), l)) return ulk_rd_status(r);
    const cJSON *pj = ulk_rd_member(lj, "pilot");
    if (!cJSON_IsNull(pj)) {
        static const char *const pk[] = {"frequency", "amplitude"};
        if (ulk_rd_keys(r, pj, "link.pilot", pk, 2, 0)) return ulk_rd_status(r);
        if (ulk_rd_ratio(r, pj, "frequency", "link.pilot", 0, &l->fp)) return ulk_rd_status(r);
        const cJSON *pa = ulk_rd_member(pj, "amplitude");
        if (!cJSON_IsNumber(pa) || !(pa->valuedouble > 0 && pa->valuedouble + l->amplitude <= 1))
            return ulk_rd_fail(r, ULK_EPARSE, "link.pilot.amplitude", "expected a number in (0, 1 - A]");
        l->pilot_amplitude = pa->valuedouble;
        l->has_pilot = 1;
    }
    const cJSON *fr = ulk_rd_member(lj, "framing");
    static const char *const fk[] = {"preamble", "gap", "postamble"};
    if (ulk_rd_keys(r, fr, "link.framing", fk, 3, 0)) return ulk_rd_status(r);
    int64_t v;
    if (ulk_rd_int(r, fr, "preamble", "link.framing", 0, 1e6, NULL, &v)) return ulk_rd_status(r);
    l->preamble = (int)v;
    if (ulk_rd_int(r, fr, "gap", "link.framing", 0, 1e6, NULL, &v)) return ulk_rd_status(r);
    l->gap = (int)v;
    if (ulk_rd_int(r, fr, "postamble", "link.framing", 0, 1e6, NULL, &v)) return ulk_rd_status(r);
    l->postamble = (int)v;
    const cJSON *wj = ulk_rd_member(lj, "word");
    static const char *const wk[] = {"vehicle_address", "system_address_bits", "opcode_bits", "argument_bits", "check", "word_bits"};
    if (ulk_rd_keys(r, wj, "link.word", wk, 6, 0)) return ulk_rd_status(r);
    const cJSON *va = ulk_rd_member(wj, "vehicle_address");
    static const char *const vk[] = {"bits", "value"};
    if (ulk_rd_keys(r, va, "link.word.vehicle_address", vk, 2, 0)) return ulk_rd_status(r);
    if (ulk_rd_int(r, va, "bits", "link.word.vehicle_address", 0, 16, NULL, &v)) return ulk_rd_status(r);
    l->vehicle_bits = (int)v;
    if (ulk_rd_int(r, va, "value", "link.word.vehicle_address", 0, (double)((1u << l->vehicle_bits) - 1), NULL, &v))
        return ulk_rd_status(r);
    l->vehicle_value = (uint32_t)v;
    if (ulk_rd_int(r, wj, "system_address_bits", "link.word", 0, 16, NULL, &v)) return ulk_rd_status(r);
    l->system_bits = (int)v;
    if (ulk_rd_int(r, wj, "opcode_bits", "link.word", 1, 16, NULL, &v)) return ulk_rd_status(r);
    l->opcode_bits = (int)v;
    if (ulk_rd_int(r, wj, "argument_bits", "link.word", 0, 64, NULL, &v)) return ulk_rd_status(r);
    l->argument_bits = (int)v;
    const char *ck = ulk_rd_str(r, wj, "check", "link.word", 16);
    if (!ck) return ulk_rd_status(r);
    int k = -1;
    for (int i = 0; i < 5; i++)
        if (!strcmp(ck, ulk_check_name((ulk_check_kind)i))) k = i;
    if (k < 0) return ulk_rd_fail(r, ULK_EPARSE, "link.word.check", "unknown check '%.20s'", ck);
    l->check = (ulk_check_kind)k;
    l->check_bits = ulk_check_bits(l->check);
    if (ulk_rd_int(r, wj, "word_bits", "link.word", 1, ULK_MAX_WORD_BITS, NULL, &v)) return ulk_rd_status(r);
    l->word_bits = (int)v;
    if (l->word_bits != l->vehicle_bits + l->system_bits + l->opcode_bits + l->argument_bits + l->check_bits)
        return ulk_rd_fail(r, ULK_EPARSE, "link.word.word_bits", "word_bits %d is not the sum of the field widths",
                     l->word_bits);
    return 0;
}


uint64_t ulk_subbit_upload_max_address(const ulk_link *l) { return (1u << l->system_bits) - 1; }
uint64_t ulk_subbit_upload_max_opcode(const ulk_link *l) { return (1u << l->opcode_bits) - 1; }

int ulk_subbit_upload_read_unit(ulk_rd *r, const cJSON *cj, const char *path, const ulk_link *l, ulk_upload_cmd *c)
{
    const char *wh = ulk_rd_str(r, cj, "word", path, 40);
    if (!wh) return ulk_rd_status(r);
    if (ulk_word_from_hex(wh, l->word_bits, &c->word) < 0)
        return ulk_rd_fail(r, ULK_EPARSE, path, "'word' must be %d hex digits of a %d-bit value", (l->word_bits + 3) / 4,
                           l->word_bits);
    c->word.n_bits = l->word_bits;
    return 0;
}

/* The argument is in the argument field, and its raw value is what the word holds there. */
int ulk_subbit_upload_check_arg(ulk_rd *r, const char *ap, const ulk_link *l, const ulk_upload_cmd *c, int pos,
                                const ulk_upload_arg *a)
{
    ulk_word_layout y = ulk_word_layout_of(l);
    pos += y.args_pos;
    if (pos + a->bits > y.check_pos)
        return ulk_rd_fail(r, ULK_EPARSE, ap, "the arguments exceed the %d-bit argument field", l->argument_bits);
    if (ulk_word_get(&c->word, pos, a->bits) != a->raw)
        return ulk_rd_fail(r, ULK_EPARSE, ap, "'raw' does not match the word's argument field");
    return 0;
}

/* The word must say what its fields say. */
int ulk_subbit_upload_check_unit(ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c, int n_arg_bits)
{
    ulk_word_layout y = ulk_word_layout_of(l);
    if (ulk_word_get(&c->word, y.vehicle_pos, l->vehicle_bits) != l->vehicle_value)
        return ulk_rd_fail(r, ULK_EPARSE, path, "the word's vehicle address is not the link's");
    if (ulk_word_get(&c->word, y.system_pos, l->system_bits) != c->system_addr)
        return ulk_rd_fail(r, ULK_EPARSE, path, "the word's system address is not 'system_address'");
    if (ulk_word_get(&c->word, y.opcode_pos, l->opcode_bits) != c->opcode)
        return ulk_rd_fail(r, ULK_EPARSE, path, "the word's opcode is not 'opcode'");
    for (int i = y.args_pos + n_arg_bits; i < y.check_pos; i++)
        if (c->word.bits[i]) return ulk_rd_fail(r, ULK_EPARSE, path, "the word's unused argument bits are not zero");
    if (!ulk_word_check_ok(l, &c->word)) return ulk_rd_fail(r, ULK_EPARSE, path, "the word's check field is wrong");
    return 0;
}

/* Words carry no counts across records. */
int ulk_subbit_upload_counts_create(const ulk_link *l, void **st)
{
    (void)l;
    *st = NULL;
    return 0;
}

int ulk_subbit_upload_counts_check(void *st, ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c,
                                   size_t idx)
{
    (void)st, (void)r, (void)path, (void)l, (void)c, (void)idx;
    return 0;
}

void ulk_subbit_upload_counts_destroy(void *st) { (void)st; }

size_t ulk_subbit_unit_stride(const ulk_link *l) { return (size_t)(l->word_bits + 7) / 8; }

void ulk_subbit_unit_pack(const ulk_link *l, const ulk_upload_cmd *c, uint8_t *dst)
{
    memset(dst, 0, (size_t)(l->word_bits + 7) / 8);
    for (int i = 0; i < l->word_bits; i++)
        if (c->word.bits[i]) dst[i >> 3] |= (uint8_t)(0x80u >> (i & 7));
}
