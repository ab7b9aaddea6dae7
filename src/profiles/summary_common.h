/* src/profiles/summary_common.h - what the profiles' dictionary summaries (`ulk validate`)
 * share (internal). */
#ifndef ULK_SUMMARY_COMMON_H
#define ULK_SUMMARY_COMMON_H

#include <stdio.h>

#include <cjson/cJSON.h>

#include "ulk/dict.h"

/* rates and durations of a dictionary's link, exact and as text */
typedef struct {
    ulk_ratio rs, k;
    int k_ok;
    double word_s;
    char word_txt[64], rs_txt[64], k_txt[64], rb_txt[64];
} ulk_summary_figs;

void ulk_summary_figures(const ulk_dict *d, ulk_summary_figs *f);
/* commands marked critical */
int ulk_summary_n_critical(const ulk_dict *d);
/* the JSON summary's first members (name, version, profile, systems, commands); NULL when out
 * of memory */
cJSON *ulk_summary_json_head(const ulk_dict *d);
/* the text summary's last lines: the critical commands by mnemonic, and the hash */
void ulk_summary_text_tail(const ulk_dict *d, FILE *out);

#endif
