/* tests/test_rx.c - the receiver object (include/ulk/rx.h) and the comparison with an upload
 * (include/ulk/verify.h): a capture of commands compiled with the demo dictionary, made by the
 * independent generator of tests/sim_capture.h, is pushed in blocks of several sizes; the
 * events must be the commands sent, in order, the same whatever the block size, with the
 * estimates and the end last; the queue is drained as it goes (never more than one push's
 * units waiting); contracts: destroy(NULL), wrong push kind, bad options, a wrong dictionary
 * counted as address rejections.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "sim_capture.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/rx.h"
#include "ulk/upload.h"
#include "ulk/verify.h"

static const char LIST[] = "OBC_NOOP\n"
                           "OBC_SET_MODE mode=STANDBY\n"
                           "PWR_SWITCH channel=HEATERS state=on\n"
                           "THERM_SETPOINT zone=BATTERY setpoint=21.5degC\n"
                           "COMM_BEACON enable=false period=60s\n"
                           "OBC_SET_TIME seconds=0x1F2E3D4C\n";

typedef struct {
    ulk_dict *dict;
    ulk_upload *u;
    float *x;
    size_t ns;
} fixture;

static int setup(void **state)
{
    fixture *f = calloc(1, sizeof *f);
    ulk_diag *d = ulk_diag_create();
    ulk_cmdlist *l = NULL;
    assert_int_equal(ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", &f->dict, d), 0);
    assert_int_equal(ulk_cmdlist_parse("rx.cmd", LIST, strlen(LIST), &l, d), 0);
    assert_int_equal(ulk_compile(f->dict, l, &f->u, d), 0);
    ulk_cmdlist_destroy(l);
    ulk_diag_destroy(d);
    ulk_word w[8];
    for (size_t i = 0; i < f->u->n_cmds; i++) w[i] = f->u->cmds[i].word;
    size_t L;
    uint8_t *sb = sim_subbits(&f->dict->link, w, f->u->n_cmds, &L, NULL);
    sim_cfg c = {.fs_hz = 48000, .ppm = 150, .delay_s = 0.37, .tail_s = 0.2, .ebn0_db = 13, .seed = 11, .invert = 1};
    f->x = sim_capture(&f->dict->link, sb, L, &c, &f->ns);
    free(sb);
    *state = f;
    return 0;
}

static int teardown(void **state)
{
    fixture *f = *state;
    ulk_upload_destroy(f->u);
    ulk_dict_destroy(f->dict);
    free(f->x);
    free(f);
    return 0;
}

typedef struct {
    char mnemonic[8][64];
    double start_s[8];
    int n_units, n_accepted, saw_est, saw_end, after_end, est_before_end, max_queued;
    ulk_rx_counts end;
} seen;

static void drain(ulk_rx *rx, seen *s)
{
    ulk_rx_event ev;
    int r, queued = 0;
    while ((r = ulk_rx_next_event(rx, &ev)) > 0) {
        queued++;
        if (s->saw_end) s->after_end++;
        if (ev.kind == ULK_RX_WORD) {
            assert_true(s->n_units < 8);
            if (ev.dec->status == ULK_WORD_ACCEPTED) {
                snprintf(s->mnemonic[s->n_accepted], 64, "%s", ev.dec->cmd->mnemonic);
                s->start_s[s->n_accepted++] = ev.dw.start_s;
            }
            s->n_units++;
        } else if (ev.kind == ULK_RX_ESTIMATES) {
            s->saw_est = 1;
            assert_true(ev.est->demod.signal_found);
        } else if (ev.kind == ULK_RX_END) {
            s->saw_end = 1;
            s->est_before_end = s->saw_est;
            s->end = ev.counts;
        }
    }
    assert_int_equal(r, 0);
    if (queued > s->max_queued) s->max_queued = queued;
}

/* Pushes the capture in blocks of `block` samples, draining after each. */
static void run_blocks(const fixture *f, size_t block, seen *s)
{
    ulk_diag *d = ulk_diag_create();
    ulk_rx_options o = {.fs_hz = 48000};
    ulk_rx *rx = NULL;
    assert_int_equal(ulk_rx_create(f->dict, &o, &rx, d), 0);
    memset(s, 0, sizeof *s);
    for (size_t i = 0; i < f->ns; i += block) {
        size_t n = f->ns - i < block ? f->ns - i : block;
        assert_int_equal(ulk_rx_push(rx, f->x + i, n), 0);
        drain(rx, s);
    }
    assert_int_equal(ulk_rx_finish(rx), 0);
    drain(rx, s);
    ulk_rx_destroy(rx);
    ulk_diag_destroy(d);
}

static void rx_finds_the_commands_in_any_block_size(void **state)
{
    fixture *f = *state;
    const size_t blocks[] = {f->ns, 65536, 4801, 97, 1};
    seen ref, s;
    run_blocks(f, blocks[0], &ref);
    assert_int_equal(ref.n_accepted, (int)f->u->n_cmds);
    for (size_t i = 0; i < f->u->n_cmds; i++) assert_string_equal(ref.mnemonic[i], f->u->cmds[i].mnemonic);
    assert_true(ref.saw_end && ref.est_before_end);
    assert_int_equal(ref.after_end, 0);
    assert_int_equal((int)ref.end.n_units, ref.n_units);
    assert_int_equal((int)ref.end.n_accepted, ref.n_accepted);
    for (size_t b = 1; b < sizeof blocks / sizeof blocks[0]; b++) {
        run_blocks(f, blocks[b], &s);
        assert_int_equal(s.n_accepted, ref.n_accepted);
        for (int i = 0; i < s.n_accepted; i++) {
            assert_string_equal(s.mnemonic[i], ref.mnemonic[i]);
            /* the same sample-exact decision whatever the block size (within float rounding) */
            if (fabs(s.start_s[i] - ref.start_s[i]) > 1e-9) fail_msg("block %zu: word %d at %.9f s, not %.9f s",
                                                                     blocks[b], i, s.start_s[i], ref.start_s[i]);
        }
        /* drained after each push: a single-sample push holds at most one unit; the last
         * drain holds the estimates and the end */
        if (blocks[b] <= 4801 && s.max_queued > 3) fail_msg("block %zu: %d events queued at once", blocks[b], s.max_queued);
    }
}

static int verify_events(const ulk_rx_event *ev, void *user)
{
    return ulk_verify_add(user, ev);
}

/* The capture written to a file and read back through ulk_rx_run_file, compared with the
 * upload: every command matched, in order. */
static void run_file_and_verify_match(void **state)
{
    fixture *f = *state;
    char path[] = ULK_BINARY_DIR "/test_rx_capture.f32";
    FILE *fp = fopen(path, "wb");
    assert_non_null(fp);
    assert_int_equal(fwrite(f->x, sizeof *f->x, f->ns, fp), f->ns);
    assert_int_equal(fclose(fp), 0);
    ulk_diag *d = ulk_diag_create();
    ulk_verify *v = NULL;
    assert_int_equal(ulk_verify_create(f->dict, f->u, &v, d), 0);
    ulk_rx_file_options fo = {.rate_hz = 48000, .format = 0, .channel = -1};
    assert_int_equal(ulk_rx_run_file(f->dict, path, &fo, NULL, verify_events, v, d), 0);
    assert_int_equal(ulk_verify_compare(v), 0);
    assert_int_equal(ulk_verify_n_accepted(v), f->u->n_cmds);
    assert_int_equal(ulk_verify_n_ops(v), f->u->n_cmds);
    assert_true(ulk_verify_good(v));
    ulk_verify_destroy(v);
    ulk_diag_destroy(d);
    remove(path);
}

/* A dictionary of another vehicle (the demo with vehicle address 0xA6): every intact word is
 * rejected for its address, and the counts say so. */
static void another_vehicle_counts_as_address(void **state)
{
    fixture *f = *state;
    ulk_diag *d = ulk_diag_create();
    ulk_dict *other = NULL;
    char *txt = NULL;
    size_t len = 0;
    FILE *fp = fopen(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", "rb");
    assert_non_null(fp);
    txt = malloc(1 << 20);
    len = fread(txt, 1, (1 << 20) - 1, fp);
    fclose(fp);
    txt[len] = 0;
    char *p = strstr(txt, "value: 0xA7");
    assert_non_null(p);
    p[10] = '6';
    assert_int_equal(ulk_dict_load_mem("other.yaml", txt, len, 0, &other, d), 0);
    free(txt);
    ulk_rx_options o = {.fs_hz = 48000};
    ulk_rx *rx = NULL;
    assert_int_equal(ulk_rx_create(other, &o, &rx, d), 0);
    assert_int_equal(ulk_rx_push(rx, f->x, f->ns), 0);
    assert_int_equal(ulk_rx_finish(rx), 0);
    ulk_rx_counts c;
    ulk_rx_get_counts(rx, &c);
    assert_int_equal(c.n_accepted, 0);
    assert_int_equal(c.n_units, f->u->n_cmds);
    assert_int_equal(c.n_rejected_address, f->u->n_cmds);
    ulk_rx_destroy(rx);
    ulk_dict_destroy(other);
    ulk_diag_destroy(d);
}

static void contracts(void **state)
{
    fixture *f = *state;
    ulk_rx_destroy(NULL);
    ulk_rx_spectrum_free(NULL);
    ulk_verify_destroy(NULL);
    ulk_diag *d = ulk_diag_create();
    ulk_rx *rx = NULL;
    ulk_rx_options bad = {.fs_hz = 0};
    assert_int_equal(ulk_rx_create(f->dict, &bad, &rx, d), ULK_EINVAL);
    assert_null(rx);
    assert_true(ulk_diag_errors(d) > 0);
    ulk_diag_clear(d);
    /* complex without a carrier section: the CCSDS demo has none */
    ulk_dict *cc = NULL;
    assert_int_equal(ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-ccsds.yaml", &cc, d), 0);
    ulk_rx_options cx = {.fs_hz = 48000, .complex_ = 1};
    assert_int_equal(ulk_rx_create(cc, &cx, &rx, d), ULK_EINVAL);
    ulk_dict_destroy(cc);
    ulk_diag_clear(d);
    ulk_rx_options o = {.fs_hz = 48000};
    assert_int_equal(ulk_rx_create(f->dict, &o, &rx, d), 0);
    float iq[4] = {0};
    assert_int_equal(ulk_rx_push_complex(rx, iq, 2), ULK_EINVAL);
    ulk_rx_event ev;
    assert_int_equal(ulk_rx_next_event(rx, &ev), 0); /* nothing yet */
    assert_int_equal(ulk_rx_finish(rx), 0);
    int n = 0, last = 0;
    while (ulk_rx_next_event(rx, &ev) > 0) { n++; last = ev.kind; }
    assert_int_equal(n, 2); /* estimates, end */
    assert_int_equal(last, ULK_RX_END);
    assert_int_equal(ulk_rx_push(rx, iq, 1), ULK_EINVAL); /* after finish */
    ulk_rx_destroy(rx);
    ulk_diag_destroy(d);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(rx_finds_the_commands_in_any_block_size),
        cmocka_unit_test(run_file_and_verify_match),
        cmocka_unit_test(another_vehicle_counts_as_address),
        cmocka_unit_test(contracts),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
