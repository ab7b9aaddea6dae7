/* src/profiles/subbit/subbit_upload.c - the sub-bit profile's parts of the upload file
 * (docs/spec/upload.md): the link object and each command's word. */
#include <stdio.h>

#include "profiles.h"
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
    ulk_jb_put(b, ",\n  \"link\": {\n    \"profile\": \"subbit\",\n    \"bit_rate\": ");
    ulk_jb_ratio(b, l->bit_rate);
    ulk_jb_printf(b, ",\n    \"subbits\": {\"zero\": \"%s\", \"one\": \"%s\", \"idle\": \"%s\"},\n", pz, po, pi);
    ulk_jb_printf(b, "    \"line_code\": \"%s\",\n    \"subcarrier\": {\"frequency\": ", ulk_line_code_name(l->line_code));
    ulk_jb_ratio(b, l->fsc);
    ulk_jb_printf(b, ", \"waveform\": \"%s\", \"amplitude\": ", ulk_waveform_name(l->waveform));
    ulk_jb_double(b, l->amplitude);
    ulk_jb_put(b, "},\n    \"pilot\": ");
    if (l->has_pilot) {
        ulk_jb_put(b, "{\"frequency\": ");
        ulk_jb_ratio(b, l->fp);
        ulk_jb_put(b, ", \"amplitude\": ");
        ulk_jb_double(b, l->pilot_amplitude);
        ulk_jb_put(b, "}");
    } else {
        ulk_jb_put(b, "null");
    }
    ulk_jb_printf(b, ",\n    \"framing\": {\"preamble\": %d, \"gap\": %d, \"postamble\": %d},\n", l->preamble, l->gap,
              l->postamble);
    ulk_jb_printf(b,
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
    ulk_jb_printf(b, "],\n     \"word\": \"%s\"}", hex);
}
