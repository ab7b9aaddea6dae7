/* tests/test_upload.c - the upload file (docs/upload-format.md): round trip, tamper
 * detection, strict reading of hostile input, and the command list printed back.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <openssl/evp.h>

#include "test_fixture_dict.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/upload.h"
#include "ulk/word.h"
#include "util.h"

static ulk_dict *g_dict;
static ulk_upload *g_up;
static char *g_text; /* the written file */
static size_t g_len;

static const char LIST[] = "# fixture pass\n"
                           "wait 0.5s\n"
                           "SET_LEVEL level=195\n"
                           "TRIM offset=-3\n"
                           "\n"
                           "VALVE open=on mode=FAST\n"
                           "wait 250ms\n"
                           "wait 0.25s\n"
                           "GAIN k=-0\n"
                           "DELAY t=2.625\n"
                           "FIRE pulses=9 confirm\n"
                           "POLY p=3.875\n"
                           "wait 2s\n";

static int setup(void **st)
{
    (void)st;
    ulk_diag *d = ulk_diag_create();
    int rc = ulk_dict_load_mem("fixture.yaml", FIXTURE_DICT_YAML, strlen(FIXTURE_DICT_YAML), 0, &g_dict, d);
    ulk_cmdlist *l = NULL;
    if (rc == 0) ulk_cmdlist_parse("pass.cmd", LIST, strlen(LIST), &l, d);
    if (rc == 0 && l) rc = ulk_compile(g_dict, l, &g_up, d);
    if (rc == 0) rc = ulk_upload_write(g_up, "test_upload.upl", d);
    if (rc == 0) rc = ulk_read_file("test_upload.upl", 1 << 20, &g_text, &g_len, d);
    if (rc < 0) ulk_diag_print(d, stderr);
    ulk_cmdlist_destroy(l);
    ulk_diag_destroy(d);
    return rc < 0 ? -1 : 0;
}

static int teardown(void **st)
{
    (void)st;
    ulk_upload_destroy(g_up);
    ulk_dict_destroy(g_dict);
    ulk_free(g_text);
    unlink("test_upload.upl");
    return 0;
}

static void assert_same_upload(const ulk_upload *a, const ulk_upload *b)
{
    assert_string_equal(a->dict_name, b->dict_name);
    assert_string_equal(a->dict_version, b->dict_version);
    assert_string_equal(a->dict_sha256, b->dict_sha256);
    assert_int_equal(a->link.word_bits, b->link.word_bits);
    assert_int_equal(a->link.bit_rate.num, b->link.bit_rate.num);
    assert_int_equal(a->link.bit_rate.den, b->link.bit_rate.den);
    assert_int_equal(a->link.fsc.num, b->link.fsc.num);
    assert_memory_equal(a->link.zero, b->link.zero, ULK_MAX_SUBBITS);
    assert_memory_equal(a->link.idle, b->link.idle, ULK_MAX_SUBBITS);
    assert_true(a->link.amplitude == b->link.amplitude);
    assert_int_equal(a->link.check, b->link.check);
    assert_int_equal(a->n_cmds, b->n_cmds);
    assert_int_equal(a->idles_after, b->idles_after);
    assert_int_equal(a->wait_after.num, b->wait_after.num);
    for (size_t i = 0; i < a->n_cmds; i++) {
        const ulk_upload_cmd *x = &a->cmds[i], *y = &b->cmds[i];
        assert_int_equal(x->line, y->line);
        assert_string_equal(x->mnemonic, y->mnemonic);
        assert_string_equal(x->system_name, y->system_name);
        assert_int_equal(x->critical, y->critical);
        assert_int_equal(x->idles_before, y->idles_before);
        assert_int_equal(x->wait_before.num, y->wait_before.num);
        assert_int_equal(x->wait_before.den, y->wait_before.den);
        assert_int_equal(x->word.n_bits, y->word.n_bits);
        assert_memory_equal(x->word.bits, y->word.bits, (size_t)x->word.n_bits);
        assert_int_equal(x->n_args, y->n_args);
        for (int k = 0; k < x->n_args; k++) {
            assert_string_equal(x->args[k].name, y->args[k].name);
            assert_string_equal(x->args[k].text, y->args[k].text);
            assert_true(x->args[k].raw == y->args[k].raw);
            assert_int_equal(x->args[k].bits, y->args[k].bits);
            assert_int_equal(x->args[k].type, y->args[k].type);
            assert_true(x->args[k].eng == y->args[k].eng || (x->args[k].eng != x->args[k].eng));
        }
    }
}

static void test_round_trip(void **st)
{
    (void)st;
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u = NULL;
    int rc = ulk_upload_read("test_upload.upl", &u, d);
    if (rc) ulk_diag_print(d, stderr);
    assert_int_equal(rc, 0);
    assert_same_upload(g_up, u);
    assert_int_equal(u->n_cmds, 7);
    assert_int_equal(u->cmds[0].idles_before, 32);   /* 0.5 s * 62.5 = 31.25 -> 32 > P */
    assert_int_equal(u->cmds[3].idles_before, 32);   /* 250 ms + 0.25 s = 0.5 s */
    assert_int_equal(u->idles_after, 125);
    assert_string_equal(u->source, "pass.cmd");
    assert_string_equal(u->cmds[3].args[0].text, "-0");
    /* writing what was read gives the same bytes */
    assert_int_equal(ulk_upload_write(u, "test_upload2.upl", d), 0);
    char *t2;
    size_t n2;
    assert_int_equal(ulk_read_file("test_upload2.upl", 1 << 20, &t2, &n2, d), 0);
    assert_int_equal(n2, g_len);
    assert_memory_equal(t2, g_text, g_len);
    ulk_free(t2);
    unlink("test_upload2.upl");
    ulk_upload_destroy(u);
    ulk_diag_destroy(d);
}

static int read_mem(const char *t, size_t n, char *msg, size_t msglen)
{
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u = (ulk_upload *)1;
    int rc = ulk_upload_read_mem("x.upl", t, n, &u, d);
    if (rc == 0) ulk_upload_destroy(u);
    else assert_null(u);
    if (msg) {
        msg[0] = 0;
        const ulk_finding *f = ulk_diag_first_error(d);
        if (f) ulk_finding_format(f, msg, msglen);
    }
    ulk_diag_destroy(d);
    return rc;
}

/* Flip one byte of a copy at many positions: every change is refused, never accepted. */
static void test_tamper_detected(void **st)
{
    (void)st;
    char *copy = malloc(g_len);
    char msg[600];
    size_t covered = g_len - (strlen("  \"digest\": \"sha256:") + 64 + 4);
    for (size_t pos = 0; pos < g_len; pos += (pos < 400 ? 1 : 7)) {
        memcpy(copy, g_text, g_len);
        copy[pos] ^= 0x01;
        int rc = read_mem(copy, g_len, msg, sizeof msg);
        assert_int_not_equal(rc, 0);
        if (pos >= 220 && pos < covered) {
            assert_int_equal(rc, ULK_EINTEGRITY);
            assert_non_null(strstr(msg, "changed after it was written"));
        }
    }
    /* the original still reads (the test flipped copies only) */
    assert_int_equal(read_mem(g_text, g_len, NULL, 0), 0);
    /* cut short */
    assert_int_equal(read_mem(g_text, g_len - 1, msg, sizeof msg), ULK_EINTEGRITY);
    assert_int_equal(read_mem(g_text, g_len / 2, msg, sizeof msg), ULK_EINTEGRITY);
    /* a command line deleted */
    free(copy);
}

/* Replace from..to of the file and write a correct digest again, so that the field checks,
 * not the digest, must catch the edit. */
static char *edit_redigest(const char *from, const char *to, size_t *len)
{
    const char *p = strstr(g_text, from);
    assert_non_null(p);
    size_t dl = strlen("  \"digest\": \"sha256:") + 64 + 4;
    size_t body = g_len - dl;
    size_t nb = body - strlen(from) + strlen(to);
    char *t = malloc(nb + dl + 1);
    size_t off = (size_t)(p - g_text);
    memcpy(t, g_text, off);
    memcpy(t + off, to, strlen(to));
    memcpy(t + off + strlen(to), p + strlen(from), body - off - strlen(from));
    unsigned char md[32];
    unsigned int mdl;
    EVP_Digest(t, nb, md, &mdl, EVP_sha256(), NULL);
    char *q = t + nb;
    q += sprintf(q, "  \"digest\": \"sha256:");
    for (int i = 0; i < 32; i++) q += sprintf(q, "%02x", md[i]);
    q += sprintf(q, "\"\n}\n");
    *len = (size_t)(q - t);
    return t;
}

static const struct {
    const char *row, *from, *to;
    int rc;
    const char *frag;
} edit_rows[] = {
    {"identity_edit_accepted", "\"version\": 1", "\"version\": 1", 0, NULL},
    {"version_2", "\"version\": 1", "\"version\": 2", ULK_EFORMAT, "version 2 is not supported"},
    {"word_bit_flipped", "\"word\": \"156786000001\"", "\"word\": \"156786000003\"", ULK_EPARSE, "commands[0]"},
    {"raw_disagrees", "\"raw\": \"0xc3\"", "\"raw\": \"0xc4\"", ULK_EPARSE, "does not match the word"},
    {"raw_too_wide", "\"raw\": \"0xc3\"", "\"raw\": \"0x1c3\"", ULK_EPARSE, "does not fit in 8 bits"},
    {"opcode_disagrees", "\"opcode\": 19", "\"opcode\": 18", ULK_EPARSE, "opcode"},
    {"unknown_member", "\"critical\": false", "\"critical\": false, \"extra\": 1", ULK_EPARSE, "unexpected member 'extra'"},
    {"missing_member", "\"critical\": false, ", "", ULK_EPARSE, "missing member 'critical'"},
    {"bad_rate", "\"bit_rate\": \"62.5\"", "\"bit_rate\": \"-62.5\"", ULK_EPARSE, "positive exact decimal"},
    {"rate_as_number", "\"bit_rate\": \"62.5\"", "\"bit_rate\": 62.5", ULK_EPARSE, "must be a string"},
    {"word_bits_sum", "\"word_bits\": 45", "\"word_bits\": 46", ULK_EPARSE, "not the sum"},
    {"idles_below_gap", "\"idles_before\": 4,", "\"idles_before\": 3,", ULK_EPARSE, "below the gap"},
    {"totals_wrong", "\"words\": 7", "\"words\": 8", ULK_EPARSE, "totals"},
    {"pattern_length", "\"zero\": \"0011\"", "\"zero\": \"00111\"", ULK_EPARSE, "sub-bits"},
    {"text_with_blank", "\"text\": \"FAST\"", "\"text\": \"FA ST\"", ULK_EPARSE, "cannot appear in a command list"},
    {"not_json", "\"commands\": [", "\"commands\": [[", ULK_EPARSE, ""},
    {"format_name", "\"format\": \"ulk-upload\"", "\"format\": \"ulk-upload\", \"fmt\": 0", ULK_EPARSE, "unexpected member"},
};

static void test_edits_with_valid_digest(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof edit_rows / sizeof edit_rows[0]; i++) {
        size_t n;
        char *t = edit_redigest(edit_rows[i].from, edit_rows[i].to, &n);
        char msg[600];
        int rc = read_mem(t, n, msg, sizeof msg);
        print_message("row %s: %d %s\n", edit_rows[i].row, rc, msg);
        assert_int_equal(rc, edit_rows[i].rc);
        if (edit_rows[i].frag) assert_non_null(strstr(msg, edit_rows[i].frag));
        free(t);
    }
}

static void test_hostile_bytes(void **st)
{
    (void)st;
    static const struct { const char *row; const char *t; size_t n; int rc; } rows[] = {
        {"empty", "", 0, ULK_EFORMAT},
        {"one_brace", "{", 1, ULK_EFORMAT},
        {"other_json", "{\"a\": 1}\n", 9, ULK_EFORMAT},
        {"binary", "\x7f" "ELF\x02\x01\x01", 7, ULK_EFORMAT},
        {"name_only", "{\"format\": \"ulk-upload\"}\n", 25, ULK_EINTEGRITY},
        {"nul_inside", "{\"format\": \"ulk-upload\"\0}", 26, ULK_EINTEGRITY},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        print_message("row %s\n", rows[i].row);
        assert_int_equal(read_mem(rows[i].t, rows[i].n, NULL, 0), rows[i].rc);
    }
    /* deep nesting with a correct digest */
    size_t n;
    char deep[4200];
    size_t k = 0;
    k += (size_t)sprintf(deep, "\"commands\": ");
    for (int i = 0; i < 2000; i++) deep[k++] = '[';
    deep[k] = 0;
    char *t = edit_redigest("\"commands\": [", deep, &n);
    assert_int_not_equal(read_mem(t, n, NULL, 0), 0);
    free(t);
    /* a missing file is an I/O error */
    ulk_diag *d = ulk_diag_create();
    ulk_upload *u = NULL;
    assert_int_equal(ulk_upload_read("no-such-dir/none.upl", &u, d), ULK_EIO);
    assert_null(u);
    ulk_diag_destroy(d);
}

/* The command list printed back compiles to the same upload (lines kept, waits merged). */
static void test_print_list_round_trip(void **st)
{
    (void)st;
    char *buf = NULL;
    size_t n = 0;
    FILE *f = open_memstream(&buf, &n);
    assert_int_equal(ulk_upload_print_list(g_up, f), 0);
    fclose(f);
    print_message("%s", buf);
    assert_non_null(strstr(buf, "FIRE pulses=9 confirm\n"));
    assert_non_null(strstr(buf, "wait 0.5s\nGAIN k=-0\n"));
    ulk_diag *d = ulk_diag_create();
    ulk_cmdlist *l = NULL;
    assert_int_equal(ulk_cmdlist_parse("pass.cmd", buf, n, &l, d), 0);
    ulk_upload *u = NULL;
    assert_int_equal(ulk_compile(g_dict, l, &u, d), 0);
    assert_same_upload(g_up, u);
    ulk_upload_destroy(u);
    ulk_cmdlist_destroy(l);
    ulk_diag_destroy(d);
    free(buf);
}

static void test_write_failure_leaves_nothing(void **st)
{
    (void)st;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_upload_write(g_up, "no-such-dir/out.upl", d), ULK_EIO);
    assert_int_equal(access("no-such-dir/out.upl", F_OK), -1);
    ulk_diag_destroy(d);
}

static void test_read_alloc_failures(void **st)
{
    (void)st;
    for (long k = 1; k < 120; k++) {
        ulk_diag *d = ulk_diag_create();
        ulk_upload *u = NULL;
        ulk_alloc_fail_at(k);
        int rc = ulk_upload_read_mem("x.upl", g_text, g_len, &u, d);
        ulk_alloc_fail_at(0);
        if (rc == 0) assert_non_null(u);
        else assert_null(u);
        ulk_upload_destroy(u);
        ulk_diag_destroy(d);
    }
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_round_trip),
        cmocka_unit_test(test_tamper_detected),
        cmocka_unit_test(test_edits_with_valid_digest),
        cmocka_unit_test(test_hostile_bytes),
        cmocka_unit_test(test_print_list_round_trip),
        cmocka_unit_test(test_write_failure_leaves_nothing),
        cmocka_unit_test(test_read_alloc_failures),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
