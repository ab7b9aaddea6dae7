/* src/profiles/ccsds/tc_upload.c - the ccsds-tc profile's parts of the upload file
 * (docs/spec/upload.md): the link object and each command's counts, frame and CLTU, written
 * and read back. */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "upload_read.h"
#include "upload_text.h"
#include "ulk/ccsds.h"
#include "ulk/sdls.h"
#include "util.h"

/* The link object of a ccsds-tc upload: the dictionary's link section, every default applied. */
void ulk_tc_upload_write_link(const ulk_link *l, ulk_jbuf *b)
{
    const ulk_tc_params *t = &l->tc;
    static const char head[] = ",\n  \"link\": {\n    \"profile\": \"ccsds-tc\",\n    \"bit_rate\": ";
    ulk_text_puts(b, head);
    ulk_jb_ratio(b, l->bit_rate);
    ulk_text_printf(b, ",\n    \"line_code\": \"%s\",\n    \"subcarrier\": {\"frequency\": ", ulk_line_code_name(l->line_code));
    ulk_jb_ratio(b, l->fsc);
    ulk_text_printf(b, ", \"waveform\": \"%s\", \"amplitude\": ", ulk_waveform_name(l->waveform));
    ulk_jb_double(b, l->amplitude);
    ulk_text_printf(b,
              "},\n    \"tc\": {\"spacecraft_id\": %u, \"virtual_channel\": %u, \"service\": \"%s\", "
              "\"first_sequence\": %u, \"segment_header\": ",
              t->frame.spacecraft_id, t->frame.virtual_channel,
              t->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled" : "expedited", t->first_sequence);
    if (t->frame.segment_header) ulk_text_printf(b, "{\"map_id\": %u}", t->frame.map_id);
    else ulk_text_puts(b, "null");
    ulk_text_printf(b,
              ",\n           \"fecf\": %s, \"randomize\": %s, \"acquisition_octets\": %u, \"idle_octets\": %u, "
              "\"start_errors\": %d, \"correction\": \"%s\"}\n  },\n",
              t->frame.fecf ? "true" : "false", t->frame.randomize ? "true" : "false", t->acquisition_octets,
              t->idle_octets, t->frame.start_errors, t->frame.correction == ULK_BCH_TED ? "ted" : "sec");
    if (t->security.enabled && !ulk_jb_oom(b)) {
        /* the security association by key name: key material never enters an upload */
        const ulk_sdls_sa *sa = &t->security;
        ulk_text_unput(b, strlen("}\n  },\n")); /* reopen the tc object written just above */
        ulk_text_printf(b, ",\n           \"security\": {\"spi\": %u, \"key\": ", (unsigned)sa->spi);
        ulk_text_json_str(b, sa->key);
        ulk_text_printf(b, ", \"service\": \"%s\", \"algorithm\": \"aes-256-gcm\", \"iv_octets\": %d, \"mac_octets\": %d, "
                     "\"window\": %u}}\n  },\n",
                  ulk_sdls_service_name(sa->service), sa->iv_octets, sa->mac_octets, (unsigned)sa->window);
    }
}

/* The end of a command record: packet and frame counts, the frame and the CLTU in hex. */
void ulk_tc_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, ulk_jbuf *b)
{
    (void)l;
    ulk_text_printf(b, "],\n     \"sequence_count\": %u, \"frame_sequence\": %u,\n     \"frame\": \"", c->seq_count,
                  c->frame_seq);
    ulk_text_hex(b, c->frame, c->n_frame);
    static const char mid[] = "\",\n     \"cltu\": \"";
    ulk_text_puts(b, mid);
    ulk_text_hex(b, c->cltu, c->n_cltu);
    ulk_text_puts(b, "\"}");
}

/* ---------------------------------------------------------------- reader */

const char *const ulk_tc_upload_link_members[5] = {"profile", "bit_rate", "line_code", "subcarrier", "tc"};
const char *const ulk_tc_upload_cmd_members[13] = {"line", "mnemonic", "system", "system_address", "opcode",
                                                   "critical", "wait_s", "idles_before", "args", "sequence_count",
                                                   "frame_sequence", "frame", "cltu"};

/* The link object of a ccsds-tc upload (every field present; the dictionary's rules). */
int ulk_tc_upload_read_link(ulk_rd *r, const cJSON *lj, ulk_link *l)
{
    if (ulk_rd_keys(r, lj, "link", ulk_tc_upload_link_members, 5, 0)) return ulk_rd_status(r);
    l->profile = ULK_PROFILE_CCSDS_TC;
    l->n_subbits = 1;
    l->one[0] = 1;
    if (ulk_rd_ratio(r, lj, "bit_rate", "link", 0, &l->bit_rate)) return ulk_rd_status(r);
    if (ulk_rd_line_code(r, lj, l)) return ulk_rd_status(r);
    if (ulk_rd_subcarrier(r, ulk_rd_member(lj, "subcarrier"), l)) return ulk_rd_status(r);
    const cJSON *tj = ulk_rd_member(lj, "tc");
    static const char *const tk[] = {"spacecraft_id", "virtual_channel", "service", "first_sequence", "segment_header",
                                     "fecf", "randomize", "acquisition_octets", "idle_octets", "start_errors",
                                     "correction", "security"};
    /* every member but "security", which only a secured link has */
    if (ulk_rd_keys(r, tj, "link.tc", tk, 12, 1)) return ulk_rd_status(r);
    for (int i = 0; i < 11; i++)
        if (!ulk_rd_member(tj, tk[i])) return ulk_rd_fail(r, ULK_EPARSE, "link.tc", "missing member '%s'", tk[i]);
    ulk_tc_params *t = &l->tc;
    int64_t v;
    if (ulk_rd_int(r, tj, "spacecraft_id", "link.tc", 0, ULK_TCF_MAX_SCID, NULL, &v)) return ulk_rd_status(r);
    t->frame.spacecraft_id = (uint16_t)v;
    if (ulk_rd_int(r, tj, "virtual_channel", "link.tc", 0, ULK_TCF_MAX_VCID, NULL, &v)) return ulk_rd_status(r);
    t->frame.virtual_channel = (uint8_t)v;
    const char *sv = ulk_rd_str(r, tj, "service", "link.tc", 32);
    if (!sv) return ulk_rd_status(r);
    if (!strcmp(sv, "expedited")) t->frame.service = ULK_TC_EXPEDITED;
    else if (!strcmp(sv, "sequence-controlled")) t->frame.service = ULK_TC_SEQUENCE_CONTROLLED;
    else return ulk_rd_fail(r, ULK_EPARSE, "link.tc.service", "expected expedited or sequence-controlled");
    if (ulk_rd_int(r, tj, "first_sequence", "link.tc", 0, 255, NULL, &v)) return ulk_rd_status(r);
    t->first_sequence = (uint8_t)v;
    const cJSON *sh = ulk_rd_member(tj, "segment_header");
    if (!cJSON_IsNull(sh)) {
        static const char *const mk[] = {"map_id"};
        if (ulk_rd_keys(r, sh, "link.tc.segment_header", mk, 1, 0)) return ulk_rd_status(r);
        if (ulk_rd_int(r, sh, "map_id", "link.tc.segment_header", 0, ULK_TCF_MAX_MAP_ID, NULL, &v)) return ulk_rd_status(r);
        t->frame.segment_header = 1;
        t->frame.map_id = (uint8_t)v;
    }
    if (ulk_rd_bool(r, tj, "fecf", "link.tc", &t->frame.fecf)) return ulk_rd_status(r);
    if (ulk_rd_bool(r, tj, "randomize", "link.tc", &t->frame.randomize)) return ulk_rd_status(r);
    if (ulk_rd_int(r, tj, "acquisition_octets", "link.tc", 0, 1e8, NULL, &v)) return ulk_rd_status(r);
    t->acquisition_octets = (uint32_t)v;
    if (ulk_rd_int(r, tj, "idle_octets", "link.tc", 0, 1e8, NULL, &v)) return ulk_rd_status(r);
    t->idle_octets = (uint32_t)v;
    if (ulk_rd_int(r, tj, "start_errors", "link.tc", 0, 1, NULL, &v)) return ulk_rd_status(r);
    t->frame.start_errors = (int)v;
    const char *cm = ulk_rd_str(r, tj, "correction", "link.tc", 8);
    if (!cm) return ulk_rd_status(r);
    if (!strcmp(cm, "sec")) t->frame.correction = ULK_BCH_SEC;
    else if (!strcmp(cm, "ted")) t->frame.correction = ULK_BCH_TED;
    else return ulk_rd_fail(r, ULK_EPARSE, "link.tc.correction", "expected sec or ted");
    const cJSON *sj = ulk_rd_member(tj, "security");
    if (sj) {
        static const char *const sk[] = {"spi", "key", "service", "algorithm", "iv_octets", "mac_octets", "window"};
        if (ulk_rd_keys(r, sj, "link.tc.security", sk, 7, 0)) return ulk_rd_status(r);
        ulk_sdls_sa *sa = &t->security;
        ulk_sdls_sa_default(sa);
        sa->enabled = 1;
        if (ulk_rd_int(r, sj, "spi", "link.tc.security", 1, 65534, NULL, &v)) return ulk_rd_status(r);
        sa->spi = (uint16_t)v;
        const char *kn = ulk_rd_str(r, sj, "key", "link.tc.security", ULK_SDLS_KEY_NAME_MAX - 1);
        if (!kn) return ulk_rd_status(r);
        if (!ulk_sdls_key_name_ok(kn)) return ulk_rd_fail(r, ULK_EPARSE, "link.tc.security.key", "expected a key name");
        snprintf(sa->key, sizeof sa->key, "%s", kn);
        const char *se = ulk_rd_str(r, sj, "service", "link.tc.security", 32);
        if (!se) return ulk_rd_status(r);
        if (!strcmp(se, "authentication")) sa->service = ULK_SDLS_AUTHENTICATION;
        else if (!strcmp(se, "authenticated-encryption")) sa->service = ULK_SDLS_AUTHENTICATED_ENCRYPTION;
        else return ulk_rd_fail(r, ULK_EPARSE, "link.tc.security.service", "expected authentication or authenticated-encryption");
        const char *al = ulk_rd_str(r, sj, "algorithm", "link.tc.security", 16);
        if (!al) return ulk_rd_status(r);
        if (strcmp(al, "aes-256-gcm")) return ulk_rd_fail(r, ULK_EPARSE, "link.tc.security.algorithm", "expected aes-256-gcm");
        if (ulk_rd_int(r, sj, "iv_octets", "link.tc.security", ULK_SDLS_MIN_IV_OCTETS, ULK_SDLS_MAX_IV_OCTETS, NULL, &v))
            return ulk_rd_status(r);
        sa->iv_octets = (int)v;
        if (ulk_rd_int(r, sj, "mac_octets", "link.tc.security", ULK_SDLS_MIN_MAC_OCTETS, ULK_SDLS_MAX_MAC_OCTETS, NULL, &v))
            return ulk_rd_status(r);
        sa->mac_octets = (int)v;
        if (ulk_rd_int(r, sj, "window", "link.tc.security", 1, ULK_SDLS_MAX_WINDOW, NULL, &v)) return ulk_rd_status(r);
        sa->window = (uint32_t)v;
        ulk_sdls_layout(sa, &t->frame);
    }
    return 0;
}


/* The ccsds-tc members of a command: counts, frame and CLTU (checked against the fields
 * later, by ulk_tc_upload_check_unit). */
int ulk_tc_upload_read_unit(ulk_rd *r, const cJSON *cj, const char *path, const ulk_link *l, ulk_upload_cmd *c)
{
    (void)l;
    int64_t v;
    if (ulk_rd_int(r, cj, "sequence_count", path, 0, ULK_SPP_MAX_SEQ_COUNT, NULL, &v)) return ulk_rd_status(r);
    c->seq_count = (uint16_t)v;
    if (ulk_rd_int(r, cj, "frame_sequence", path, 0, 255, NULL, &v)) return ulk_rd_status(r);
    c->frame_seq = (uint8_t)v;
    const char *fh = ulk_rd_str(r, cj, "frame", path, 2 * ULK_TCF_MAX_OCTETS);
    const char *ch = fh ? ulk_rd_str(r, cj, "cltu", path, 2 * ULK_CLTU_MAX_OCTETS) : NULL;
    if (!ch) return ulk_rd_status(r);
    /* decoded on the stack, then kept in one allocation of the exact size */
    uint8_t fb[ULK_TCF_MAX_OCTETS], cb[ULK_CLTU_MAX_OCTETS];
    long nf = ulk_rd_hex_octets(fh, fb, sizeof fb), nc = ulk_rd_hex_octets(ch, cb, sizeof cb);
    if (nf < 0) return ulk_rd_fail(r, ULK_EPARSE, path, "'frame' must be hex digits of 1 to %d octets", ULK_TCF_MAX_OCTETS);
    if (nc < 0) return ulk_rd_fail(r, ULK_EPARSE, path, "'cltu' must be hex digits of 1 to %d octets", ULK_CLTU_MAX_OCTETS);
    uint8_t *buf = ulk_malloc((size_t)nc + (size_t)nf);
    if (!buf) return ulk_rd_fail(r, ULK_ENOMEM, path, "out of memory");
    memcpy(buf, cb, (size_t)nc);
    memcpy(buf + nc, fb, (size_t)nf);
    c->cltu = buf;
    c->frame = buf + nc;
    c->n_frame = (size_t)nf;
    c->n_cltu = (size_t)nc;
    return 0;
}

uint64_t ulk_tc_upload_max_address(const ulk_link *l)
{
    (void)l;
    return ULK_SPP_MAX_APID;
}

uint64_t ulk_tc_upload_max_opcode(const ulk_link *l)
{
    (void)l;
    return 255;
}

int ulk_tc_upload_check_arg(ulk_rd *r, const char *ap, const ulk_link *l, const ulk_upload_cmd *c, int pos,
                            const ulk_upload_arg *a)
{
    (void)c;
    if ((size_t)pos + (size_t)a->bits > ulk_profile_ccsds_tc.max_arg_bits(l))
        return ulk_rd_fail(r, ULK_EPARSE, ap, "the arguments exceed what a TC frame holds");
    return 0;
}

/* the frame and the CLTU must be what the fields make */
int ulk_tc_upload_check_unit(ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c, int n_arg_bits)
{
    (void)n_arg_bits;
    char why[200];
    int rc = ulk_tc_unit_check(l, c, why, sizeof why);
    if (rc == ULK_ENOMEM) return ulk_rd_fail(r, ULK_ENOMEM, path, "out of memory");
    if (rc) return ulk_rd_fail(r, ULK_EPARSE, path, "%s", why);
    return 0;
}

/* The next packet count of every APID. */
int ulk_tc_upload_counts_create(const ulk_link *l, void **st)
{
    (void)l;
    *st = ulk_calloc(ULK_SPP_MAX_APID + 1, sizeof(uint16_t));
    return *st ? 0 : ULK_ENOMEM;
}

/* Packet counts per APID from 0 and N(S) from first_sequence, as the compiler numbers them
 * (docs/spec/ccsds-tc.md section 2). */
int ulk_tc_upload_counts_check(void *st, ulk_rd *r, const char *path, const ulk_link *l, const ulk_upload_cmd *c,
                               size_t idx)
{
    uint16_t *next_seq = st;
    const ulk_tc_params *t = &l->tc;
    int rc = 0;
    uint8_t ns = t->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? (uint8_t)((t->first_sequence + idx) & 0xFF) : 0;
    if (c->seq_count != next_seq[c->system_addr])
        rc = ulk_rd_fail(r, ULK_EPARSE, path, "'sequence_count' %u is not %u, the next count of APID 0x%X", c->seq_count,
                         next_seq[c->system_addr], c->system_addr);
    else if (c->frame_seq != ns)
        rc = ulk_rd_fail(r, ULK_EPARSE, path, "'frame_sequence' %u is not %u, the N(S) of frame %zu", c->frame_seq, ns,
                         idx);
    next_seq[c->system_addr] = (uint16_t)((next_seq[c->system_addr] + 1u) & ULK_SPP_MAX_SEQ_COUNT);
    return rc;
}

void ulk_tc_upload_counts_destroy(void *st) { ulk_free(st); }

/* CLTUs differ in length: the lean reader keeps an offset for each. */
size_t ulk_tc_unit_stride(const ulk_link *l)
{
    (void)l;
    return 0;
}

void ulk_tc_unit_pack(const ulk_link *l, const ulk_upload_cmd *c, uint8_t *dst)
{
    (void)l;
    memcpy(dst, c->cltu, c->n_cltu);
}
