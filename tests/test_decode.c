/* tests/test_decode.c - word interpretation against the demo dictionary: one row per
 * verdict (accepted, and each rejection reason in its order), words built field by field
 * with ulk_word_build so that only the field under test is wrong. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>

#include "ulk/decode.h"
#include "ulk/dict.h"
#include "ulk/word.h"

static ulk_dict *dict;

static int setup(void **state)
{
    (void)state;
    ulk_diag *d = ulk_diag_create();
    int rc = ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", &dict, d);
    if (rc) ulk_diag_print(d, stderr);
    ulk_diag_destroy(d);
    return rc;
}

static int teardown(void **state)
{
    (void)state;
    ulk_dict_destroy(dict);
    return 0;
}

/* Packs raw values of cmd's arguments, in dictionary order, into a D-bit field. */
static void pack(const ulk_command *c, const uint64_t *raw, uint8_t *bits, int D)
{
    memset(bits, 0, (size_t)D);
    int pos = 0;
    for (int i = 0; i < c->n_args; i++) {
        for (int b = 0; b < c->args[i].bits; b++) bits[pos + b] = (uint8_t)((raw[i] >> (c->args[i].bits - 1 - b)) & 1);
        pos += c->args[i].bits;
    }
}

static void build(const ulk_link *l, const char *mnemonic, const uint64_t *raw, ulk_word *w)
{
    const ulk_command *c = ulk_dict_find_command(dict, mnemonic);
    assert_non_null(c);
    uint8_t bits[64];
    pack(c, raw, bits, l->argument_bits);
    ulk_word_build(l, dict->systems[c->system_index].address, c->opcode, bits, w);
}

static void accepted_with_label(void **state)
{
    (void)state;
    uint64_t raw[] = {1}; /* STANDBY = 0b001 */
    ulk_word w;
    build(&dict->link, "OBC_SET_MODE", raw, &w);
    ulk_decoded r;
    assert_int_equal(ulk_decode_word(dict, &w, &r), 0);
    assert_int_equal(r.status, ULK_WORD_ACCEPTED);
    assert_string_equal(r.cmd->mnemonic, "OBC_SET_MODE");
    assert_int_equal(r.n_args, 1);
    assert_string_equal(r.args[0].label, "STANDBY");
    char buf[128];
    ulk_decoded_format(&r, buf, sizeof buf);
    assert_string_equal(buf, "OBC_SET_MODE mode=STANDBY");
}

static void check_failure_is_never_accepted(void **state)
{
    (void)state;
    uint64_t raw[] = {1};
    ulk_word w;
    build(&dict->link, "OBC_SET_MODE", raw, &w);
    for (int b = 0; b < w.n_bits; b++) {
        ulk_word c = w; /* a copy: the original stays intact */
        c.bits[b] ^= 1;
        ulk_decoded r;
        ulk_decode_word(dict, &c, &r);
        assert_int_equal(r.status, ULK_WORD_REJECTED);
        assert_int_equal(r.reject, ULK_REJ_CHECK); /* CRC-16 catches every single-bit error */
    }
}

static void wrong_vehicle(void **state)
{
    (void)state;
    ulk_link other = dict->link;
    other.vehicle_value ^= 0x01;
    uint64_t raw[] = {1};
    ulk_word w;
    build(&other, "OBC_SET_MODE", raw, &w);
    ulk_decoded r;
    ulk_decode_word(dict, &w, &r);
    assert_int_equal(r.reject, ULK_REJ_VEHICLE);
    assert_non_null(strstr(r.reason, "vehicle"));
}

static void unknown_system_and_opcode(void **state)
{
    (void)state;
    uint8_t zeros[64] = {0};
    ulk_word w;
    uint32_t unused_sys = 0;
    while (ulk_dict_find_system_addr(dict, unused_sys) >= 0) unused_sys++;
    ulk_word_build(&dict->link, unused_sys, 0, zeros, &w);
    ulk_decoded r;
    ulk_decode_word(dict, &w, &r);
    assert_int_equal(r.reject, ULK_REJ_SYSTEM);
    uint32_t sys = dict->systems[0].address, op = 0;
    while (ulk_dict_find_opcode(dict, sys, op)) op++;
    ulk_word_build(&dict->link, sys, op, zeros, &w);
    ulk_decode_word(dict, &w, &r);
    assert_int_equal(r.reject, ULK_REJ_OPCODE);
    assert_null(r.cmd);
}

static void undefined_enum_code(void **state)
{
    (void)state;
    uint64_t raw[] = {2}; /* 0b010 is not a mode */
    ulk_word w;
    build(&dict->link, "OBC_SET_MODE", raw, &w);
    ulk_decoded r;
    ulk_decode_word(dict, &w, &r);
    assert_int_equal(r.reject, ULK_REJ_ENUM);
    assert_non_null(strstr(r.reason, "mode"));
}

/* The first ranged uncalibrated unsigned argument of the dictionary, at a raw value above
 * its range. */
static void out_of_range(void **state)
{
    (void)state;
    for (int i = 0; i < dict->n_commands; i++) {
        const ulk_command *c = &dict->commands[i];
        for (int a = 0; a < c->n_args; a++) {
            const ulk_arg *g = &c->args[a];
            if (g->type != ULK_ARG_UNSIGNED || !g->has_range || g->cal != ULK_CAL_NONE || g->bits > 32) continue;
            uint64_t top = ((uint64_t)1 << g->bits) - 1;
            if (g->range_max >= (double)top) continue;
            uint64_t raw[16] = {0};
            for (int k = 0; k < c->n_args && k < 16; k++) {
                const ulk_arg *h = &c->args[k];
                raw[k] = h->has_range && h->range_min > 0 ? (uint64_t)h->range_min : 0;
                if (h->type == ULK_ARG_ENUM && h->n_values) raw[k] = (uint64_t)h->values[0].code;
            }
            raw[a] = (uint64_t)g->range_max + 1;
            ulk_word w;
            build(&dict->link, c->mnemonic, raw, &w);
            ulk_decoded r;
            ulk_decode_word(dict, &w, &r);
            assert_int_equal(r.reject, ULK_REJ_RANGE);
            assert_non_null(strstr(r.reason, g->name));
            return;
        }
    }
    fail_msg("the demo dictionary has no ranged unsigned argument to test with");
}

static void nonzero_padding(void **state)
{
    (void)state;
    const ulk_command *c = ulk_dict_find_command(dict, "OBC_NOOP");
    assert_non_null(c);
    uint8_t bits[64] = {0};
    bits[dict->link.argument_bits - 1] = 1;
    ulk_word w;
    ulk_word_build(&dict->link, dict->systems[c->system_index].address, c->opcode, bits, &w);
    ulk_decoded r;
    ulk_decode_word(dict, &w, &r);
    assert_int_equal(r.reject, ULK_REJ_PADDING);
}

static void wrong_length(void **state)
{
    (void)state;
    ulk_word w;
    memset(&w, 0, sizeof w);
    w.n_bits = 12;
    ulk_decoded r;
    assert_int_equal(ulk_decode_word(dict, &w, &r), 0);
    assert_int_equal(r.reject, ULK_REJ_LENGTH);
    assert_int_equal(ulk_decode_word(NULL, &w, &r), ULK_EINVAL);
}

int main(void)
{
    const struct CMUnitTest t[] = {
        cmocka_unit_test(accepted_with_label),       cmocka_unit_test(check_failure_is_never_accepted),
        cmocka_unit_test(wrong_vehicle),             cmocka_unit_test(unknown_system_and_opcode),
        cmocka_unit_test(undefined_enum_code),       cmocka_unit_test(out_of_range),
        cmocka_unit_test(nonzero_padding),           cmocka_unit_test(wrong_length),
    };
    return cmocka_run_group_tests_name("decode", t, setup, teardown);
}
