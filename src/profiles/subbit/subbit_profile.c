/* src/profiles/subbit/subbit_profile.c - the sub-bit word profile behind ulk/profile.h
 * (docs/spec/subbit.md sections 2-3): one W-bit word per command, idle patterns between.
 */
#include <stdio.h>
#include <string.h>

#include "profiles.h"
#include "ulk/word.h"
#include "util.h"

/* ---------------------------------------------------------------- sub-bit profile */

static uint64_t sb_gap_units(const ulk_link *l, ulk_gap g)
{
    return (uint64_t)(g == ULK_GAP_FIRST ? l->preamble : g == ULK_GAP_BETWEEN ? l->gap : l->postamble);
}

static ulk_ratio sb_filler_rate(const ulk_link *l) { return l->bit_rate; }

static int sb_filler_symbol(const ulk_link *l, uint64_t k, int j)
{
    (void)k;
    return l->idle[j];
}

static size_t sb_max_arg_bits(const ulk_link *l) { return (size_t)l->argument_bits; }

static uint64_t sb_unit_bits(const ulk_link *l, const ulk_upload_cmd *c)
{
    (void)c;
    return (uint64_t)l->word_bits;
}

static int sb_unit_bit(const ulk_link *l, const ulk_upload_cmd *c, uint64_t i)
{
    (void)l;
    return c->word.bits[i];
}

static int sb_encoder_create(const ulk_link *l, void **enc)
{
    *enc = (void *)l;
    return 0;
}

static int sb_encode(void *enc, const ulk_unit_request *req, ulk_upload_cmd *out, char *err, size_t errlen)
{
    const ulk_link *l = enc;
    if (req->n_arg_bits > (size_t)l->argument_bits) {
        snprintf(err, errlen, "its arguments do not fit the %d-bit argument field", l->argument_bits);
        return ULK_ELIMIT;
    }
    uint8_t field[64];
    memset(field, 0, sizeof field);
    if (req->n_arg_bits) memcpy(field, req->arg_bits, req->n_arg_bits);
    ulk_word_build(l, req->system_addr, req->opcode, field, &out->word);
    return 0;
}

static void sb_encoder_destroy(void *enc) { (void)enc; }

static void sb_arg_room(const ulk_link *l, char *buf, size_t n)
{
    snprintf(buf, n, "the %d-bit argument field", l->argument_bits);
}

static ulk_ratio sb_symbol_rate(const ulk_link *l) { return ulk_link_subbit_rate(l); }

static size_t sb_unit_octets(const ulk_link *l, const ulk_upload_cmd *c)
{
    (void)c;
    return (size_t)(l->word_bits + 7) / 8;
}

static const ulk_sdls_sa *sb_security(const ulk_link *l)
{
    (void)l;
    return NULL;
}

static void sb_unit_hex(const ulk_link *l, const ulk_upload_cmd *c, char *buf, size_t len)
{
    (void)l;
    char hx[40];
    ulk_word_hex(&c->word, hx);
    snprintf(buf, len, "%s", hx);
}

static void sb_unit_comment(const ulk_link *l, const ulk_upload_cmd *c, size_t k, char *buf, size_t len)
{
    (void)l;
    char hex[40];
    ulk_word_hex(&c->word, hex);
    snprintf(buf, len, "word %zu, line %d, %s", k + 1, c->line, hex);
}

static int sb_print_units(FILE *out, const ulk_upload *up, uint64_t n_sub)
{
    int a = fprintf(out, "  words     %zu x %d bits (check %s)\n", up->n_cmds, up->link.word_bits,
                    ulk_check_name(up->link.check));
    int b = fprintf(out, "  sub-bits  %llu (%d per bit)\n", (unsigned long long)n_sub, up->link.n_subbits);
    return a < 0 || b < 0 ? -1 : a + b;
}

static void *sb_summary_json(const ulk_dict *d) { return ulk_subbit_summary_json(d); }

/* idles and words of n sub-bits at R_s (docs/spec/subbit.md section 3) */
static double *sb_unit_start_times(const ulk_upload *u)
{
    size_t nu = u->n_cmds;
    double rs = ulk_ratio_to_double(u->link.bit_rate) * u->link.n_subbits;
    if (!(rs > 0)) return NULL;
    double *t = ulk_malloc(nu * sizeof *t);
    if (!t) return NULL;
    double g = 0; /* groups (idle patterns and bits) before word i */
    for (size_t i = 0; i < nu; i++) {
        g += (double)ulk_upload_idles_before(u, i);
        t[i] = g * u->link.n_subbits / rs;
        g += u->link.word_bits;
    }
    return t;
}

const ulk_profile_ops ulk_profile_subbit = {
    .name = "subbit",
    .id = ULK_PROFILE_SUBBIT,
    .link_parse = ulk_subbit_link_parse,
    .system_address = ulk_subbit_system_address,
    .address_noun = "address",
    .address_unprotected = 1,
    .opcode_fits = ulk_subbit_opcode_fits,
    .command_check = ulk_subbit_command_check,
    .link_canonical = ulk_subbit_link_canonical,
    .info_bit_rate = ulk_subbit_info_bit_rate,
    .gap_units = sb_gap_units,
    .filler_rate = sb_filler_rate,
    .filler_symbol = sb_filler_symbol,
    .max_arg_bits = sb_max_arg_bits,
    .unit_bits = sb_unit_bits,
    .unit_bit = sb_unit_bit,
    .encoder_create = sb_encoder_create,
    .encode = sb_encode,
    .encoder_destroy = sb_encoder_destroy,
    .unit_noun = "words",
    .unit_noun_one = "word",
    .symbol_noun = "sub-bits",
    .arg_room = sb_arg_room,
    .symbol_rate = sb_symbol_rate,
    .unit_octets = sb_unit_octets,
    .security = sb_security,
    .unit_hex = sb_unit_hex,
    .unit_comment = sb_unit_comment,
    .inspect_text = ulk_subbit_inspect_text,
    .inspect_json = ulk_subbit_inspect_json,
    .summary_text = ulk_subbit_summary_text,
    .summary_json = sb_summary_json,
    .upload_write_link = ulk_subbit_upload_write_link,
    .upload_write_unit = ulk_subbit_upload_write_unit,
    .print_units = sb_print_units,
    .unit_start_times = sb_unit_start_times,
    .upload_read_link = ulk_subbit_upload_read_link,
    .upload_link_members = ulk_subbit_upload_link_members,
    .n_upload_link_members = 8,
    .upload_cmd_members = ulk_subbit_upload_cmd_members,
    .n_upload_cmd_members = 10,
    .upload_max_address = ulk_subbit_upload_max_address,
    .upload_max_opcode = ulk_subbit_upload_max_opcode,
    .gap_names = {"preamble", "gap", "postamble"},
    .upload_read_unit = ulk_subbit_upload_read_unit,
    .upload_check_arg = ulk_subbit_upload_check_arg,
    .upload_check_unit = ulk_subbit_upload_check_unit,
    .upload_counts_create = ulk_subbit_upload_counts_create,
    .upload_counts_check = ulk_subbit_upload_counts_check,
    .upload_counts_destroy = ulk_subbit_upload_counts_destroy,
    .unit_stride = ulk_subbit_unit_stride,
    .unit_pack = ulk_subbit_unit_pack,
    .rx_create = ulk_subbit_rx_create,
    .rx_push = ulk_subbit_rx_push,
    .rx_finish = ulk_subbit_rx_finish,
    .rx_commit = NULL,
    .rx_destroy = ulk_subbit_rx_destroy,
};
