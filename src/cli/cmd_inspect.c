/* src/cli/cmd_inspect.c - `ulk inspect UPLOAD [--json | --list]`: every word with its fields
 * named, hex, binary, sub-bits and start time; or the upload printed back as a command list.
 * Exit 0 shown; 1 the file is not a valid upload (changed, inconsistent, wrong version);
 * 2 usage or I/O. */
#include <inttypes.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cjson/cJSON.h>

#include "cli.h"
#include "ulk/sdls.h"
#include "ulk/ccsds.h"
#include "ulk/subbit.h"
#include "ulk/upload.h"
#include "ulk/word.h"
#include "util.h"

static void usage(FILE *out)
{
    fprintf(out,
            "usage: ulk inspect UPLOAD [--json | --list]\n"
            "\n"
            "Shows every word of an upload file: its fields (vehicle, system, opcode and\n"
            "mnemonic, each argument raw and in engineering units, check), the word in hex and\n"
            "binary, its sub-bits and start time, and the totals. The file's digest and every\n"
            "word's fields are checked first. For a ccsds-tc upload: every CLTU with its frame\n"
            "and packet header fields by name, opcode and arguments, FECF, frame hex and CLTU hex.\n"
            "\n"
            "options:\n"
            "  --json      the same as JSON (each word's \"hex\" is its W-bit value right-aligned\n"
            "              in ceil(W/4) digits)\n"
            "  --list      print the upload back as a command list (waits, confirm on critical\n"
            "              commands; each command on its source line), ready for ulk compile\n"
            "  -h, --help  this text\n"
            "\nexit: 0 shown, 1 not a valid upload, 2 usage or I/O error\n");
}

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

static void ratio_str(ulk_ratio r, char *buf, int len) { ulk_ratio_format(r, buf, len); }
static int print_text_tc(const char *path, const ulk_upload *u);

/* The value the raw field encodes (calibration applied), with the shortest command-list text
 * that compiles to the same raw beside it when that reads differently ("1.11 deg (list
 * text 1)"): what goes up is the encoded value, not the text. */
static const char *argval_show(const ulk_upload_arg *a, char *buf, size_t len)
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
static void hex_field(uint64_t v, int bits, char *buf, size_t len)
{
    snprintf(buf, len, "0x%0*llX", bits > 0 ? (bits + 3) / 4 : 1, (unsigned long long)v);
}

static int print_text(const char *path, const ulk_upload *u)
{
    if (u->link.profile == ULK_PROFILE_CCSDS_TC) return print_text_tc(path, u);
    const ulk_link *l = &u->link;
    ulk_word_layout y = ulk_word_layout_of(l);
    char rb[64], pz[17], po[17], pi[17];
    ratio_str(l->bit_rate, rb, sizeof rb);
    for (int i = 0; i < l->n_subbits; i++) {
        pz[i] = (char)('0' + l->zero[i]);
        po[i] = (char)('0' + l->one[i]);
        pi[i] = (char)('0' + l->idle[i]);
    }
    pz[l->n_subbits] = po[l->n_subbits] = pi[l->n_subbits] = 0;
    printf("upload     %s (compiled from %s)\n", path, u->source);
    printf("dictionary %s %s  sha256 %s\n", u->dict_name, u->dict_version, u->dict_sha256);
    printf("link       %s bit/s, %d sub-bits per bit (0 -> %s, 1 -> %s, idle %s), %s\n", rb, l->n_subbits, pz, po,
           pi, ulk_line_code_name(l->line_code));
    printf("word       W = %d bits: vehicle %d + system %d + opcode %d + arguments %d + check %d (%s)\n",
           l->word_bits, l->vehicle_bits, l->system_bits, l->opcode_bits, l->argument_bits, l->check_bits,
           ulk_check_name(l->check));
    char *sub = malloc((size_t)l->word_bits * (size_t)(l->n_subbits + 1) + 1);
    if (!sub) return 2;
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        char hex[40], bin[ULK_MAX_WORD_BITS + 1], v[600];
        ulk_word_hex(&c->word, hex);
        ulk_word_bin(&c->word, bin);
        printf("\nword %zu  line %d  %s%s\n", i + 1, c->line, c->mnemonic, c->critical ? "  (critical)" : "");
        printf("  start     %.9f s  after %llu idle patterns", ulk_stream_start_next(u, &cur),
               (unsigned long long)c->idles_before);
        if (c->wait_before.num) {
            char w[64];
            ratio_str(c->wait_before, w, sizeof w);
            printf(" (wait %s s)", w);
        }
        printf("\n");
        if (l->vehicle_bits)
            printf("  vehicle   0x%llX  (bits %d-%d)\n", (unsigned long long)ulk_word_get(&c->word, y.vehicle_pos, l->vehicle_bits),
                   y.vehicle_pos, y.vehicle_pos + l->vehicle_bits - 1);
        else
            printf("  vehicle   (no vehicle address field)\n");
        if (l->system_bits)
            printf("  system    %s = 0x%X  (bits %d-%d)\n", c->system_name, c->system_addr, y.system_pos,
                   y.system_pos + l->system_bits - 1);
        else
            printf("  system    %s  (no system address field)\n", c->system_name);
        printf("  opcode    0x%X = %s  (bits %d-%d)\n", c->opcode, c->mnemonic, y.opcode_pos, y.opcode_pos + l->opcode_bits - 1);
        int pos = y.args_pos;
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            char rh[24];
            hex_field(a->raw, a->bits, rh, sizeof rh);
            printf("  arg       %s = %s  raw %s (%s, %d bit%s at %d)\n", a->name, argval_show(a, v, sizeof v), rh,
                   ulk_arg_type_name(a->type), a->bits, a->bits == 1 ? "" : "s", pos);
            pos += a->bits;
        }
        if (pos < y.check_pos)
            printf("  padding   %d zero bit%s at %d\n", y.check_pos - pos, y.check_pos - pos == 1 ? "" : "s", pos);
        char ck[24];
        hex_field(ulk_word_get(&c->word, y.check_pos, l->check_bits), l->check_bits, ck, sizeof ck);
        if (l->check_bits)
            printf("  check     %s %s  %s\n", ulk_check_name(l->check), ck, ulk_word_check_ok(l, &c->word) ? "ok" : "WRONG");
        else
            printf("  check     none\n");
        printf("  hex       %s\n  binary    %s\n", hex, bin);
        pattern_of(l, &c->word, sub, 1);
        printf("  sub-bits  %s\n", sub);
    }
    free(sub);
    char wa[64];
    ratio_str(u->wait_after, wa, sizeof wa);
    printf("\npostamble  %llu idle patterns%s%s%s\n", (unsigned long long)u->idles_after,
           u->wait_after.num ? " (wait " : "", u->wait_after.num ? wa : "", u->wait_after.num ? " s)" : "");
    printf("totals     %zu words, %llu sub-bits, %.9f s\n", u->n_cmds, (unsigned long long)ulk_upload_n_subbits(u),
           ulk_upload_duration_s(u));
    return 0;
}

/* ---- ccsds-tc: one CLTU per command; fields of the packet and the frame by name ---- */

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
    if (r->verdict == ULK_SDLS_MALFORMED) return -1;
    size_t m = (size_t)l->tc.security.mac_octets, at = c->n_frame - (l->tc.frame.fecf ? 2 : 0) - m;
    for (size_t i = 0; i < m; i++) snprintf(mac_hex + 2 * i, 3, "%02X", c->frame[at + i]);
    return 0;
}

static int print_text_tc(const char *path, const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    const ulk_tc_params *t = &l->tc;
    char rb[64], fs[64];
    ratio_str(l->bit_rate, rb, sizeof rb);
    ratio_str(l->fsc, fs, sizeof fs);
    printf("upload     %s (compiled from %s)\n", path, u->source);
    printf("dictionary %s %s  sha256 %s\n", u->dict_name, u->dict_version, u->dict_sha256);
    printf("link       ccsds-tc, %s bit/s (one channel bit per symbol), %s, %s Hz %s subcarrier\n", rb,
           ulk_line_code_name(l->line_code), fs, ulk_waveform_name(l->waveform));
    printf("frames     SCID %u, VCID %u, %s, segment header %s, FECF %s, randomizer %s\n", t->frame.spacecraft_id,
           t->frame.virtual_channel,
           t->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled (Type-AD)" : "expedited (Type-BD)",
           t->frame.segment_header ? "on" : "off", t->frame.fecf ? "on" : "off", t->frame.randomize ? "on" : "off");
    printf("channel    acquisition %u octets, idle %u octets between CLTUs and after the last\n", t->acquisition_octets,
           t->idle_octets);
    if (t->security.enabled)
        printf("security   SPI %u, key '%s', %s, aes-256-gcm, IV %d octets, MAC %d octets\n", (unsigned)t->security.spi,
               t->security.key, ulk_sdls_service_name(t->security.service), t->security.iv_octets, t->security.mac_octets);
    char *hx = malloc(2 * ULK_CLTU_MAX_OCTETS + 1);
    ulk_sdls_rx_result *sr = malloc(sizeof *sr);
    if (!hx || !sr) {
        free(hx);
        free(sr);
        return 2;
    }
    char mac[2 * ULK_SDLS_MAX_MAC_OCTETS + 1];
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        ulk_tcf_frame fr;
        ulk_spp_packet pk;
        char v[600];
        printf("\nCLTU %zu  line %d  %s%s\n", i + 1, c->line, c->mnemonic, c->critical ? "  (critical)" : "");
        printf("  start     %.9f s  after %llu idle bits", ulk_stream_start_next(u, &cur),
               (unsigned long long)c->idles_before);
        if (c->wait_before.num) {
            char w[64];
            ratio_str(c->wait_before, w, sizeof w);
            printf(" (wait %s s)", w);
        }
        printf("\n");
        if (parse_tc(l, c, &fr, &pk)) {
            printf("  (frame does not parse)\n");
            continue;
        }
        printf("  frame     version %u, bypass %u, control command %u, spare %u, SCID %u, VCID %u, length %u (%zu octets), N(S) %u\n",
               fr.hdr.version, fr.hdr.bypass, fr.hdr.ctrl_cmd, fr.hdr.spare, fr.hdr.scid, fr.hdr.vcid,
               fr.hdr.frame_length, c->n_frame, fr.hdr.seq_num);
        if (t->frame.segment_header) printf("  segment   sequence flags %u, MAP ID %u\n", fr.seg_flags, fr.map_id);
        if (sec_fields(l, c, sr, mac)) {
            if (t->security.enabled) printf("  security  (fields do not parse)\n");
        } else {
            printf("  security  SPI %u, IV counter %" PRIu64 ", MAC %s (%s; checked only with the key)\n", (unsigned)sr->spi,
                   sr->counter, mac, ulk_sdls_service_name(t->security.service));
        }
        printf("  packet    version %u, type %u, secondary header %u, APID 0x%03X = %s, sequence flags %u, count %u, data length %u\n",
               pk.hdr.version, pk.hdr.type, pk.hdr.sec_hdr_flag, pk.hdr.apid, c->system_name, pk.hdr.seq_flags,
               pk.hdr.seq_count, pk.hdr.data_length);
        printf("  opcode    0x%02X = %s  (data octet 0)\n", c->opcode, c->mnemonic);
        int pos = 8;
        for (int k = 0; k < c->n_args; k++) {
            const ulk_upload_arg *a = &c->args[k];
            char rh[24];
            hex_field(a->raw, a->bits, rh, sizeof rh);
            printf("  arg       %s = %s  raw %s (%s, %d bit%s at data bit %d)\n", a->name, argval_show(a, v, sizeof v), rh,
                   ulk_arg_type_name(a->type), a->bits, a->bits == 1 ? "" : "s", pos);
            pos += a->bits;
        }
        if (pos % 8) printf("  padding   %d zero bit%s at data bit %d\n", 8 - pos % 8, 8 - pos % 8 == 1 ? "" : "s", pos);
        if (t->frame.fecf) printf("  FECF      0x%04X  %s\n", fr.fecf_received, fr.fecf_received == fr.fecf_computed ? "ok" : "WRONG");
        hex_of(c->frame, c->n_frame, hx);
        printf("  frame hex %s\n", hx);
        hex_of(c->cltu, c->n_cltu, hx);
        printf("  CLTU hex  %s\n", hx);
        printf("  CLTU      %zu octets = %zu bits: start sequence, %zu codeblocks, tail sequence\n", c->n_cltu, 8 * c->n_cltu,
               (c->n_cltu - 10) / 8);
    }
    free(sr);
    free(hx);
    char wa[64];
    ratio_str(u->wait_after, wa, sizeof wa);
    printf("\nidle       %llu bits after the last CLTU%s%s%s\n", (unsigned long long)u->idles_after,
           u->wait_after.num ? " (wait " : "", u->wait_after.num ? wa : "", u->wait_after.num ? " s)" : "");
    printf("totals     %zu CLTUs, %llu channel bits, %.9f s\n", u->n_cmds, (unsigned long long)ulk_upload_n_subbits(u),
           ulk_upload_duration_s(u));
    return 0;
}

static cJSON *ratio_json(ulk_ratio r)
{
    char b[64];
    ulk_ratio_format(r, b, sizeof b);
    return cJSON_CreateString(b);
}

static int print_json_tc(const ulk_upload *u)
{
    const ulk_link *l = &u->link;
    cJSON *root = cJSON_CreateObject();
    cJSON *d = cJSON_AddObjectToObject(root, "dictionary");
    cJSON_AddStringToObject(d, "name", u->dict_name);
    cJSON_AddStringToObject(d, "version", u->dict_version);
    cJSON_AddStringToObject(d, "sha256", u->dict_sha256);
    cJSON_AddStringToObject(root, "source", u->source);
    cJSON *lj = cJSON_AddObjectToObject(root, "link");
    cJSON_AddStringToObject(lj, "profile", "ccsds-tc");
    cJSON_AddItemToObject(lj, "bit_rate", ratio_json(l->bit_rate));
    cJSON *units = cJSON_AddArrayToObject(root, "cltus");
    char *hx = malloc(2 * ULK_CLTU_MAX_OCTETS + 1);
    if (!root || !hx) { free(hx); cJSON_Delete(root); return 2; }
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        ulk_tcf_frame fr;
        ulk_spp_packet pk;
        cJSON *w = cJSON_CreateObject();
        cJSON_AddItemToArray(units, w);
        cJSON_AddNumberToObject(w, "index", (double)(i + 1));
        cJSON_AddNumberToObject(w, "line", c->line);
        cJSON_AddStringToObject(w, "mnemonic", c->mnemonic);
        cJSON_AddBoolToObject(w, "critical", c->critical);
        cJSON_AddNumberToObject(w, "start_s", ulk_stream_start_next(u, &cur));
        cJSON_AddNumberToObject(w, "idles_before", (double)c->idles_before);
        cJSON_AddItemToObject(w, "wait_s", ratio_json(c->wait_before));
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
    cJSON_AddNumberToObject(root, "idles_after", (double)u->idles_after);
    cJSON_AddItemToObject(root, "wait_after_s", ratio_json(u->wait_after));
    cJSON *t = cJSON_AddObjectToObject(root, "totals");
    cJSON_AddNumberToObject(t, "cltus", (double)u->n_cmds);
    cJSON_AddNumberToObject(t, "channel_bits", (double)ulk_upload_n_subbits(u));
    cJSON_AddNumberToObject(t, "duration_s", ulk_upload_duration_s(u));
    char *txt = cJSON_Print(root);
    cJSON_Delete(root);
    if (!txt) return 2;
    int bad = puts(txt) == EOF;
    free(txt);
    return bad ? 2 : 0;
}

static int print_json(const ulk_upload *u)
{
    if (u->link.profile == ULK_PROFILE_CCSDS_TC) return print_json_tc(u);
    const ulk_link *l = &u->link;
    ulk_word_layout y = ulk_word_layout_of(l);
    cJSON *root = cJSON_CreateObject();
    cJSON *d = cJSON_AddObjectToObject(root, "dictionary");
    cJSON_AddStringToObject(d, "name", u->dict_name);
    cJSON_AddStringToObject(d, "version", u->dict_version);
    cJSON_AddStringToObject(d, "sha256", u->dict_sha256);
    cJSON_AddStringToObject(root, "source", u->source);
    cJSON *lj = cJSON_AddObjectToObject(root, "link");
    cJSON_AddItemToObject(lj, "bit_rate", ratio_json(l->bit_rate));
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
    if (!root || !sub) { free(sub); cJSON_Delete(root); return 2; }
    ulk_start_cursor cur = {0, 0};
    for (size_t i = 0; i < u->n_cmds; i++) {
        const ulk_upload_cmd *c = &u->cmds[i];
        char hex[40], bin[ULK_MAX_WORD_BITS + 1], b[40];
        ulk_word_hex(&c->word, hex);
        ulk_word_bin(&c->word, bin);
        pattern_of(l, &c->word, sub, 0);
        cJSON *w = cJSON_CreateObject();
        cJSON_AddItemToArray(words, w);
        cJSON_AddNumberToObject(w, "index", (double)(i + 1));
        cJSON_AddNumberToObject(w, "line", c->line);
        cJSON_AddStringToObject(w, "mnemonic", c->mnemonic);
        cJSON_AddBoolToObject(w, "critical", c->critical);
        cJSON_AddNumberToObject(w, "start_s", ulk_stream_start_next(u, &cur));
        cJSON_AddNumberToObject(w, "idles_before", (double)c->idles_before);
        cJSON_AddItemToObject(w, "wait_s", ratio_json(c->wait_before));
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
        hex_field(ulk_word_get(&c->word, y.check_pos, l->check_bits), l->check_bits, b, sizeof b);
        cJSON_AddStringToObject(ck, "value", b);
        cJSON_AddBoolToObject(ck, "ok", ulk_word_check_ok(l, &c->word));
    }
    free(sub);
    cJSON_AddNumberToObject(root, "idles_after", (double)u->idles_after);
    cJSON_AddItemToObject(root, "wait_after_s", ratio_json(u->wait_after));
    cJSON *t = cJSON_AddObjectToObject(root, "totals");
    cJSON_AddNumberToObject(t, "words", (double)u->n_cmds);
    cJSON_AddNumberToObject(t, "subbits", (double)ulk_upload_n_subbits(u));
    cJSON_AddNumberToObject(t, "duration_s", ulk_upload_duration_s(u));
    char *txt = cJSON_Print(root);
    cJSON_Delete(root);
    if (!txt) return 2;
    int bad = puts(txt) == EOF;
    free(txt);
    return bad ? 2 : 0;
}

static const struct option opts[] = {{"json", no_argument, NULL, 'j'},
                                     {"list", no_argument, NULL, 'l'},
                                     {"help", no_argument, NULL, 'h'},
                                     {0, 0, 0, 0}};
static const cli_command command = {"inspect", opts, usage};

static int on_opt(int v, const char *arg, void *ctx)
{
    int *mode = ctx; /* bit 0 --json, bit 1 --list */
    *mode |= v == 'j' ? 1 : 2;
    return 0;
}

int cmd_inspect(int argc, char **argv)
{
    int mode = 0, first;
    int r = cli_parse(&command, argc, argv, on_opt, &mode, &first);
    if (r >= 0) return r;
    int json = mode & 1, list = (mode & 2) != 0;
    const char *path = first < argc ? argv[first] : NULL;
    if (argc - first > 1) { fprintf(stderr, "ulk inspect: one upload file at a time\n"); return CLI_EXIT_USAGE_IO; }
    if (!path || (json && list)) {
        fprintf(stderr, "ulk inspect: %s\n", !path ? "UPLOAD is required" : "--json and --list exclude each other");
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    ulk_diag *diag = ulk_diag_create();
    if (!diag) { fprintf(stderr, "ulk inspect: out of memory\n"); return 2; }
    ulk_upload *u = NULL;
    int rc = ulk_upload_read(path, &u, diag);
    if (rc < 0) {
        ulk_diag_print(diag, stderr);
        ulk_diag_destroy(diag);
        return cli_exit_for(rc);
    }
    int code;
    if (list) code = ulk_upload_print_list(u, stdout) < 0 ? 2 : 0;
    else if (json) code = print_json(u);
    else code = print_text(cli_is_std(path) ? "<stdin>" : path, u);
    ulk_upload_destroy(u);
    ulk_diag_destroy(diag);
    return code;
}
