/* src/profiles/subbit/subbit_summary.c - `ulk validate`'s summary of a sub-bit dictionary:
 * word length and duration, sub-bit rate, k = f_sc / R_s, critical commands, hash. */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "summary_common.h"
#include "ulk/word.h"

void ulk_subbit_summary_text(const ulk_dict *d, FILE *out)
{
    ulk_summary_figs f;
    ulk_summary_figures(d, &f);
    const ulk_link *L = &d->link;
    fprintf(out, "%s: dictionary %s version %s\n", d->file, d->name, d->version);
    fprintf(out, "  systems:        %d\n", d->n_systems);
    fprintf(out, "  commands:       %d (%d critical)\n", d->n_commands, ulk_summary_n_critical(d));
    fprintf(out, "  word length W:  %d bits (vehicle %d + system %d + opcode %d + arguments %d + %s %d)\n",
            L->word_bits, L->vehicle_bits, L->system_bits, L->opcode_bits, L->argument_bits,
            ulk_check_name(L->check), L->check_bits);
    fprintf(out, "  word duration:  %s s = W / R_b (R_b = %s bit/s)\n", f.word_txt, f.rb_txt);
    fprintf(out, "  sub-bit rate:   R_s = %s sub-bit/s (n = %d)\n", f.rs_txt, L->n_subbits);
    fprintf(out, "  subcarrier:     k = f_sc / R_s = %s\n", f.k_ok ? f.k_txt : "?");
    ulk_summary_text_tail(d, out);
}

cJSON *ulk_subbit_summary_json(const ulk_dict *d)
{
    ulk_summary_figs f;
    ulk_summary_figures(d, &f);
    const ulk_link *L = &d->link;
    cJSON *s = ulk_summary_json_head(d);
    if (!s) return NULL;
    cJSON_AddNumberToObject(s, "word_bits", L->word_bits);
    cJSON_AddNumberToObject(s, "word_duration_s", f.word_s);
    cJSON_AddStringToObject(s, "word_duration_exact_s", f.word_txt);
    cJSON_AddNumberToObject(s, "bit_rate", ulk_ratio_to_double(L->bit_rate));
    cJSON_AddNumberToObject(s, "subbits_per_bit", L->n_subbits);
    cJSON_AddNumberToObject(s, "subbit_rate", ulk_ratio_to_double(f.rs));
    cJSON_AddStringToObject(s, "subbit_rate_exact", f.rs_txt);
    if (f.k_ok) {
        cJSON_AddNumberToObject(s, "subcarrier_k", ulk_ratio_to_double(f.k));
        cJSON_AddStringToObject(s, "subcarrier_k_exact", f.k_txt);
    }
    cJSON *crit = cJSON_AddArrayToObject(s, "critical");
    for (int i = 0; i < d->n_commands; i++)
        if (d->commands[i].critical) cJSON_AddItemToArray(crit, cJSON_CreateString(d->commands[i].mnemonic));
    cJSON_AddStringToObject(s, "sha256", d->sha256);
    return s;
}
