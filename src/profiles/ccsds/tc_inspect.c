/* src/profiles/ccsds/tc_inspect.c - `ulk inspect` of a ccsds-tc upload: one CLTU per command;
 * fields of the packet and the frame by name; as text or JSON. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "inspect_common.h"
#include "profiles.h"
#include "ulk/ccsds.h"
#include "ulk/sdls.h"
#include "ulk/subbit.h"
#include "util.h"


static void hex_of(const uint8_t *p, size_t n, char *out)
{
    for (size_t i = 0; i < n; i++) sprintf(out + 2 * i, "%02X", p[i]);
    out[2 * n] = 0;
}

/* The frame and packet of c parsed back (the upload reader has checked they are the ones
 * its fields make). Returns 0 when both parse. */
static int parse_tc(const ulk_link *l, const ulk_upload_cmd *c, ulk_tcf_frame *fr, ulk_spp_packet *pk)
{
    if (ulk_tcf_parse(&l->tc.frame, c->frame, c->n_frame, fr) || fr->verdict != ULK_TCF_OK) return -1;
    if (l->tc.security.enabled && l->tc.security.service == ULK_SDLS_AUTHENTICATED_ENCRYPTION) {
        /* the packet is encrypted: its header as the upload's fields say (the reader checked
         * everything the key does not protect) */
        memset(pk, 0, sizeof *pk);
        pk->hdr.type = ULK_SPP_TYPE_TC;
        pk->hdr.apid = (uint16_t)c->system_addr;
        pk->hdr.seq_flags = ULK_SPP_SEQ_UNSEGMENTED;
        pk->hdr.seq_count = c->seq_count;
        pk->hdr.data_length = (uint16_t)(fr->n_data - ULK_SPP_HDR_OCTETS - 1);
        return 0;
    }
    if (ulk_spp_parse(fr->data, fr->n_data, pk) || pk->verdict != ULK_SPP_OK) return -1;
    return 0;
}

/* SPI, IV counter and MAC of a secured frame (no key needed to read them). */
static int sec_fields(const ulk_link *l, const ulk_upload_cmd *c, ulk_sdls_rx_result *r, char *mac_hex)
{
    if (!l->tc.security.enabled) return -1;
    ulk_sdls_frame_read(&l->tc.frame, &l->tc.security, c->frame, c->n_frame, r);
    if (r->verdict == ULK_SEC_MALFORMED) return -1;
    size_t m = (size_t)l->tc.security.mac_octets, at = c->n_frame - (l->tc.frame.fecf ? 2 : 0) - m;
    for (size_t i = 0; i < m; i++) snprintf(mac_hex + 2 * i, 3, "%02X", c->frame[at + i]);
    return 0;
}

int ulk_tc_inspect_text(FILE *out, const char *path, const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    const ulk_tc_params *t = &l->tc;
    char rb[64], fs[64];
    ulk_ratio_format(l->bit_rate, rb, sizeof rb);
    ulk_ratio_format(l->fsc, fs, sizeof fs);
    ulk_inspect_text_head(out, path, u);
    fprintf(out, "link       ccsds-tc, %s bit/s (one channel bit per symbol), %s, %s Hz %s subcarrier\n", rb,
           ulk_line_code_name(l->line_code), fs, ulk_waveform_name(l->waveform));
    fprintf(out, "frames     SCID %u, VCID %u, %s, segment header %s, FECF %s, randomizer %s\n", t->frame.spacecraft_id,
           t->frame.virtual_channel,
           t->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled (Type-AD)" : "expedited (Type-BD)",
           t->frame.segment_header ? "on" : "off", t->frame.fecf ? "on" : "off", t->frame.randomize ? "on" : "off");
    fprintf(out, "channel    acquisition %u octets, idle %u octets between CLTUs and after the last\n", t->acquisition_octets,
           t->idle_octets);
    if (t->security.enabled)
        fprintf(out, "security   SPI %u, key '%s', %s, aes-256-gcm, IV %d octets, MAC %d octets\n", (unsigned)t->security.spi,
               t->security.key, ulk_sdls_service_name(t->security.service), t->security.iv_octets, t->security.mac_octets);
    char *hx = malloc(2 * ULK_CLTU_MAX_OCTETS + 1);
    ulk_sdls_rx_result *sr = malloc(sizeof *sr);
    if (!hx || !sr) {
        free(hx);
        free(sr);
        return ULK_ENOMEM;
    }
    char mac[2 * ULK_SDLS_MAX_MAC_OCTETS + 1];
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        ulk_tcf_frame fr;
        ulk_spp_packet pk;
        char v[600];
        ulk_inspect_text_unit_head(out, "CLTU", i, c, ulk_stream_start_next(u, &cur), "idle bits");
        if (parse_tc(l, c, &fr, &pk)) {
            fprintf(out, "  (frame does not parse)\n");
            continue;
        }
        fprintf(out, "  frame     version %u, bypass %u, control command %u, spare %u, SCID %u, VCID %u, length %u (%zu octets), N(S) %u\n",
               fr.hdr.version, fr.hdr.bypass, fr.hdr.ctrl_cmd, fr.hdr.spare, fr.hdr.scid, fr.hdr.vcid,
               fr.hdr.frame_length, c->n_frame, fr.hdr.seq_num);
        if (t->frame.segment_header) fprintf(out, "  segment   sequence flags %u, MAP ID %u\n", fr.seg_flags, fr.map_id);
        if (sec_fields(l, c, sr, mac)) {
            if (t->security.enabled) fprintf(out, "  security  (fields do not parse)\n");
        } else {
            fprintf(out, "  security  SPI %u, IV counter %" PRIu64 ", MAC %s (%s; checked only with the key)\n", (unsigned)sr->spi,
                   sr->counter, mac, ulk_sdls_service_name(t->security.service));
        }
        fprintf(out, "  packet    version %u, type %u, secondary header %u, APID 0x%03X = %s, sequence flags %u, count %u, data length %u\n",
               pk.hdr.version, pk.hdr.type, pk.hdr.sec_hdr_flag, pk.hdr.apid, c->system_name, pk.hdr.seq_flags,
               pk.hdr.seq_count, pk.hdr.data_length);
        fprintf(out, "  opcode    0x%02X = %s  (data octet 0)\n", c->opcode, c->mnemonic);
        int pos = 8;
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            char rh[24];
            ulk_inspect_hex_field(a->raw, a->bits, rh, sizeof rh);
            fprintf(out, "  arg       %s = %s  raw %s (%s, %d bit%s at data bit %d)\n", a->name, ulk_inspect_argval(a, v, sizeof v), rh,
                   ulk_arg_type_name(a->type), a->bits, a->bits == 1 ? "" : "s", pos);
            pos += a->bits;
        }
        if (pos % 8) fprintf(out, "  padding   %d zero bit%s at data bit %d\n", 8 - pos % 8, 8 - pos % 8 == 1 ? "" : "s", pos);
        if (t->frame.fecf) fprintf(out, "  FECF      0x%04X  %s\n", fr.fecf_received, fr.fecf_received == fr.fecf_computed ? "ok" : "WRONG");
        hex_of(c->frame, c->n_frame, hx);
        fprintf(out, "  frame hex %s\n", hx);
        hex_of(c->cltu, c->n_cltu, hx);
        fprintf(out, "  CLTU hex  %s\n", hx);
        fprintf(out, "  CLTU      %zu octets = %zu bits: start sequence, %zu codeblocks, tail sequence\n", c->n_cltu, 8 * c->n_cltu,
               (c->n_cltu - 10) / 8);
    }
    free(sr);
    free(hx);
    ulk_inspect_text_tail(out, u, "idle", "bits after the last CLTU", "CLTUs", "channel bits");
    return 0;
}

int ulk_tc_inspect_json(FILE *out, const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    cJSON *lj = NULL, *root = ulk_inspect_json_head(u, &lj);
    if (!root) return ULK_ENOMEM;
    cJSON_AddStringToObject(lj, "profile", "ccsds-tc");
    cJSON_AddItemToObject(lj, "bit_rate", ulk_inspect_ratio_json(l->bit_rate));
    cJSON *units = cJSON_AddArrayToObject(root, "cltus");
    char *hx = malloc(2 * ULK_CLTU_MAX_OCTETS + 1);
    if (!root || !hx) { free(hx); cJSON_Delete(root); return ULK_ENOMEM; }
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        ulk_tcf_frame fr;
        ulk_spp_packet pk;
        cJSON *w = cJSON_CreateObject();
        cJSON_AddItemToArray(units, w);
        ulk_inspect_json_unit_head(w, i, c, ulk_stream_start_next(u, &cur));
        cJSON *s = cJSON_AddObjectToObject(w, "system");
        cJSON_AddStringToObject(s, "name", c->system_name);
        cJSON_AddNumberToObject(s, "address", c->system_addr);
        cJSON_AddNumberToObject(w, "opcode", c->opcode);
        if (parse_tc(l, c, &fr, &pk) == 0) {
            cJSON *f = cJSON_AddObjectToObject(w, "frame");
            cJSON_AddNumberToObject(f, "version", fr.hdr.version);
            cJSON_AddNumberToObject(f, "bypass", fr.hdr.bypass);
            cJSON_AddNumberToObject(f, "control_command", fr.hdr.ctrl_cmd);
            cJSON_AddNumberToObject(f, "spare", fr.hdr.spare);
            cJSON_AddNumberToObject(f, "spacecraft_id", fr.hdr.scid);
            cJSON_AddNumberToObject(f, "virtual_channel", fr.hdr.vcid);
            cJSON_AddNumberToObject(f, "frame_length", fr.hdr.frame_length);
            cJSON_AddNumberToObject(f, "sequence_number", fr.hdr.seq_num);
            if (l->tc.frame.segment_header) cJSON_AddNumberToObject(f, "map_id", fr.map_id);
            if (l->tc.frame.fecf) cJSON_AddNumberToObject(f, "fecf", fr.fecf_received);
            ulk_sdls_rx_result *sr = malloc(sizeof *sr);
            char mac[2 * ULK_SDLS_MAX_MAC_OCTETS + 1];
            if (sr && sec_fields(l, c, sr, mac) == 0) {
                cJSON *sj = cJSON_AddObjectToObject(f, "security");
                cJSON_AddNumberToObject(sj, "spi", sr->spi);
                cJSON_AddNumberToObject(sj, "iv_counter", (double)sr->counter);
                cJSON_AddStringToObject(sj, "mac", mac);
            }
            free(sr);
            cJSON *p = cJSON_AddObjectToObject(w, "packet");
            cJSON_AddNumberToObject(p, "version", pk.hdr.version);
            cJSON_AddNumberToObject(p, "type", pk.hdr.type);
            cJSON_AddNumberToObject(p, "secondary_header", pk.hdr.sec_hdr_flag);
            cJSON_AddNumberToObject(p, "apid", pk.hdr.apid);
            cJSON_AddNumberToObject(p, "sequence_flags", pk.hdr.seq_flags);
            cJSON_AddNumberToObject(p, "sequence_count", pk.hdr.seq_count);
            cJSON_AddNumberToObject(p, "data_length", pk.hdr.data_length);
        }
        cJSON *args = cJSON_AddObjectToObject(w, "args");
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            if (a->type == ULK_ARG_ENUM) cJSON_AddStringToObject(args, a->name, a->text);
            else if (a->type == ULK_ARG_BOOLEAN) cJSON_AddBoolToObject(args, a->name, a->raw != 0);
            else cJSON_AddNumberToObject(args, a->name, a->eng);
        }
        hex_of(c->frame, c->n_frame, hx);
        cJSON_AddStringToObject(w, "frame_hex", hx);
        hex_of(c->cltu, c->n_cltu, hx);
        cJSON_AddStringToObject(w, "cltu_hex", hx);
    }
    free(hx);
    return ulk_inspect_json_finish(out, root, u, "cltus", "channel_bits");
}
