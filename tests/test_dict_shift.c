/* tests/test_dict_shift.c - the validator's warnings on one-sub-bit slips (review finding: a
 * dictionary with nrz-m, Z = 01, O = 10, I = 00 validated clean, and its decoder accepted a
 * critical command that was never sent after reading a word one sub-bit early).
 *
 * Rows: a small valid dictionary of our own with the sub-bit patterns (line 5) and line code
 * (line 6) replaced; each names the shift warnings expected (fragments of the message, the
 * line) or none. The slips are worked out by hand in each row's comment.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/dict.h"
#include "ulk/error.h"

static const char BASE[] =
    "dictionary: {name: shift-test, version: \"1\"}\n"                        /* 1 */
    "link:\n"                                                                 /* 2 */
    "  profile: subbit\n"                                                     /* 3 */
    "  bit_rate: 62.5\n"                                                      /* 4 */
    "  subbits: {zero: \"%s\", one: \"%s\", idle: \"%s\"}\n"                  /* 5 */
    "  line_code: %s\n"                                                       /* 6 */
    "  subcarrier: {frequency: %s, waveform: square, amplitude: 0.75}\n"      /* 7 */
    "  framing: {preamble: 20, gap: 3, postamble: 5}\n"                       /* 8 */
    "  word:\n"                                                               /* 9 */
    "    vehicle_address: {bits: 0, value: 0}\n"                              /* 10 */
    "    system_address_bits: 2\n"                                            /* 11 */
    "    opcode_bits: 3\n"                                                    /* 12 */
    "    argument_bits: 0\n"                                                  /* 13 */
    "    check: parity-odd\n"                                                 /* 14 */
    "systems:\n"                                                              /* 15 */
    "  - {name: ALPHA, address: 1}\n"                                         /* 16 */
    "commands:\n"                                                             /* 17 */
    "  - {mnemonic: ALPHA_PING, system: ALPHA, opcode: 0}\n";                 /* 18 */

typedef struct {
    const char *name, *zero, *one, *idle, *line_code, *fsc;
    const char *idle_frag;  /* fragment of the idle-stream warning, NULL: none expected */
    const char *slip_frag;  /* fragment of the slip-across-patterns warning, NULL: none */
} shift_row;

static const shift_row rows[] = {
    /* The review's profile. Idle 00 rotated is 00. 'zero' then 'zero' (0101) one sub-bit late
     * reads 10 = 'one'. */
    {"nrzm_01_10_idle_00", "01", "10", "00", "nrz-m", "375", "unchanged by a one-sub-bit shift",
     "late slip across 'zero' then 'zero' (\"0101\") reads \"10\", the 'one' pattern (nrz-m)"},
    /* The same patterns under nrz-l: the slips are the same sub-bits. */
    {"nrzl_01_10_idle_11", "01", "10", "11", "nrz-l", "375", "unchanged by a one-sub-bit shift",
     "reads \"10\", the 'one' pattern (nrz-l)"},
    /* 0011 / 0110 / 0000 (the review's n = 4 profile): 'zero' then 'zero' late is 0110 = 'one'. */
    {"nrzl_0011_0110_idle_0000", "0011", "0110", "0000", "nrz-l", "750", "unchanged by a one-sub-bit shift",
     "(\"00110011\") reads \"0110\", the 'one' pattern"},
    /* Idle 0110 one sub-bit late is 1100 = 'one'; the bit patterns 0011 / 1100 never slip into
     * each other: late 0110, 0111, 1000, 1001; early 1001, 1110, 0001, 0110 (none is 0011 or 1100). */
    {"idle_rotates_into_one", "0011", "1100", "0110", "nrz-l", "750", "reads \"1100\", the 'one' pattern", NULL},
    /* The demo profile's patterns: idle 01010 rotates to 10100 / 00101; slips of 00111 / 11000
     * give 01110, 01111, 10000, 10001, 10011, 11100, 00011, 01100: no warning. */
    {"demo_patterns_clean", "00111", "11000", "01010", "nrz-l", "937.5", NULL, NULL},
};

static void check_row(void **state)
{
    const shift_row *r = *state;
    char text[2048];
    snprintf(text, sizeof text, BASE, r->zero, r->one, r->idle, r->line_code, r->fsc);
    ulk_dict *d = NULL;
    ulk_diag *dg = ulk_diag_create();
    int rc = ulk_dict_load_mem("shift.yaml", text, strlen(text), 0, &d, dg);
    if (rc < 0) ulk_diag_print(dg, stderr);
    assert_true(rc >= 0);
    assert_int_equal(ulk_diag_errors(dg), 0);
    int n_idle = 0, n_slip = 0;
    for (size_t i = 0; i < ulk_diag_count(dg); i++) {
        const ulk_finding *f = ulk_diag_get(dg, i);
        int is_idle = strstr(f->msg, "idle stream") != NULL, is_slip = strstr(f->msg, "slip across") != NULL;
        if (!is_idle && !is_slip) continue;
        assert_int_equal(f->sev, ULK_SEV_WARNING);
        assert_int_equal(f->line, 5);
        if (is_idle) {
            n_idle++;
            if (!r->idle_frag || !strstr(f->msg, r->idle_frag)) fprintf(stderr, "%s: %s\n", r->name, f->msg);
            assert_non_null(r->idle_frag);
            assert_non_null(strstr(f->msg, r->idle_frag));
        }
        if (is_slip) {
            n_slip++;
            if (!r->slip_frag || !strstr(f->msg, r->slip_frag)) fprintf(stderr, "%s: %s\n", r->name, f->msg);
            assert_non_null(r->slip_frag);
            assert_non_null(strstr(f->msg, r->slip_frag));
        }
    }
    assert_int_equal(n_idle, r->idle_frag ? 1 : 0);
    assert_int_equal(n_slip, r->slip_frag ? 1 : 0);
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
}

int main(void)
{
    struct CMUnitTest t[sizeof rows / sizeof rows[0]];
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        struct CMUnitTest u = {rows[i].name, check_row, NULL, NULL, (void *)&rows[i]};
        t[i] = u;
    }
    return _cmocka_run_group_tests("dict_shift", t, sizeof rows / sizeof rows[0], NULL, NULL);
}
