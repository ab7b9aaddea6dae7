/* tests/test_cmdlist.c - command-list parsing and compiling: words for every argument type
 * (worked out by hand from bit strings), exact idle counts (docs/spec/subbit.md section 3),
 * and broken lists, each with the expected line:col and message fragment.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "test_fixture_dict.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/upload.h"
#include "ulk/word.h"
#include "util.h"

static ulk_dict *g_dict;

static int setup(void **st)
{
    (void)st;
    ulk_diag *d = ulk_diag_create();
    int rc = ulk_dict_load_mem("fixture.yaml", FIXTURE_DICT_YAML, strlen(FIXTURE_DICT_YAML), 0, &g_dict, d);
    if (rc < 0) ulk_diag_print(d, stderr);
    ulk_diag_destroy(d);
    return rc < 0 ? -1 : 0;
}

static int teardown(void **st)
{
    (void)st;
    ulk_dict_destroy(g_dict);
    return 0;
}

/* Parses and compiles text; returns the status; *u set on success. */
static int compile_text(const char *text, ulk_upload **u, ulk_diag *d)
{
    ulk_cmdlist *l = NULL;
    *u = NULL;
    ulk_cmdlist_parse("t.cmd", text, strlen(text), &l, d);
    if (!l) return ULK_ENOMEM;
    int rc = ulk_compile(g_dict, l, u, d);
    ulk_cmdlist_destroy(l);
    return rc;
}

/* Words by hand. Field bits (vehicle 1010, system EPS 101 / AUX 011, opcode 5 bits,
 * 32 argument bits, even parity over the 44 bits), e.g. SET_LEVEL level=195:
 *   1010 101 10011 11000011 + 24 zeros -> 11 ones -> parity 1;
 *   45 bits -> 12 digits (3 pad bits): 0x156786000001.
 * float32 patterns: IEEE 754 binary32 (-0 = 0x80000000, 0.1 -> 0x3DCCCCCD). */
static const struct {
    const char *row;
    const char *line;
    const char *hex;
} word_rows[] = {
    {"unsigned", "SET_LEVEL level=195", "156786000001"},
    {"unsigned_default", "SET_LEVEL", "1566C8000000"},          /* 100 = 01100100: 1010 101 10011 01100100 -> 10 ones, parity 0 */
    {"unsigned_milli_unit", "SET_LEVEL level=195000mV", "156786000001"},
    {"unsigned_hex", "SET_LEVEL level=0xC3", "156786000001"},
    {"signed", "TRIM offset=-3", "1543FA000000"},               /* -3 = 11111101 */
    {"boolean_enum", "VALVE open=on mode=FAST", "14C580000001"}, /* 1 then 10 */
    {"any_order", "VALVE mode=FAST open=yes", "14C580000001"},
    {"float32_minus_zero", "GAIN k=-0", "14C700000001"},
    {"float32_tenth", "GAIN k=0.1", "14C67B99999A"},
    {"calibrated_tie", "DELAY t=2.625", "14C801400001"},        /* 2.5 (raw 10) and 2.75 (11): raw 10 */
    {"calibrated_ms", "DELAY t=2625ms", "14C801400001"},
    {"critical_confirmed", "FIRE pulses=9 confirm", "154B20000000"},
    {"polynomial_tie", "POLY p=3.875", "14CC10000001"},         /* f(2) = 3, f(3) = 4.75: raw 2 */
};

static void test_words_by_hand(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof word_rows / sizeof word_rows[0]; i++) {
        ulk_diag *d = ulk_diag_create();
        ulk_upload *u;
        int rc = compile_text(word_rows[i].line, &u, d);
        if (rc) ulk_diag_print(d, stderr);
        print_message("row %s\n", word_rows[i].row);
        assert_int_equal(rc, 0);
        assert_int_equal(u->n_cmds, 1);
        char hex[40];
        ulk_word_hex(&u->cmds[0].word, hex);
        assert_string_equal(hex, word_rows[i].hex);
        assert_true(ulk_word_check_ok(&u->link, &u->cmds[0].word));
        ulk_upload_destroy(u);
        ulk_diag_destroy(d);
    }
}

/* Idle counts, exact: R_b = 62.5 (125/2), P = 16, G = 4, T = 2. */
static void test_idles_exact(void **st)
{
    (void)st;
    const char *text =
        "# first word after a wait of exactly 16 patterns (0.256 s * 62.5 = 16)\n"
        "wait 0.256s\n"
        "SET_LEVEL\n"
        "wait 0.2561s\n"       /* 16.00625 -> 17 */
        "SET_LEVEL\n"
        "wait 16ms\n"          /* 1 pattern, below G: 4 */
        "TRIM offset=1\n"
        "wait 0.1s\n"
        "wait 100ms\n"         /* waits add up: 0.2 s -> 12.5 -> 13 (not 7 + 7) */
        "TRIM offset=2\n"
        "TRIM offset=3\n"      /* no wait: G */
        "wait 1min\n";         /* postamble: 60 * 62.5 = 3750 */
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u;
    int rc = compile_text(text, &u, d);
    if (rc) ulk_diag_print(d, stderr);
    assert_int_equal(rc, 0);
    assert_int_equal(u->n_cmds, 5);
    const uint64_t want[5] = {16, 17, 4, 13, 4};
    for (int i = 0; i < 5; i++) assert_int_equal(u->cmds[i].idles_before, want[i]);
    assert_int_equal(u->idles_after, 3750);
    assert_int_equal(u->cmds[3].wait_before.num, 1);
    assert_int_equal(u->cmds[3].wait_before.den, 5);
    assert_int_equal(u->cmds[0].line, 3);
    assert_int_equal(u->cmds[4].line, 11);
    /* L = n * (sum idles + N * W) = 4 * (16+17+4+13+4 + 3750 + 5*45) */
    assert_int_equal(ulk_upload_n_subbits(u), 4 * (54 + 3750 + 225));
    ulk_upload_destroy(u);
    /* without waits: P before the first, T after the last */
    rc = compile_text("TRIM offset=0\n", &u, d);
    assert_int_equal(rc, 0);
    assert_int_equal(u->cmds[0].idles_before, 16);
    assert_int_equal(u->idles_after, 2);
    ulk_upload_destroy(u);
    uint64_t n;
    assert_int_equal(ulk_wait_patterns(ulk_ratio_make(1, 3), ulk_ratio_make(3, 1), &n), 0);
    assert_int_equal(n, 1); /* exactly 1, no float fuzz */
    ulk_diag_destroy(d);
}

/* Broken lists: text, line, col, message fragment. */
static const struct {
    const char *row;
    const char *text;
    int line, col;
    const char *frag;
} bad_rows[] = {
    {"mnemonic_typo", "SET_LEVL level=3", 1, 1, "did you mean 'SET_LEVEL'?"},
    {"mnemonic_unknown", "# c\nLAUNCH_ALL", 2, 1, "unknown command 'LAUNCH_ALL'"},
    {"arg_name_typo", "SET_LEVEL levl=3", 1, 11, "did you mean 'level'?"},
    {"arg_name_unknown", "TRIM gain=3", 1, 6, "has no argument 'gain' (arguments: offset)"},
    {"enum_label_typo", "VALVE open=true mode=FST", 1, 22, "did you mean 'FAST'?"},
    {"enum_label_far", "VALVE open=true mode=SIDEWAYS", 1, 22, "labels: HOLD, SLOW, FAST"},
    {"range", "SET_LEVEL level=251", 1, 17, "outside the range [0, 250]"},
    {"missing_no_default", "\n\nTRIM", 3, 1, "missing argument 'offset'"},
    {"critical_unconfirmed", "FIRE pulses=3", 1, 1, "critical command: add 'confirm'"},
    {"wrong_unit", "SET_LEVEL level=5A", 1, 18, "unit 'A' is not the units of argument 'level'"},
    {"wrong_prefix", "SET_LEVEL level=5MV", 1, 18, "unit 'MV'"},
    {"unit_not_allowed", "TRIM offset=3V", 1, 14, "takes no unit"},
    {"hex_with_unit", "SET_LEVEL level=0x10V", 1, 21, "takes no unit"},
    {"duplicate_arg", "SET_LEVEL level=1 level=2", 1, 19, "given twice"},
    {"wait_no_unit", "wait 5\nTRIM offset=1", 1, 7, "has no unit"},
    {"wait_bad_unit", "wait 5h\nTRIM offset=1", 1, 7, "unknown wait unit 'h'"},
    {"wait_negative", "wait -1s\nTRIM offset=1", 1, 6, "cannot be negative"},
    {"wait_too_long", "wait 2000min\nTRIM offset=1", 1, 6, "longer than the limit"},
    {"wait_extra", "wait 1s 2s\nTRIM offset=1", 1, 9, "unexpected '2s'"},
    {"bare_token", "SET_LEVEL 5", 1, 11, "expected name=value or 'confirm'"},
    {"spaced_equals", "SET_LEVEL level = 5", 1, 11, "without spaces"},
    {"no_value", "SET_LEVEL level=", 1, 11, "has no value"},
    {"no_name", "SET_LEVEL =5", 1, 11, "no name"},
    {"starts_with_arg", "level=3", 1, 1, "starts with a command mnemonic"},
    {"confirm_first", "confirm FIRE pulses=1", 1, 1, "goes after the command"},
    {"empty_list", "# nothing to send\n\n   \n", 0, 0, "no commands"},
    {"waits_only", "wait 1s\n", 0, 0, "no commands"},
    {"float_overflow", "GAIN k=1e39", 1, 8, "largest finite float32"},
    {"not_whole", "TRIM offset=1.5", 1, 13, "not a whole number"},
    {"signed_overflow", "TRIM offset=128", 1, 13, "does not fit in 8 signed bits"},
    {"half_step", "POLY p=0.8", 1, 8, "more than half a raw step"},
    {"boolean_word", "VALVE open=maybe", 1, 12, "not a boolean"},
    {"binary_digit", "SET_LEVEL level=0b102", 1, 17, "not a binary integer"},
    {"beyond_64_bits", "TRIM offset=-99999999999999999999999", 1, 13, "beyond 64 bits"},
    {"not_a_number", "SET_LEVEL level=abc", 1, 17, "not a number"},
    {"no_args_taken", "VALVE open=1 mode=HOLD extra=1", 1, 24, "has no argument 'extra'"},
};

static int has_finding(const ulk_diag *d, int line, int col, const char *frag)
{
    for (size_t i = 0; i < ulk_diag_count(d); i++) {
        const ulk_finding *f = ulk_diag_get(d, i);
        if (f->sev == ULK_SEV_ERROR && f->line == line && f->col == col && f->msg && strstr(f->msg, frag) &&
            f->file && !strcmp(f->file, "t.cmd"))
            return 1;
    }
    return 0;
}

static void test_broken_lists(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof bad_rows / sizeof bad_rows[0]; i++) {
        ulk_diag *d = ulk_diag_create();
        ulk_upload *u = (ulk_upload *)1;
        int rc = compile_text(bad_rows[i].text, &u, d);
        print_message("row %s\n", bad_rows[i].row);
        if (!has_finding(d, bad_rows[i].line, bad_rows[i].col, bad_rows[i].frag)) ulk_diag_print(d, stderr);
        assert_int_equal(rc, ULK_EPARSE);
        assert_null(u);
        assert_true(has_finding(d, bad_rows[i].line, bad_rows[i].col, bad_rows[i].frag));
        ulk_diag_destroy(d);
    }
}

/* One run reports every error of a list, each on its own line; good lines in between do
 * not hide later errors. */
static void test_all_errors_reported(void **st)
{
    (void)st;
    const char *text = "SET_LEVL level=3\n"
                       "SET_LEVEL level=1\n"
                       "TRIM offset=999\n"
                       "wait 3parsecs\n"
                       "FIRE pulses=1\n"
                       "VALVE open=true mode=FST\n"
                       "SET_LEVEL 7\n";
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u;
    assert_int_equal(compile_text(text, &u, d), ULK_EPARSE);
    assert_null(u);
    assert_int_equal(ulk_diag_errors(d), 6);
    assert_true(has_finding(d, 1, 1, "did you mean"));
    assert_true(has_finding(d, 3, 13, "does not fit"));
    assert_true(has_finding(d, 4, 7, "unknown wait unit"));
    assert_true(has_finding(d, 5, 1, "critical"));
    assert_true(has_finding(d, 6, 22, "FAST"));
    assert_true(has_finding(d, 7, 11, "expected name=value"));
    char buf[512];
    ulk_finding_format(ulk_diag_get(d, 0), buf, sizeof buf);
    print_message("%s\n", buf);
    assert_non_null(strstr(buf, "t.cmd:"));
    ulk_diag_destroy(d);
}

static void test_overlong_and_nul(void **st)
{
    (void)st;
    size_t n = 5000;
    char *text = malloc(n + 64);
    strcpy(text, "TRIM offset=1\nSET_LEVEL level=1 ");
    size_t k = strlen(text);
    while (k < n) text[k++] = ' ';
    strcpy(text + k, "\nTRIM offset=2\n");
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u;
    assert_int_equal(compile_text(text, &u, d), ULK_EPARSE);
    assert_true(has_finding(d, 2, 4097, "longer than 4096 characters"));
    assert_int_equal(ulk_diag_errors(d), 1);
    ulk_diag_destroy(d);
    free(text);
    /* a NUL byte inside a line */
    const char nul[] = "TRIM offset=1\nTRIM off\0set=2\n";
    d = ulk_diag_create();
    ulk_cmdlist *l = NULL;
    assert_int_equal(ulk_cmdlist_parse("t.cmd", nul, sizeof nul - 1, &l, d), ULK_EPARSE);
    assert_true(has_finding(d, 2, 9, "NUL byte"));
    /* a NUL means binary: the whole list is refused in one finding, nothing parsed */
    assert_int_equal(ulk_diag_errors(d), 1);
    assert_int_equal(l->n_commands, 0);
    ulk_cmdlist_destroy(l);
    ulk_diag_destroy(d);
}

/* Rows: bytes, expected line and column of the one finding, fragment (offset of the first
 * bad byte). UTF-8 validity per RFC 3629 section 4 (overlong forms, surrogates, > U+10FFFF). */
static const struct {
    const char *name;
    const char *text;
    size_t len;
    int line, col;
    const char *frag;
} bad_bytes[] = {
    {"latin-1 e-acute", "TRIM offset=1\nTRIM offset=\xe9\n", 28, 2, 13, "0xE9 at byte offset 26"},
    {"overlong slash", "TRIM offset=\xc0\xaf\n", 16, 1, 13, "0xC0 at byte offset 12"},
    {"surrogate", "TRIM \xed\xa0\x80\n", 9, 1, 6, "0xED at byte offset 5"},
    {"above U+10FFFF", "\xf4\x90\x80\x80\n", 5, 1, 1, "0xF4 at byte offset 0"},
    {"cut sequence at the end", "TRIM \xe2\x82", 7, 1, 6, "0xE2 at byte offset 5"},
    {"escape", "TRIM\x1b[0m\n", 9, 1, 5, "control character 0x1B at byte offset 4"},
    {"after multi-byte letters (a column counts characters)", "# \xc3\xa9t\xc3\xa9 \x01\n", 10, 1, 7, "0x01 at byte offset 8"},
};

static void test_binary_refused(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof bad_bytes / sizeof bad_bytes[0]; i++) {
        ulk_diag *d = ulk_diag_create();
        ulk_cmdlist *l = NULL;
        int rc = ulk_cmdlist_parse("t.cmd", bad_bytes[i].text, bad_bytes[i].len, &l, d);
        if (rc != ULK_EPARSE || ulk_diag_errors(d) != 1 || !has_finding(d, bad_bytes[i].line, bad_bytes[i].col, bad_bytes[i].frag)) {
            ulk_diag_print(d, stderr);
            fail_msg("row '%s': expected one finding at %d:%d with '%s'", bad_bytes[i].name, bad_bytes[i].line,
                     bad_bytes[i].col, bad_bytes[i].frag);
        }
        ulk_cmdlist_destroy(l);
        ulk_diag_destroy(d);
    }
}

/* A byte-order mark and CRLF line ends: the same list as without them; UTF-8 letters in a
 * comment are text. */
static void test_bom_crlf(void **st)
{
    (void)st;
    const char plain[] = "TRIM offset=1\nwait 2s\nTRIM offset=2 # \xc3\xa9\n";
    const char bom[] = "\xef\xbb\xbfTRIM offset=1\r\nwait 2s\r\nTRIM offset=2 # \xc3\xa9\r\n";
    ulk_cmdlist *a = NULL, *b = NULL;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_cmdlist_parse("a.cmd", plain, sizeof plain - 1, &a, d), 0);
    assert_int_equal(ulk_cmdlist_parse("b.cmd", bom, sizeof bom - 1, &b, d), 0);
    assert_int_equal(ulk_diag_count(d), 0);
    assert_int_equal(a->n_items, b->n_items);
    for (size_t i = 0; i < a->n_items; i++) {
        assert_int_equal(a->items[i].kind, b->items[i].kind);
        assert_int_equal(a->items[i].line, b->items[i].line);
        if (a->items[i].kind == ULK_CL_COMMAND) {
            assert_string_equal(a->items[i].mnemonic, b->items[i].mnemonic); /* no BOM in the first mnemonic */
            assert_string_equal(a->items[i].args[0].value, b->items[i].args[0].value);
        }
    }
    ulk_cmdlist_destroy(a);
    ulk_cmdlist_destroy(b);
    ulk_diag_destroy(d);
}

/* confirm on a non-critical command is a warning; CRLF line ends and tabs are fine. */
static void test_tolerated(void **st)
{
    (void)st;
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u;
    int rc = compile_text("TRIM\toffset=1 confirm\r\nFIRE pulses=2 CONFIRM # caps ok\r\n", &u, d);
    assert_int_equal(rc, 0);
    assert_int_equal(ulk_diag_errors(d), 0);
    assert_int_equal(ulk_diag_warnings(d), 1);
    assert_int_equal(u->n_cmds, 2);
    assert_true(u->cmds[1].critical);
    ulk_upload_destroy(u);
    ulk_diag_destroy(d);
}

/* Every allocation failure ends in a clean error, never a crash or a leak (ASan checks
 * the leaks). */
static void test_alloc_failures(void **st)
{
    (void)st;
    const char *text = "wait 1s\nSET_LEVEL level=3\nVALVE open=1\nGAIN k=2.5\nwait 2s\n";
    for (long n = 1; n < 200; n++) {
        ulk_diag *d = ulk_diag_create();
        ulk_alloc_fail_at(n);
        ulk_upload *u = NULL;
        int rc = compile_text(text, &u, d);
        ulk_alloc_fail_at(0);
        if (rc == 0) {
            assert_non_null(u);
            assert_int_equal(u->n_cmds, 3);
        } else {
            assert_null(u);
        }
        ulk_upload_destroy(u);
        ulk_diag_destroy(d);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_words_by_hand),
        cmocka_unit_test(test_idles_exact),
        cmocka_unit_test(test_broken_lists),
        cmocka_unit_test(test_all_errors_reported),
        cmocka_unit_test(test_overlong_and_nul),
        cmocka_unit_test(test_binary_refused),
        cmocka_unit_test(test_bom_crlf),
        cmocka_unit_test(test_tolerated),
        cmocka_unit_test(test_alloc_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
