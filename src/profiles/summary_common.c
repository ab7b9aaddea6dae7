/* src/profiles/summary_common.c - what the profiles' dictionary summaries share. */
#include <string.h>

#include "profiles.h"
#include "summary_common.h"

void ulk_summary_figures(const ulk_dict *d, ulk_summary_figs *f)
{
    memset(f, 0, sizeof *f);
    const ulk_link *L = &d->link;
    f->rs = ulk_link_subbit_rate(L);
    ulk_ratio_format(f->rs, f->rs_txt, sizeof f->rs_txt);
    ulk_ratio_format(L->bit_rate, f->rb_txt, sizeof f->rb_txt);
    f->k_ok = ulk_ratio_div(L->fsc, f->rs, &f->k) == 0;
    if (f->k_ok) ulk_ratio_format(f->k, f->k_txt, sizeof f->k_txt);
    ulk_ratio w;
    if (ulk_ratio_div(ulk_ratio_make(L->word_bits, 1), L->bit_rate, &w) == 0) {
        ulk_ratio_format(w, f->word_txt, sizeof f->word_txt);
        f->word_s = ulk_ratio_to_double(w);
    }
}

int ulk_summary_n_critical(const ulk_dict *d)
{
    int n = 0;
    for (int i = 0; i < d->n_commands; i++) n += d->commands[i].critical != 0;
    return n;
}

cJSON *ulk_summary_json_head(const ulk_dict *d)
{
    const ulk_link *L = &d->link;
    cJSON *s = cJSON_CreateObject();
    cJSON_AddStringToObject(s, "name", d->name);
    cJSON_AddStringToObject(s, "version", d->version);
    cJSON_AddStringToObject(s, "profile", ulk_profile_of(L)->name);
    cJSON_AddNumberToObject(s, "systems", d->n_systems);
    cJSON_AddNumberToObject(s, "commands", d->n_commands);
    return s;
}

void ulk_summary_text_tail(const ulk_dict *d, FILE *out)
{
    fprintf(out, "  critical:      ");
    int any = 0;
    for (int i = 0; i < d->n_commands; i++)
        if (d->commands[i].critical) { fprintf(out, " %s", d->commands[i].mnemonic); any = 1; }
    fprintf(out, "%s\n", any ? "" : " (none)");
    fprintf(out, "  sha256:         %s\n", d->sha256);
}
