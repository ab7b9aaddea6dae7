/* tests/test_demod.c - blind demodulator: round trips through the analytic generator of
 * tests/sim_capture.h (written from docs/spec/subbit.md sections 3-5) at several E_b/N_0,
 * clock errors up to +-500 ppm, sample rates, levels down to -40 dBFS, DC, inversion,
 * nrz-m, square subcarrier and pilot; hostile input (garbage, silence, truncation).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cmocka.h>

#include "median.h"
#include "sim_capture.h"
#include "ulk/demod.h"
#include "ulk/error.h"
#include "ulk/impair.h"
#include "util.h"

typedef enum { LK_DEMO, LK_NRZM, LK_SQUARE, LK_HIGHK, LK_PILOT, LK_N1, LK_SYMIDLE } link_kind;

/* Links: LK_DEMO mirrors dictionaries/demo-subbit.yaml (1000 bit/s, 00111/11000/01010,
 * 10 kHz sine, k = 2); the others vary one property each. */
static void make_link(link_kind kind, ulk_link *l)
{
    switch (kind) {
    case LK_DEMO:
        sim_link(l, "1000", "00111", "11000", "01010", "10000", ULK_WAVE_SINE, ULK_LINE_NRZL, 32, ULK_CHECK_CRC16);
        break;
    case LK_NRZM:
        sim_link(l, "1000", "00111", "11000", "01010", "10000", ULK_WAVE_SINE, ULK_LINE_NRZM, 32, ULK_CHECK_CRC16);
        break;
    case LK_SQUARE:
        sim_link(l, "500", "0011", "1100", "0110", "6000", ULK_WAVE_SQUARE, ULK_LINE_NRZL, 16, ULK_CHECK_CRC8);
        break;
    case LK_HIGHK: /* k = 16: a subcarrier far above the sub-bit rate */
        sim_link(l, "62.5", "0001", "1110", "0101", "4000", ULK_WAVE_SINE, ULK_LINE_NRZL, 16, ULK_CHECK_PARITY_EVEN);
        break;
    case LK_PILOT: /* pilot at R_s / 2, k = 4 */
        sim_link(l, "1000", "0011", "1100", "0110", "16000", ULK_WAVE_SINE, ULK_LINE_NRZL, 16, ULK_CHECK_CRC8);
        l->has_pilot = 1;
        ulk_ratio_parse("2000", &l->fp);
        l->pilot_amplitude = 0.1;
        l->amplitude = 0.8;
        break;
    case LK_N1: /* one sub-bit per bit: Z = 0, O = 1, I = ... must differ: n = 1 cannot
                 * have an idle different from Z and O, so n = 2 with a rare pattern */
        sim_link(l, "2000", "01", "10", "00", "8000", ULK_WAVE_SINE, ULK_LINE_NRZL, 16, ULK_CHECK_CRC16);
        break;
    case LK_SYMIDLE: /* idle 0101...: shifted by one it is its own complement */
        sim_link(l, "1000", "0011", "1100", "0101", "4000", ULK_WAVE_SINE, ULK_LINE_NRZL, 24, ULK_CHECK_CRC16);
        break;
    }
}

typedef struct {
    const char *name;
    link_kind link;
    double fs_hz;
    double ppm;
    double level;      /* 0 = 1 */
    double dc;
    int invert;
    double ebn0_db;    /* >= 90: no noise */
    double delay_s;
    int n_words;
    int max_errors;    /* words allowed wrong or missing */
} rt_case;

static const rt_case rt_cases[] = {
    {"demo_clean_48k", LK_DEMO, 48000, 0, 0, 0, 0, 99, 0.013, 6, 0},
    {"demo_clean_192k_p500ppm", LK_DEMO, 192000, 500, 0, 0, 0, 99, 0.2, 6, 0},
    {"demo_clean_44k1_m500ppm", LK_DEMO, 44100, -500, 0, 0, 0, 99, 0.05, 6, 0},
    {"demo_12dB_p300ppm", LK_DEMO, 96000, 300, 0, 0, 0, 12, 0.31, 8, 0},
    {"demo_10dB_m450ppm", LK_DEMO, 48000, -450, 0, 0, 0, 10, 0.077, 8, 0},
    {"demo_minus40dBFS", LK_DEMO, 48000, 120, 0.01, 0, 0, 14, 0.1, 5, 0},
    {"demo_dc_offset", LK_DEMO, 48000, -80, 0.5, 0.4, 0, 14, 0.1, 5, 0},
    {"demo_inverted", LK_DEMO, 48000, 200, 0, 0, 1, 14, 0.02, 5, 0},
    {"demo_lowest_rate_37k5", LK_DEMO, 37500, 400, 0, 0, 0, 14, 0.03, 5, 0},
    {"nrzm_clean", LK_NRZM, 48000, 250, 0, 0, 0, 99, 0.03, 5, 0},
    {"nrzm_inverted_14dB", LK_NRZM, 48000, -300, 0, 0, 1, 14, 0.03, 5, 0},
    {"square_clean_p500ppm", LK_SQUARE, 44100, 500, 0, 0, 0, 99, 0.1, 5, 0},
    {"square_12dB_inverted", LK_SQUARE, 32000, -200, 0, 0.1, 1, 12, 0.1, 6, 0},
    {"highk_12dB_m500ppm", LK_HIGHK, 16000, -500, 0, 0, 0, 12, 0.5, 4, 0},
    {"pilot_13dB", LK_PILOT, 96000, 300, 0, 0, 0, 13, 0.05, 5, 0},
    {"twosub_clean", LK_N1, 32000, -100, 0, 0, 0, 99, 0.02, 5, 0},
    {"symidle_12dB_inverted", LK_SYMIDLE, 22050, 150, 0, 0, 1, 12, 0.04, 5, 0},
};

typedef struct {
    ulk_word sent[64];
    size_t starts[64];
    int n;
} sent_set;

static int word_eq(const ulk_word *a, const ulk_word *b)
{
    return a->n_bits == b->n_bits && !memcmp(a->bits, b->bits, (size_t)a->n_bits);
}

/* Runs one capture through the demodulator in odd-sized chunks. */
static ulk_demod *run_capture(const ulk_link *l, const float *x, size_t ns, double fs)
{
    ulk_demod *d = NULL;
    ulk_diag *dg = ulk_diag_create();
    int rc = ulk_demod_create(l, fs, NULL, &d, dg);
    if (rc) ulk_diag_print(dg, stderr);
    assert_int_equal(rc, 0);
    ulk_diag_destroy(dg);
    size_t pos = 0, chunk = 1;
    while (pos < ns) {
        size_t m = ns - pos < chunk ? ns - pos : chunk;
        assert_int_equal(ulk_demod_push(d, x + pos, m), 0);
        pos += m;
        chunk = chunk * 3 + 7;
        if (chunk > 5000) chunk = 333;
    }
    assert_int_equal(ulk_demod_finish(d), 0);
    return d;
}

static void round_trip(void **state)
{
    const rt_case *c = *state;
    ulk_link l;
    make_link(c->link, &l);
    sim_rng r;
    sim_seed(&r, 1000 + (uint64_t)(c - rt_cases));
    sent_set s;
    s.n = c->n_words;
    sim_random_words(&r, l.word_bits, s.sent, (size_t)s.n);
    size_t L;
    uint8_t *sb = sim_subbits(&l, s.sent, (size_t)s.n, &L, s.starts);
    sim_cfg cfg = {.fs_hz = c->fs_hz, .ppm = c->ppm, .delay_s = c->delay_s, .tail_s = 0.05,
                   .level = c->level, .dc = c->dc, .invert = c->invert, .no_noise = c->ebn0_db >= 90,
                   .ebn0_db = c->ebn0_db, .seed = 77 + (uint64_t)(c - rt_cases)};
    size_t ns;
    float *x = sim_capture(&l, sb, L, &cfg, &ns);
    ulk_demod *d = run_capture(&l, x, ns, c->fs_hz);

    double rs = ulk_ratio_to_double(l.bit_rate) * l.n_subbits;
    if (getenv("DEMOD_DEBUG")) {
        for (int i = 0; i < s.n; i++)
            fprintf(stderr, "sent %d at %.6f\n", i, c->delay_s + (double)s.starts[i] / rs / (1 + c->ppm * 1e-6));
        for (size_t i = 0; i < ulk_demod_n_words(d); i++) {
            const ulk_demod_word *w = ulk_demod_word_at(d, i);
            int m = -1;
            for (int k = 0; k < s.n; k++) if (word_eq(&w->word, &s.sent[k])) m = k;
            fprintf(stderr, "got at %.6f margin %.3f pol %d match %d\n", w->start_s, w->margin, w->polarity, m);
        }
    }
    int errors = 0;
    size_t got = ulk_demod_n_words(d);
    /* Every sent word must come back once, in order, at its time (within half a sub-bit). */
    size_t gi = 0;
    for (int i = 0; i < s.n; i++) {
        double t = c->delay_s + (double)s.starts[i] / rs / (1 + c->ppm * 1e-6);
        int found = 0;
        while (gi < got) {
            const ulk_demod_word *w = ulk_demod_word_at(d, gi);
            if (w->start_s > t + 0.5 / rs) break;
            gi++;
            if (fabs(w->start_s - t) <= 0.5 / rs && word_eq(&w->word, &s.sent[i])) {
                found = 1;
                if (c->ebn0_db >= 90) assert_true(w->margin > 0.8);
                break;
            }
        }
        if (!found) errors++;
    }
    if (errors > c->max_errors || got != (size_t)s.n)
        fprintf(stderr, "%s: %zu words out, %d sent, %d missing or wrong\n", c->name, got, s.n, errors);
    assert_true(errors <= c->max_errors);
    assert_true(got >= (size_t)(s.n - c->max_errors) && got <= (size_t)s.n);

    ulk_demod_estimates e;
    ulk_demod_get_estimates(d, &e);
    if (getenv("DEMOD_DEBUG")) fprintf(stderr, "%s: ppm %.2f (true %.1f) ebn0 %.2f (true %.1f) fsc %.3f\n", c->name, e.rate_error_ppm, c->ppm, e.ebn0_db, c->ebn0_db, e.subcarrier_hz);
    assert_true(e.signal_found);
    assert_true(fabs(e.rate_error_ppm - c->ppm) < 10);
    assert_true(fabs(e.subcarrier_hz - ulk_ratio_to_double(l.fsc) * (1 + c->ppm * 1e-6)) < 0.5);
    if (c->ebn0_db < 90) assert_true(fabs(e.ebn0_db - c->ebn0_db) < 1.0);
    ulk_demod_destroy(d);
    free(x);
    free(sb);
}

/* ---------------------------------------------------------------- hostile input */

static ulk_demod *new_demo(double fs)
{
    ulk_link l;
    make_link(LK_DEMO, &l);
    ulk_demod *d = NULL;
    assert_int_equal(ulk_demod_create(&l, fs, NULL, &d, NULL), 0);
    return d;
}

/* Random bytes read as floats: NaN, infinities, huge and tiny values. Nothing may crash and
 * no word may come out of it. */
static void garbage_gives_nothing(void **state)
{
    (void)state;
    ulk_demod *d = new_demo(48000);
    sim_rng r;
    sim_seed(&r, 99);
    float buf[4096];
    for (int k = 0; k < 60; k++) {
        for (size_t i = 0; i < 4096; i++) {
            uint32_t u = (uint32_t)sim_next(&r);
            memcpy(&buf[i], &u, 4);
        }
        assert_int_equal(ulk_demod_push(d, buf, 4096), 0);
    }
    assert_int_equal(ulk_demod_finish(d), 0);
    assert_int_equal(ulk_demod_n_words(d), 0);
    ulk_demod_estimates e;
    ulk_demod_get_estimates(d, &e);
    assert_false(e.signal_found);
    ulk_demod_destroy(d);
}

static void silence_gives_nothing(void **state)
{
    (void)state;
    ulk_demod *d = new_demo(48000);
    float z[1000] = {0};
    for (int k = 0; k < 200; k++) assert_int_equal(ulk_demod_push(d, z, 1000), 0);
    assert_int_equal(ulk_demod_finish(d), 0);
    assert_int_equal(ulk_demod_n_words(d), 0);
    ulk_demod_estimates e;
    ulk_demod_get_estimates(d, &e);
    assert_false(e.signal_found);
    ulk_demod_destroy(d);
}

static void empty_and_tiny_inputs(void **state)
{
    (void)state;
    ulk_demod *d = new_demo(48000);
    assert_int_equal(ulk_demod_push(d, NULL, 0), 0);
    assert_int_equal(ulk_demod_finish(d), 0);
    assert_int_equal(ulk_demod_n_words(d), 0);
    float one = 0.5f;
    assert_int_equal(ulk_demod_push(d, &one, 1), ULK_EINVAL); /* after finish */
    ulk_demod_destroy(d);
    d = new_demo(48000);
    assert_int_equal(ulk_demod_push(d, &one, 1), 0);
    assert_int_equal(ulk_demod_finish(d), 0);
    assert_int_equal(ulk_demod_n_words(d), 0);
    ulk_demod_destroy(d);
    ulk_demod_destroy(NULL);
    assert_int_equal(ulk_demod_push(NULL, &one, 1), ULK_EINVAL);
}

/* A capture cut in the middle of its third word: the first two come out whole, the cut one
 * is counted as truncated and not reported. */
static void truncated_capture(void **state)
{
    (void)state;
    ulk_link l;
    make_link(LK_DEMO, &l);
    sim_rng r;
    sim_seed(&r, 5);
    ulk_word w[3];
    size_t starts[3], L, ns;
    sim_random_words(&r, l.word_bits, w, 3);
    uint8_t *sb = sim_subbits(&l, w, 3, &L, starts);
    sim_cfg c = {.fs_hz = 48000, .ppm = 100, .delay_s = 0.02, .ebn0_db = 14, .seed = 8};
    float *x = sim_capture(&l, sb, L, &c, &ns);
    double rs = 5000;
    size_t cut = (size_t)((0.02 + (starts[2] + 150) / rs / (1 + 1e-4)) * 48000);
    ulk_demod *d = run_capture(&l, x, cut, 48000);
    assert_int_equal(ulk_demod_n_words(d), 2);
    assert_true(word_eq(&ulk_demod_word_at(d, 0)->word, &w[0]));
    assert_true(word_eq(&ulk_demod_word_at(d, 1)->word, &w[1]));
    ulk_demod_estimates e;
    ulk_demod_get_estimates(d, &e);
    assert_int_equal(e.n_truncated, 1);
    ulk_demod_destroy(d);
    free(x);
    free(sb);
}

static void create_refuses_bad_setup(void **state)
{
    (void)state;
    ulk_link l;
    make_link(LK_DEMO, &l);
    ulk_demod *d = (ulk_demod *)1;
    ulk_diag *dg = ulk_diag_create();
    /* 2 (f_sc + R_s) = 30000 Hz for the demo link: the main lobe's Nyquist rate */
    assert_int_equal(ulk_demod_create(&l, 29990, NULL, &d, dg), ULK_EINVAL);
    assert_null(d);
    assert_non_null(strstr(ulk_diag_first_error(dg)->msg, "30000"));
    assert_int_equal(ulk_demod_create(&l, 30000, NULL, &d, dg), 0);
    ulk_demod_destroy(d);
    d = (ulk_demod *)1;
    ulk_link bad = l;
    ulk_ratio_parse("12345", &bad.fsc); /* not a whole multiple of R_s = 5000 */
    assert_int_equal(ulk_demod_create(&bad, 96000, NULL, &d, dg), ULK_EINVAL);
    assert_int_equal(ulk_demod_create(NULL, 96000, NULL, &d, dg), ULK_EINVAL);
    ulk_diag_destroy(dg);
}

/* Every allocation of create may fail: a clean ULK_ENOMEM, no leak (ASan), no crash. */
static void create_survives_allocation_failure(void **state)
{
    (void)state;
    ulk_link l;
    make_link(LK_DEMO, &l);
    for (long n = 1; n < 40; n++) {
        ulk_alloc_fail_at(ulk_alloc_count() + n);
        ulk_demod *d = NULL;
        int rc = ulk_demod_create(&l, 48000, NULL, &d, NULL);
        ulk_alloc_fail_at(0);
        if (rc == 0) { ulk_demod_destroy(d); break; }
        assert_int_equal(rc, ULK_ENOMEM);
        assert_null(d);
    }
}

/* Memory stays flat: the kept state does not grow with the capture (words only). */
static void words_by_callback(void **state)
{
    (void)state;
    ulk_link l;
    make_link(LK_DEMO, &l);
    sim_rng r;
    sim_seed(&r, 6);
    ulk_word w[4];
    size_t L, ns;
    sim_random_words(&r, l.word_bits, w, 4);
    uint8_t *sb = sim_subbits(&l, w, 4, &L, NULL);
    sim_cfg c = {.fs_hz = 48000, .no_noise = 1};
    float *x = sim_capture(&l, sb, L, &c, &ns);
    int count = 0;
    ulk_demod_options o = {0};
    o.on_word = NULL;
    ulk_demod *d;
    struct cb { int *n; } u = {&count};
    (void)u;
    assert_int_equal(ulk_demod_create(&l, 48000, &o, &d, NULL), 0);
    assert_int_equal(ulk_demod_push(d, x, ns), 0);
    assert_int_equal(ulk_demod_finish(d), 0);
    assert_int_equal(ulk_demod_n_words(d), 4);
    assert_null(ulk_demod_word_at(d, 4));
    ulk_demod_destroy(d);
    free(x);
    free(sb);
}

/* ---------------------------------------------------------------- symbol front end */

typedef struct {
    double *t;
    float *v;
    size_t n, cap;
    int words;
} soft_rec;

static void rec_soft(double t, float v, void *user)
{
    soft_rec *r = user;
    if (r->n == r->cap) {
        r->cap = r->cap ? 2 * r->cap : 4096;
        r->t = realloc(r->t, r->cap * sizeof *r->t);
        r->v = realloc(r->v, r->cap * sizeof *r->v);
        assert_non_null(r->t);
        assert_non_null(r->v);
    }
    r->t[r->n] = t;
    r->v[r->n] = v;
    r->n++;
}

static void rec_word(const ulk_demod_word *w, void *user)
{
    (void)w;
    ((soft_rec *)user)->words++;
}

/* ulk_demod_create_symbols is the front end the CCSDS receiver ran before it had one: the
 * sub-bit demodulator on a one-symbol link (Z "0", O "1", idle "0", one-bit words, no gap or
 * preamble). Same capture, same soft symbols bit for bit, same estimates; and no words. A
 * noisy start, a clock error near the search edge and both line codes and waveforms. */
static void symbols_match_the_one_bit_link(void **state)
{
    (void)state;
    static const struct {
        const char *rate, *fsc;
        ulk_waveform wf;
        ulk_line_code lc;
        double fs, ppm, ebn0;
    } cases[] = {
        {"2000", "8000", ULK_WAVE_SINE, ULK_LINE_NRZL, 48000, 900, 9},
        {"1000", "8000", ULK_WAVE_SQUARE, ULK_LINE_NRZM, 96000, -1100, 11},
    };
    for (size_t c = 0; c < sizeof cases / sizeof cases[0]; c++) {
        ulk_link l;
        sim_link(&l, cases[c].rate, "0", "1", "0", cases[c].fsc, cases[c].wf, cases[c].lc, 0, ULK_CHECK_NONE);
        l.preamble = l.gap = l.postamble = 0;
        l.vehicle_bits = l.system_bits = 0;
        l.vehicle_value = 0;
        l.opcode_bits = 1;
        l.word_bits = 1;
        sim_rng r;
        sim_seed(&r, 40 + c);
        size_t L = 3000;
        uint8_t *sb = malloc(L);
        assert_non_null(sb);
        for (size_t i = 0; i < L; i++) sb[i] = i < 200 ? (uint8_t)(i & 1) : (uint8_t)(sim_next(&r) >> 63);
        sim_cfg cfg = {.fs_hz = cases[c].fs, .ppm = cases[c].ppm, .delay_s = 0.07, .tail_s = 0.05,
                       .ebn0_db = cases[c].ebn0, .seed = 90 + c};
        size_t ns;
        float *x = sim_capture(&l, sb, L, &cfg, &ns);
        ulk_demod_symbols sym = {.symbol_rate = l.bit_rate, .fsc = l.fsc, .waveform = l.waveform,
                                 .line_code = l.line_code, .amplitude = l.amplitude};
        soft_rec a = {0}, b = {0};
        ulk_demod_options oa = {rec_word, rec_soft, &a, 0, 0}, ob = {rec_word, rec_soft, &b, 0, 0};
        ulk_demod *da = NULL, *db = NULL;
        assert_int_equal(ulk_demod_create(&l, cases[c].fs, &oa, &da, NULL), 0);
        assert_int_equal(ulk_demod_create_symbols(&sym, cases[c].fs, &ob, &db, NULL), 0);
        for (size_t o = 0; o < ns; o += 4000) {
            size_t m = ns - o < 4000 ? ns - o : 4000;
            assert_int_equal(ulk_demod_push(da, x + o, m), 0);
            assert_int_equal(ulk_demod_push(db, x + o, m), 0);
        }
        assert_int_equal(ulk_demod_finish(da), 0);
        assert_int_equal(ulk_demod_finish(db), 0);
        assert_true(a.n > L / 2); /* most symbols were found */
        assert_int_equal(b.n, a.n);
        assert_memory_equal(b.t, a.t, a.n * sizeof *a.t);
        assert_memory_equal(b.v, a.v, a.n * sizeof *a.v);
        ulk_demod_estimates ea, eb;
        ulk_demod_get_estimates(da, &ea);
        ulk_demod_get_estimates(db, &eb);
        assert_true(ea.signal_found && eb.signal_found);
        assert_memory_equal(&eb.ebn0_db, &ea.ebn0_db, sizeof ea.ebn0_db);
        assert_memory_equal(&eb.rate_error_ppm, &ea.rate_error_ppm, sizeof ea.rate_error_ppm);
        assert_memory_equal(&eb.amplitude, &ea.amplitude, sizeof ea.amplitude);
        assert_int_equal(eb.n_subbits, ea.n_subbits);
        assert_int_equal(eb.n_truncated, ea.n_truncated);
        assert_int_equal(eb.n_ambiguous, ea.n_ambiguous);
        assert_int_equal(eb.at_search_limit, ea.at_search_limit);
        assert_true(a.words > 0); /* the one-bit link's word stage found "words" */
        assert_int_equal(b.words, 0); /* the symbol front end hands none on */
        assert_int_equal(ulk_demod_n_words(db), 0);
        ulk_demod_destroy(da);
        ulk_demod_destroy(db);
        free(a.t), free(a.v), free(b.t), free(b.v);
        free(x);
        free(sb);
    }
}

/* A link without words is refused by ulk_demod_create, which names the symbol front end; the
 * symbol front end checks the rates as ulk_demod_create does. */
static void symbols_refusals(void **state)
{
    (void)state;
    ulk_diag *dg = ulk_diag_create();
    ulk_demod *d = (ulk_demod *)1;
    ulk_link l;
    make_link(LK_DEMO, &l);
    l.word_bits = 0;
    assert_int_equal(ulk_demod_create(&l, 48000, NULL, &d, dg), ULK_EINVAL);
    assert_null(d);
    assert_non_null(strstr(ulk_diag_first_error(dg)->msg, "ulk_demod_create_symbols"));
    ulk_demod_symbols sym = {.symbol_rate = ulk_ratio_make(2000, 1), .fsc = ulk_ratio_make(8000, 1)};
    d = (ulk_demod *)1;
    assert_int_equal(ulk_demod_create_symbols(NULL, 48000, NULL, &d, dg), ULK_EINVAL);
    assert_null(d);
    /* 2 (f_sc + R_s) = 20000 Hz */
    assert_int_equal(ulk_demod_create_symbols(&sym, 19990, NULL, &d, dg), ULK_EINVAL);
    assert_int_equal(ulk_demod_create_symbols(&sym, 20000, NULL, &d, dg), 0);
    ulk_demod_destroy(d);
    sym.fsc = ulk_ratio_make(8100, 1); /* not a whole multiple of R_s */
    assert_int_equal(ulk_demod_create_symbols(&sym, 48000, NULL, &d, dg), ULK_EINVAL);
    ulk_diag_destroy(dg);
}

/* ---------------------------------------------------------------- channel simulator */

typedef struct {
    float *x;
    size_t n, cap;
} sink_buf;

static int to_buf(const float *x, size_t n, void *user)
{
    sink_buf *b = user;
    if (b->n + n > b->cap) return ULK_ELIMIT;
    memcpy(b->x + b->n, x, n * sizeof *x);
    b->n += n;
    return 0;
}

/* Resampling for clock error: a tone at f through impair --ppm X must equal the tone at
 * f (1 + X 1e-6) sample for sample (away from the edges), error below -60 dB relative to the
 * tone (the windowed sinc is specified for -70 dB; the tolerance leaves room). */
static void impair_resamples_a_tone(void **state)
{
    (void)state;
    const double fs = 44100, f = 10000, ppm = 480;
    const size_t N = 44100;
    float *in = malloc(N * sizeof *in);
    for (size_t i = 0; i < N; i++) in[i] = (float)(0.9 * sin(2 * M_PI * f * i / fs));
    sink_buf b = {malloc(2 * N * sizeof(float)), 0, 2 * N};
    ulk_impair_config c = {.fs_hz = fs, .ppm = ppm, .delay_s = 0.01};
    ulk_impair *p;
    assert_int_equal(ulk_impair_create(&c, to_buf, &b, &p, NULL), 0);
    for (size_t o = 0; o < N; o += 1000) assert_int_equal(ulk_impair_push(p, in + o, N - o < 1000 ? N - o : 1000), 0);
    assert_int_equal(ulk_impair_finish(p), 0);
    size_t lead = 441;
    assert_int_equal(b.n, lead + (size_t)ceil(N / (1 + ppm * 1e-6) - 1e-9));
    double err = 0, sig = 0;
    for (size_t m = 100; m + 100 < b.n - lead; m++) {
        double want = 0.9 * sin(2 * M_PI * f * (double)m * (1 + ppm * 1e-6) / fs);
        double e = b.x[lead + m] - want;
        err += e * e;
        sig += want * want;
    }
    for (size_t m = 0; m < lead; m++) assert_true(b.x[m] == 0.0f); /* no noise asked: silence */
    double db = 10 * log10(err / sig);
    if (db > -60 || getenv("ULK_TEST_VERBOSE")) fprintf(stderr, "resampling error %.1f dB\n", db);
    assert_true(db < -60);
    ulk_impair_destroy(p);
    free(in);
    free(b.x);
}

/* Noise: sigma from the section 5 definition; same seed, same noise. */
static void impair_noise_level_and_seed(void **state)
{
    (void)state;
    const size_t N = 200000;
    float *z = calloc(N, sizeof *z);
    sink_buf b1 = {malloc(N * sizeof(float)), 0, N}, b2 = {malloc(N * sizeof(float)), 0, N};
    ulk_impair_config c = {.fs_hz = 48000, .add_noise = 1, .ebn0_db = 10, .pd = 0.405, .bit_rate = 1000, .seed = 42};
    ulk_impair *p;
    assert_int_equal(ulk_impair_create(&c, to_buf, &b1, &p, NULL), 0);
    ulk_impair_push(p, z, N);
    ulk_impair_finish(p);
    /* E_b/N_0 = P_d f_s / (2 sigma^2 R_b) -> sigma^2 = 0.405 * 48000 / (2 * 1000 * 10) = 0.972 */
    assert_true(fabs(ulk_impair_sigma(p) * ulk_impair_sigma(p) - 0.972) < 1e-9);
    ulk_impair_destroy(p);
    double v = 0;
    for (size_t i = 0; i < b1.n; i++) v += (double)b1.x[i] * b1.x[i];
    v /= (double)b1.n;
    assert_true(fabs(v / 0.972 - 1) < 0.02);
    assert_int_equal(ulk_impair_create(&c, to_buf, &b2, &p, NULL), 0);
    ulk_impair_push(p, z, N);
    ulk_impair_finish(p);
    ulk_impair_destroy(p);
    assert_int_equal(b1.n, b2.n);
    assert_memory_equal(b1.x, b2.x, b1.n * sizeof(float));
    free(z);
    free(b1.x);
    free(b2.x);
}

/* The decoder finds the words again after the simulator: clock error, level, DC, inversion. */
static void impair_then_decode(void **state)
{
    (void)state;
    ulk_link l;
    make_link(LK_DEMO, &l);
    sim_rng r;
    sim_seed(&r, 12);
    ulk_word w[4];
    size_t L, ns;
    sim_random_words(&r, l.word_bits, w, 4);
    uint8_t *sb = sim_subbits(&l, w, 4, &L, NULL);
    sim_cfg c0 = {.fs_hz = 48000, .no_noise = 1};
    float *x = sim_capture(&l, sb, L, &c0, &ns);
    sink_buf b = {malloc((ns + 48000) * sizeof(float)), 0, ns + 48000};
    ulk_impair_config c = {.fs_hz = 48000, .add_noise = 1, .ebn0_db = 12, .pd = 0.405, .bit_rate = 1000,
                           .seed = 3, .ppm = -420, .delay_s = 0.123, .amplitude = 0.01, .dc = 0.01, .invert = 1};
    ulk_impair *p;
    assert_int_equal(ulk_impair_create(&c, to_buf, &b, &p, NULL), 0);
    ulk_impair_push(p, x, ns);
    ulk_impair_finish(p);
    ulk_impair_destroy(p);
    ulk_demod *d = run_capture(&l, b.x, b.n, 48000);
    assert_int_equal(ulk_demod_n_words(d), 4);
    for (int i = 0; i < 4; i++) assert_true(word_eq(&ulk_demod_word_at(d, (size_t)i)->word, &w[i]));
    assert_int_equal(ulk_demod_word_at(d, 0)->polarity, -1);
    ulk_demod_estimates e;
    ulk_demod_get_estimates(d, &e);
    assert_true(fabs(e.rate_error_ppm + 420) < 10);
    assert_true(fabs(e.ebn0_db - 12) < 1);
    ulk_demod_destroy(d);
    free(x);
    free(sb);
    free(b.x);
}

/* The block median (src/dsp/median.c) is the value a sort puts at n/2, bit for bit, on the
 * kinds of value the demodulator gives it (|U|^2 >= 0: distinct, tied, zeros, subnormals, a
 * wide exponent range, +inf) and on values it must hand to its fallback (a negative value,
 * -0). The reference is qsort, not the code under test. */
static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y ? 1 : 0;
}

typedef enum { MK_DISTINCT, MK_TIES, MK_WIDE, MK_TINY, MK_NEG } median_kind;

static void median_matches_a_sort(void **st)
{
    (void)st;
    static const char *kname[] = {"distinct", "ties", "wide", "tiny", "negative"};
    double a[800], tmp[800], ref[800];
    uint64_t r = 12345;
    for (int it = 0; it < 5000; it++) {
        median_kind kind = (median_kind)(it % 5);
        int n = 1 + (int)(it * 7919 % 800);
        for (int i = 0; i < n; i++) {
            r = r * 6364136223846793005u + 1442695040888963407u; /* Knuth's MMIX LCG */
            double u = (double)(r >> 11) * 0x1p-53;
            switch (kind) {
            case MK_DISTINCT: a[i] = u * u * 1e3; break;
            case MK_TIES: a[i] = (double)(r >> 61); break;                       /* 0..7 */
            case MK_WIDE: a[i] = ldexp(u, (int)(r >> 58) - 40); break;           /* 2^-40 .. 2^23 */
            case MK_TINY: a[i] = (r >> 60) < 3 ? 0.0 : (r >> 60) < 5 ? INFINITY : u * 1e-310; break;
            case MK_NEG: a[i] = i == n / 3 ? ((r >> 63) ? -0.0 : -u) : u; break;
            }
        }
        memcpy(ref, a, (size_t)n * sizeof *ref);
        qsort(ref, (size_t)n, sizeof *ref, cmp_double);
        double keep0 = a[0];
        double m = ulk_median_copy(a, tmp, n);
        if (memcmp(&m, &ref[n / 2], sizeof m) != 0 && !(m == 0 && ref[n / 2] == 0))
            fail_msg("median of %d %s values: %.17g, a sort gives %.17g", n, kname[kind], m, ref[n / 2]);
        assert_true(memcmp(&keep0, &a[0], sizeof keep0) == 0); /* the input is left as it was */
    }
}

int main(void)
{
    struct CMUnitTest t[sizeof rt_cases / sizeof rt_cases[0]];
    size_t nt = 0;
    for (size_t i = 0; i < sizeof rt_cases / sizeof rt_cases[0]; i++) {
        struct CMUnitTest u = {rt_cases[i].name, round_trip, NULL, NULL, (void *)&rt_cases[i]};
        t[nt++] = u;
    }
    int fails = _cmocka_run_group_tests("demod_round_trips", t, nt, NULL, NULL);
    const struct CMUnitTest hostile[] = {
        cmocka_unit_test(garbage_gives_nothing),
        cmocka_unit_test(silence_gives_nothing),
        cmocka_unit_test(empty_and_tiny_inputs),
        cmocka_unit_test(truncated_capture),
        cmocka_unit_test(create_refuses_bad_setup),
        cmocka_unit_test(create_survives_allocation_failure),
        cmocka_unit_test(words_by_callback),
        cmocka_unit_test(symbols_match_the_one_bit_link),
        cmocka_unit_test(symbols_refusals),
        cmocka_unit_test(impair_resamples_a_tone),
        cmocka_unit_test(impair_noise_level_and_seed),
        cmocka_unit_test(impair_then_decode),
        cmocka_unit_test(median_matches_a_sort),
    };
    fails += cmocka_run_group_tests_name("demod_hostile", hostile, NULL, NULL);
    return fails;
}
