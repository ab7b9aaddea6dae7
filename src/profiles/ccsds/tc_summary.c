/* src/profiles/ccsds/tc_summary.c - `ulk validate`'s summary of a ccsds-tc dictionary: the
 * frame choices, security, the smallest and largest command frame and CLTU, k = f_sc / R. */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "summary_common.h"
#include "ulk/ccsds.h"
#include "ulk/sdls.h"

/* ccsds-tc: the largest command's frame and CLTU (one packet per frame, one frame per CLTU). */
typedef struct {
    size_t min_frame, max_frame, max_cltu;
    const char *max_mnemonic;
    char cltu_txt[64];
} tc_figures;

static void compute_tc(const ulk_dict *d, tc_figures *t)
{
    memset(t, 0, sizeof *t);
    const ulk_ccsds_tc *tc = &d->link.tc.frame;
    for (int i = 0; i < d->n_commands; i++) {
        size_t data = 1 + ((size_t)d->commands[i].packed_bits + 7) / 8;
        size_t fr = ulk_tcf_octets(tc, ULK_SPP_HDR_OCTETS + data);
        if (!t->min_frame || fr < t->min_frame) t->min_frame = fr;
        if (fr > t->max_frame) {
            t->max_frame = fr;
            t->max_mnemonic = d->commands[i].mnemonic;
        }
    }
    t->max_cltu = ulk_cltu_octets(t->max_frame);
    ulk_ratio s;
    if (ulk_ratio_div(ulk_ratio_make((int64_t)t->max_cltu * 8, 1), d->link.bit_rate, &s) == 0)
        ulk_ratio_format(s, t->cltu_txt, sizeof t->cltu_txt);
}

void ulk_tc_summary_text(const ulk_dict *d, FILE *out)
{
    ulk_summary_figs f;
    tc_figures t;
    ulk_summary_figures(d, &f);
    compute_tc(d, &t);
    const ulk_link *L = &d->link;
    const ulk_tc_params *T = &L->tc;
    fprintf(out, "%s: dictionary %s version %s\n", d->file, d->name, d->version);
    fprintf(out, "  profile:        ccsds-tc (one Space Packet per TC frame per CLTU)\n");
    fprintf(out, "  systems:        %d (APIDs)\n", d->n_systems);
    fprintf(out, "  commands:       %d (%d critical)\n", d->n_commands, ulk_summary_n_critical(d));
    fprintf(out, "  frames:         SCID %u, VCID %u, ", T->frame.spacecraft_id, T->frame.virtual_channel);
    if (T->frame.service == ULK_TC_SEQUENCE_CONTROLLED)
        fprintf(out, "sequence-controlled (Type-AD, first N(S) %u)", T->first_sequence);
    else
        fprintf(out, "expedited (Type-BD)");
    if (T->frame.segment_header) fprintf(out, ", segment header MAP ID %u", T->frame.map_id);
    else fprintf(out, ", no segment header");
    fprintf(out, ", FECF %s, randomizer %s\n", T->frame.fecf ? "on" : "off", T->frame.randomize ? "on" : "off");
    if (T->security.enabled)
        fprintf(out, "  security:       SPI %u, key '%s', %s, aes-256-gcm, IV %d + MAC %d octets per frame, window %u\n",
                (unsigned)T->security.spi, T->security.key, ulk_sdls_service_name(T->security.service),
                T->security.iv_octets, T->security.mac_octets, (unsigned)T->security.window);
    fprintf(out, "  frame size:     %zu..%zu octets (largest: %s), CLTU up to %zu octets = %s s at R\n", t.min_frame,
            t.max_frame, t.max_mnemonic ? t.max_mnemonic : "?", t.max_cltu, t.cltu_txt);
    fprintf(out, "  channel:        acquisition %u octets, idle %u octets, start sequence errors tolerated %d, BCH %s\n",
            T->acquisition_octets, T->idle_octets, T->frame.start_errors,
            T->frame.correction == ULK_BCH_TED ? "ted (detection only)" : "sec (single error correction)");
    fprintf(out, "  bit rate:       R = R_s = %s bit/s (%s)\n", f.rb_txt, ulk_line_code_name(L->line_code));
    fprintf(out, "  subcarrier:     k = f_sc / R = %s (%s)\n", f.k_ok ? f.k_txt : "?", ulk_waveform_name(L->waveform));
    ulk_summary_text_tail(d, out);
}

cJSON *ulk_tc_summary_json(const ulk_dict *d)
{
    ulk_summary_figs f;
    ulk_summary_figures(d, &f);
    const ulk_link *L = &d->link;
    cJSON *s = ulk_summary_json_head(d);
    if (!s) return NULL;
    const ulk_tc_params *T = &L->tc;
    tc_figures t;
    compute_tc(d, &t);
    cJSON *tc = cJSON_AddObjectToObject(s, "tc");
    cJSON_AddNumberToObject(tc, "spacecraft_id", T->frame.spacecraft_id);
    cJSON_AddNumberToObject(tc, "virtual_channel", T->frame.virtual_channel);
    cJSON_AddStringToObject(tc, "service", T->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled" : "expedited");
    cJSON_AddNumberToObject(tc, "first_sequence", T->first_sequence);
    if (T->frame.segment_header) cJSON_AddNumberToObject(tc, "map_id", T->frame.map_id);
    else cJSON_AddNullToObject(tc, "map_id");
    cJSON_AddBoolToObject(tc, "fecf", T->frame.fecf);
    cJSON_AddBoolToObject(tc, "randomize", T->frame.randomize);
    cJSON_AddNumberToObject(tc, "acquisition_octets", T->acquisition_octets);
    cJSON_AddNumberToObject(tc, "idle_octets", T->idle_octets);
    cJSON_AddNumberToObject(tc, "start_errors", T->frame.start_errors);
    cJSON_AddStringToObject(tc, "correction", T->frame.correction == ULK_BCH_TED ? "ted" : "sec");
    if (T->security.enabled) {
        cJSON *sj = cJSON_AddObjectToObject(tc, "security");
        cJSON_AddNumberToObject(sj, "spi", T->security.spi);
        cJSON_AddStringToObject(sj, "key", T->security.key);
        cJSON_AddStringToObject(sj, "service", ulk_sdls_service_name(T->security.service));
        cJSON_AddStringToObject(sj, "algorithm", "aes-256-gcm");
        cJSON_AddNumberToObject(sj, "iv_octets", T->security.iv_octets);
        cJSON_AddNumberToObject(sj, "mac_octets", T->security.mac_octets);
        cJSON_AddNumberToObject(sj, "window", T->security.window);
    }
    cJSON_AddNumberToObject(s, "min_frame_octets", (double)t.min_frame);
    cJSON_AddNumberToObject(s, "max_frame_octets", (double)t.max_frame);
    cJSON_AddNumberToObject(s, "max_cltu_octets", (double)t.max_cltu);
    cJSON_AddNumberToObject(s, "bit_rate", ulk_ratio_to_double(L->bit_rate));
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
