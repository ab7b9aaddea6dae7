/* src/profiles/ccsds/tc_upload.c - the ccsds-tc profile's parts of the upload file
 * (docs/spec/upload.md): the link object and each command's counts, frame and CLTU. */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "upload_text.h"
#include "ulk/sdls.h"

/* The link object of a ccsds-tc upload: the dictionary's link section, every default applied. */
void ulk_tc_upload_write_link(const ulk_link *l, ulk_jbuf *b)
{
    const ulk_tc_params *t = &l->tc;
    static const char head[] = ",\n  \"link\": {\n    \"profile\": \"ccsds-tc\",\n    \"bit_rate\": ";
    ulk_jb_put(b, head);
    ulk_jb_ratio(b, l->bit_rate);
    ulk_jb_printf(b, ",\n    \"line_code\": \"%s\",\n    \"subcarrier\": {\"frequency\": ", ulk_line_code_name(l->line_code));
    ulk_jb_ratio(b, l->fsc);
    ulk_jb_printf(b, ", \"waveform\": \"%s\", \"amplitude\": ", ulk_waveform_name(l->waveform));
    ulk_jb_double(b, l->amplitude);
    ulk_jb_printf(b,
              "},\n    \"tc\": {\"spacecraft_id\": %u, \"virtual_channel\": %u, \"service\": \"%s\", "
              "\"first_sequence\": %u, \"segment_header\": ",
              t->frame.spacecraft_id, t->frame.virtual_channel,
              t->frame.service == ULK_TC_SEQUENCE_CONTROLLED ? "sequence-controlled" : "expedited", t->first_sequence);
    if (t->frame.segment_header) ulk_jb_printf(b, "{\"map_id\": %u}", t->frame.map_id);
    else ulk_jb_put(b, "null");
    ulk_jb_printf(b,
              ",\n           \"fecf\": %s, \"randomize\": %s, \"acquisition_octets\": %u, \"idle_octets\": %u, "
              "\"start_errors\": %d, \"correction\": \"%s\"}\n  },\n",
              t->frame.fecf ? "true" : "false", t->frame.randomize ? "true" : "false", t->acquisition_octets,
              t->idle_octets, t->frame.start_errors, t->frame.correction == ULK_BCH_TED ? "ted" : "sec");
    if (t->security.enabled && !ulk_jb_oom(b)) {
        /* the security association by key name: key material never enters an upload */
        const ulk_sdls_sa *sa = &t->security;
        ulk_jb_unput(b, strlen("}\n  },\n")); /* reopen the tc object written just above */
        ulk_jb_printf(b, ",\n           \"security\": {\"spi\": %u, \"key\": ", (unsigned)sa->spi);
        ulk_jb_str(b, sa->key);
        ulk_jb_printf(b, ", \"service\": \"%s\", \"algorithm\": \"aes-256-gcm\", \"iv_octets\": %d, \"mac_octets\": %d, "
                     "\"window\": %u}}\n  },\n",
                  ulk_sdls_service_name(sa->service), sa->iv_octets, sa->mac_octets, (unsigned)sa->window);
    }
}

/* The end of a command record: packet and frame counts, the frame and the CLTU in hex. */
void ulk_tc_upload_write_unit(const ulk_link *l, const ulk_upload_cmd *c, ulk_jbuf *b)
{
    (void)l;
    ulk_jb_printf(b, "],\n     \"sequence_count\": %u, \"frame_sequence\": %u,\n     \"frame\": \"", c->seq_count,
                  c->frame_seq);
    ulk_jb_hex(b, c->frame, c->n_frame);
    static const char mid[] = "\",\n     \"cltu\": \"";
    ulk_jb_put(b, mid);
    ulk_jb_hex(b, c->cltu, c->n_cltu);
    ulk_jb_put(b, "\"}");
}
