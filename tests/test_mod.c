/* tests/test_mod.c - the modulator and the timing table against docs/spec/subbit.md sections 4
 * and 6: a slow obvious reference (tests/mod_fixture.h), hand-computed values at samples that
 * fall exactly on sub-bit starts and square edges, line codes, sample counts, refusals, and
 * the whole path into sample files (devices that fill up, read-only folders, read-back).
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <dirent.h>
#include <errno.h>
#include <glob.h>
#include <inttypes.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/resource.h>
#include <sys/stat.h>
#include <sys/wait.h>
#include <unistd.h>

#include "mod_fixture.h"
#include "ulk/mod.h"
#include "ulk/sampleio.h"
#include "ulk/subbit.h"
#include "util.h"

#define W16 "1011001110001111"
#define W16B "0100110001110000"

/* Runs the modulator over the whole upload in chunks of `chunk`; returns malloc'd samples. */
static float *modulate_all(const ulk_upload *u, ulk_ratio fs, size_t chunk, uint64_t *n_out)
{
    ulk_mod_config cfg = {.upload = u, .fs = fs, .format = ULK_FMT_F32};
    ulk_mod *m = NULL;
    ulk_diag *d = ulk_diag_create();
    int rc = ulk_mod_create(&cfg, &m, d);
    if (rc != 0) {
        ulk_diag_print(d, stderr);
        fail_msg("ulk_mod_create: %d", rc);
    }
    ulk_diag_destroy(d);
    uint64_t n = ulk_mod_n_samples(m), got = 0;
    float *x = malloc((n + chunk) * sizeof(float));
    long k;
    while ((k = ulk_mod_run(m, x + got, chunk)) > 0) got += (uint64_t)k;
    assert_int_equal(k, 0);
    assert_int_equal(got, n);
    assert_int_equal(ulk_mod_run(m, x, chunk), 0); /* stays at the end */
    ulk_mod_destroy(m);
    *n_out = n;
    return x;
}

/* ---- the fast modulator equals the slow reference ---- */

typedef struct {
    const char *name;
    fx_spec spec;
    const char *fs;
    size_t chunk;
} ref_row;

static const ref_row ref_rows[] = {
    {"sine nrz-l fs/Rs whole", {"1000", "0011", "1100", "0101", "8000", NULL, 0.7, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 3, 1, 2, {W16, W16B}}, "48000", 4096},
    {"square nrz-l fs/Rs whole", {"1000", "0011", "1100", "0101", "8000", NULL, 0.7, 0, ULK_WAVE_SQUARE, ULK_LINE_NRZL, 3, 1, 2, {W16, W16B}}, "48000", 4096},
    {"sine nrz-m pilot fs/Rs not whole", {"62.5", "0110", "1001", "0101", "500", "125", 0.6, 0.3, ULK_WAVE_SINE, ULK_LINE_NRZM, 2, 2, 1, {W16, W16B, W16}}, "44100", 1000},
    {"square nrz-m pilot fs/Rs not whole", {"62.5", "0110", "1001", "0101", "500", "125", 0.6, 0.3, ULK_WAVE_SQUARE, ULK_LINE_NRZM, 2, 2, 1, {W16, W16B, W16}}, "44100", 1000},
    {"chunk of one sample", {"1000", "01", "10", "00", "4000", "500", 0.5, 0.25, ULK_WAVE_SINE, ULK_LINE_NRZM, 2, 0, 1, {W16}}, "30000", 1},
    {"odd chunk crossing table wraps", {"1000", "01", "10", "00", "6000", "1000", 0.5, 0.25, ULK_WAVE_SINE, ULK_LINE_NRZL, 2, 0, 1, {W16, W16B}}, "32000", 4093},
    {"sine long phase period (rotation)", {"1000", "0011", "1100", "0101", "8000", "250", 0.7, 0.2, ULK_WAVE_SINE, ULK_LINE_NRZL, 2, 1, 2, {W16, W16B}}, "48000.001", 4096},
    {"square long phase period", {"1000", "0011", "1100", "0101", "8000", NULL, 0.7, 0, ULK_WAVE_SQUARE, ULK_LINE_NRZM, 2, 1, 2, {W16, W16B}}, "48000.001", 777},
    {"fractional sample rate", {"300", "011", "100", "010", "2700", NULL, 1.0, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1, {W16}}, "11025.5", 100000},
};

static void check_ref_row(const ref_row *row)
{
    fx_upload f;
    fx_make(&f, &row->spec);
    ulk_ratio fs = fx_ratio(row->fs);
    size_t L;
    uint8_t *sb = fx_subbits(&row->spec, &L);
    int8_t *lv = fx_levels(sb, L, row->spec.line);
    assert_int_equal(L, ulk_upload_n_subbits(&f.u));
    uint64_t n;
    float *x = modulate_all(&f.u, fs, row->chunk, &n);
    if (n != fx_n_samples(&f.u.link, L, fs)) fail_msg("%s: %" PRIu64 " samples, want %" PRIu64, row->name, n, fx_n_samples(&f.u.link, L, fs));
    double worst = 0;
    uint64_t at = 0;
    for (uint64_t i = 0; i < n; i++) {
        double e = fabs((double)x[i] - fx_ref_sample(&f.u.link, lv, fs, i));
        if (e > worst) { worst = e; at = i; }
    }
    /* float32 output: half an ulp of 1.0 is 6e-8; table and product rounding add a few more */
    if (worst > 5e-7) fail_msg("%s: max |diff| %.3g at sample %" PRIu64, row->name, worst, at);
    free(x);
    free(sb);
    free(lv);
}

static void test_mod_matches_reference(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof ref_rows / sizeof ref_rows[0]; r++) check_ref_row(&ref_rows[r]);
}

/* ---- exact sub-bit starts and square edges ---- */

/* f_s = 30000, R_s = 3000: sub-bit k starts exactly at sample 10k; a square subcarrier at
 * f_sc = R_s has edges exactly at samples 10k (rising) and 10k + 5 (falling). Sub-bits
 * alternate 0,1,0,1 so every start changes the level. These rates are chosen because a
 * floating-point t_i = i / f_s misplaces some of those samples (checked below). */
static void test_mod_exact_boundaries(void **st)
{
    (void)st;
    fx_spec s = {"750", "0101", "1010", "0101", "3000", NULL, 0.5, 0, ULK_WAVE_SQUARE, ULK_LINE_NRZL, 0, 0, 0,
                 {"0000000000000000", "0000000000000000"}};
    fx_upload f;
    fx_make(&f, &s);
    ulk_ratio fs = fx_ratio("30000");
    uint64_t n;
    float *x = modulate_all(&f.u, fs, 4096, &n);
    assert_int_equal(n, 2 * 16 * 4 * 10);
    int naive_j_wrong = 0, naive_half_wrong = 0;
    for (uint64_t k = 0; k < n / 10; k++) {
        float d = (k % 2) ? 1.0f : -1.0f; /* sub-bit k is k mod 2 */
        /* hand values: the start of sub-bit k takes d_k and the rising half (+1) */
        if (x[10 * k] != 0.5f * d) fail_msg("sample %" PRIu64 " (start of sub-bit %" PRIu64 "): %g, want %g", 10 * k, k, x[10 * k], 0.5f * d);
        if (x[10 * k + 4] != 0.5f * d) fail_msg("sample %" PRIu64 ": %g", 10 * k + 4, x[10 * k + 4]);
        /* exactly on the falling edge: the new half (-1) */
        if (x[10 * k + 5] != -0.5f * d) fail_msg("sample %" PRIu64 " (on a square edge): %g, want %g", 10 * k + 5, x[10 * k + 5], -0.5f * d);
        if (x[10 * k + 9] != -0.5f * d) fail_msg("sample %" PRIu64 ": %g", 10 * k + 9, x[10 * k + 9]);
        /* what a floating-point time would decide at the same samples */
        double t = (double)(10 * k) / 30000.0;
        if ((uint64_t)floor(t * 3000.0) != k) naive_j_wrong++;
        double ph = (double)(10 * k + 5) / 30000.0 * 3000.0;
        if (ph - floor(ph) < 0.5) naive_half_wrong++;
    }
    /* the test discriminates: floating-point time would put some of these samples in the
     * previous sub-bit or the previous half */
    assert_true(naive_j_wrong > 0);
    assert_true(naive_half_wrong > 0);
    free(x);
}

/* ---- line codes ---- */

typedef struct {
    const char *name;
    ulk_line_code lc;
    float want[5];
} line_row;

static void test_mod_line_codes(void **st)
{
    (void)st;
    /* sub-bits 1 0 1 1 0; nrz-m from d_{-1} = +1: 1 flips, 0 holds */
    static const line_row rows[] = {
        {"nrz-l", ULK_LINE_NRZL, {1, -1, 1, 1, -1}},
        {"nrz-m", ULK_LINE_NRZM, {-1, -1, 1, -1, -1}},
    };
    for (size_t r = 0; r < 2; r++) {
        fx_spec s = {"1000", "0", "1", "0", "1000", NULL, 0.25, 0, ULK_WAVE_SQUARE, rows[r].lc, 0, 0, 0, {"10110"}};
        fx_upload f;
        fx_make(&f, &s);
        uint64_t n;
        float *x = modulate_all(&f.u, fx_ratio("8000"), 3, &n);
        assert_int_equal(n, 40);
        for (int j = 0; j < 5; j++)
            for (int q = 0; q < 8; q++) {
                float want = 0.25f * rows[r].want[j] * (q < 4 ? 1.0f : -1.0f);
                if (x[8 * j + q] != want) fail_msg("%s: sample %d = %g, want %g", rows[r].name, 8 * j + q, x[8 * j + q], want);
            }
        free(x);
    }
}

/* ---- sample count ---- */

typedef struct {
    const char *rb, *fs;
    int n_words;
    uint64_t want; /* ceil(L f_s / R_s), worked out by hand in the comment */
} count_row;

static void test_mod_sample_count(void **st)
{
    (void)st;
    /* L = (P + N W + (N-1) G + T) n sub-bits with P=1, W=8, G=1, T=1, n=2 */
    static const count_row rows[] = {
        {"1000", "48000", 1, 480},    /* L = 20, f_s/R_s = 48000/2000 = 24 -> 480 */
        {"700", "48000", 1, 686},     /* L = 20, f_s/R_s = 48000/1400 = 34.2857..; 685.71 -> 686 */
        {"700", "48000", 2, 1303},    /* L = 38: 1302.857 -> 1303 */
        {"62.5", "44100", 1, 7056},   /* L = 20, f_s/R_s = 352.8: 7056 exactly */
        {"62.5", "44100", 3, 19757},  /* L = 56: 19756.8 -> 19757 */
    };
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        fx_spec s = {rows[r].rb, "01", "10", "00", "2000", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1,
                     {"10100101", "10100101", "10100101"}};
        s.words[rows[r].n_words] = NULL;
        if (!strcmp(rows[r].rb, "62.5")) s.fsc = "125";
        fx_upload f;
        fx_make(&f, &s);
        uint64_t n;
        float *x = modulate_all(&f.u, fx_ratio(rows[r].fs), 999, &n);
        if (n != rows[r].want) fail_msg("row %zu (R_b %s, f_s %s): %" PRIu64 " samples, want %" PRIu64, r, rows[r].rb, rows[r].fs, n, rows[r].want);
        free(x);
    }
}

/* A square subcarrier is accepted down to 2 (f_sc + R_s), with a warning below
 * 2 (3 f_sc + R_s), where its third harmonic folds back below Nyquist; none above. */
static void test_mod_square_alias_warning(void **st)
{
    (void)st;
    static const struct { const char *fs; int warn; } rows[] = {
        {"20000", 1}, {"51999", 1}, {"52000", 0}, {"192000", 0}, /* f_sc 8000, R_s 2000 */
    };
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        fx_spec s = {"1000", "01", "10", "00", "8000", NULL, 0.5, 0, ULK_WAVE_SQUARE, ULK_LINE_NRZL, 1, 1, 1, {"1010"}};
        fx_upload f;
        fx_make(&f, &s);
        ulk_mod_config cfg = {.upload = &f.u, .fs = fx_ratio(rows[r].fs), .format = ULK_FMT_F32};
        ulk_mod *m = NULL;
        ulk_diag *d = ulk_diag_create();
        int rc = ulk_mod_create(&cfg, &m, d);
        if (rc != 0) fail_msg("square at %s Hz: refused (%d)", rows[r].fs, rc);
        if ((ulk_diag_warnings(d) > 0) != rows[r].warn)
            fail_msg("square at %s Hz: %zu warnings, want %s", rows[r].fs, ulk_diag_warnings(d), rows[r].warn ? "one" : "none");
        ulk_mod_destroy(m);
        ulk_diag_destroy(d);
    }
}

/* ---- refusals ---- */

typedef struct {
    const char *name, *fsc, *fp, *fs;
    int ok;
    const char *msg; /* text the message must hold */
} rate_row;

static void test_mod_rate_refusal(void **st)
{
    (void)st;
    /* R_s = 2 * 1000 = 2000 */
    static const rate_row rows[] = {
        {"just below 2 (f_sc + R_s)", "8000", NULL, "19999.999", 0, "lowest acceptable rate is 20000 Hz"},
        {"exactly 2 (f_sc + R_s)", "8000", NULL, "20000", 1, NULL},
        {"far below", "8000", NULL, "8000", 0, "lowest acceptable rate is 20000 Hz"},
        {"pilot sets the floor", "8000", "20000", "39999", 0, "lowest acceptable rate is 40000 Hz"},
        {"pilot floor met", "8000", "20000", "40000", 1, NULL},
        {"fractional floor", "1000.1", NULL, "6000", 0, "lowest acceptable rate is 6000.2 Hz"},
        {"exactly the ceiling", "8000", NULL, "1e9", 1, NULL},
        {"above the ceiling (a mistyped 1e12)", "8000", NULL, "1e12", 0, "highest this tool writes, 1000000000 Hz"},
        {"just above the ceiling", "8000", NULL, "1000000000.001", 0, "highest this tool writes"},
    };
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        fx_spec s = {"1000", "01", "10", "00", rows[r].fsc, rows[r].fp, 0.5, 0.25, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1, {"1010"}};
        fx_upload f;
        fx_make(&f, &s);
        ulk_mod_config cfg = {.upload = &f.u, .fs = fx_ratio(rows[r].fs), .format = ULK_FMT_F32};
        ulk_mod *m = NULL;
        ulk_diag *d = ulk_diag_create();
        int rc = ulk_mod_create(&cfg, &m, d);
        if (rows[r].ok) {
            if (rc != 0) fail_msg("%s: refused (%d)", rows[r].name, rc);
            assert_non_null(m);
        } else {
            if (rc != ULK_ELIMIT) fail_msg("%s: status %d, want ULK_ELIMIT", rows[r].name, rc);
            assert_null(m);
            const ulk_finding *e = ulk_diag_first_error(d);
            assert_non_null(e);
            if (!strstr(e->msg, rows[r].msg)) fail_msg("%s: message '%s' lacks '%s'", rows[r].name, e->msg, rows[r].msg);
        }
        ulk_mod_destroy(m);
        ulk_diag_destroy(d);
    }
}

static void test_mod_clip_refusal(void **st)
{
    (void)st;
    static const struct { const char *name; double a, ap; ulk_sample_format fmt; int rc; } rows[] = {
        {"s16 with A + A_p = 1.1 clips", 0.8, 0.3, ULK_FMT_S16, ULK_ELIMIT},
        {"f32 with A + A_p = 1.1 is written as is", 0.8, 0.3, ULK_FMT_F32, 0},
        {"s16 with A + A_p = 1.0 fits", 0.7, 0.3, ULK_FMT_S16, 0},
    };
    for (size_t r = 0; r < 3; r++) {
        fx_spec s = {"1000", "01", "10", "00", "4000", "500", rows[r].a, rows[r].ap, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1, {"1010"}};
        fx_upload f;
        fx_make(&f, &s);
        ulk_mod_config cfg = {.upload = &f.u, .fs = fx_ratio("48000"), .format = rows[r].fmt};
        ulk_mod *m = NULL;
        ulk_diag *d = ulk_diag_create();
        int rc = ulk_mod_create(&cfg, &m, d);
        if (rc != rows[r].rc) fail_msg("%s: status %d", rows[r].name, rc);
        if (rc) assert_non_null(strstr(ulk_diag_first_error(d)->msg, "clip"));
        ulk_mod_destroy(m);
        ulk_diag_destroy(d);
    }
    ulk_mod_destroy(NULL);
}

/* ---- first samples agree with the reference's floor(i R_s / f_s) ---- */

static void test_mod_first_sample(void **st)
{
    (void)st;
    static const char *rates[] = {"48000", "44100", "11025.5", "48000.001"};
    fx_spec s = {"62.5", "0110", "1001", "0101", "250", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1, {"1"}};
    fx_upload f;
    fx_make(&f, &s);
    ulk_ratio rs = ulk_link_subbit_rate(&f.u.link);
    for (size_t r = 0; r < 4; r++) {
        ulk_ratio fs = fx_ratio(rates[r]);
        uint64_t first = 0, prev_j = 0;
        assert_int_equal(ulk_mod_first_sample(&f.u.link, fs, 0, &first), 0);
        assert_int_equal(first, 0);
        /* walk samples: each time floor(i R_s / f_s) moves to j, i must equal first_sample(j) */
        for (uint64_t i = 0; i < 200000; i++) {
            __int128 q, rem, den;
            fx_divmod(i, rs, fs, &q, &rem, &den);
            if ((uint64_t)q != prev_j) {
                assert_int_equal(ulk_mod_first_sample(&f.u.link, fs, (uint64_t)q, &first), 0);
                if (first != i) fail_msg("f_s %s: sub-bit %" PRIu64 " starts at %" PRIu64 ", want %" PRIu64, rates[r], (uint64_t)q, first, i);
                prev_j = (uint64_t)q;
            }
        }
    }
}

/* ---- every allocation failure ends cleanly ---- */

static void test_mod_alloc_failure(void **st)
{
    (void)st;
    fx_spec s = {"1000", "0011", "1100", "0101", "8000", "250", 0.5, 0.2, ULK_WAVE_SINE, ULK_LINE_NRZL, 2, 1, 2, {W16}};
    fx_upload f;
    fx_make(&f, &s);
    for (long n = 1;; n++) {
        ulk_diag *d = ulk_diag_create();
        ulk_alloc_fail_at(n);
        ulk_mod_config cfg = {.upload = &f.u, .fs = fx_ratio("48000.001"), .format = ULK_FMT_F32};
        ulk_mod *m = NULL;
        int rc = ulk_mod_create(&cfg, &m, d);
        ulk_alloc_fail_at(0);
        if (rc == 0) { ulk_mod_destroy(m); ulk_diag_destroy(d); break; }
        if (rc != ULK_ENOMEM) fail_msg("allocation %ld: status %d", n, rc);
        assert_null(m);
        ulk_diag_destroy(d);
        assert_true(n < 100);
    }
}

/* ---- timing table ---- */

typedef struct {
    const char *name, *rb, *fs;
    ulk_line_code lc;
    int exact_decimal; /* start_s must equal the exact decimal j / R_s */
} timing_row;

/* j / R_s as an exact decimal, R_s = rn / rd with rn = 2^a 5^b: j rd 10^k / rn / 10^k. */
static void exact_decimal(uint64_t j, ulk_ratio rs, char *buf, size_t len)
{
    unsigned __int128 p10 = 1;
    int k = 0;
    while (p10 % (unsigned __int128)rs.num) { p10 *= 10; k++; }
    unsigned __int128 v = (unsigned __int128)j * (uint64_t)rs.den * (p10 / (uint64_t)rs.num);
    uint64_t ip = (uint64_t)(v / p10), fp = (uint64_t)(v % p10);
    if (!fp) { snprintf(buf, len, "%" PRIu64, ip); return; }
    while (fp % 10 == 0) { fp /= 10; k--; }
    snprintf(buf, len, "%" PRIu64 ".%0*" PRIu64, ip, k, fp);
}

static void test_timing_table(void **st)
{
    (void)st;
    static const timing_row rows[] = {
        {"R_s 4000 at 48 kHz nrz-l", "1000", "48000", ULK_LINE_NRZL, 1},
        {"R_s 250 (62.5 bit/s) at 44.1 kHz nrz-m", "62.5", "44100", ULK_LINE_NRZM, 1},
        {"R_s 12 (3 bit/s), not a decimal period", "3", "8000", ULK_LINE_NRZL, 0},
    };
    char dir[] = "/tmp/ulk-timing-XXXXXX";
    assert_non_null(mkdtemp(dir));
    for (size_t r = 0; r < sizeof rows / sizeof rows[0]; r++) {
        fx_spec s = {rows[r].rb, "0011", "1100", "0101", "16", NULL, 0.5, 0, ULK_WAVE_SINE, rows[r].lc, 2, 1, 1, {"1011", "0110"}};
        fx_upload f;
        fx_make(&f, &s);
        size_t L;
        uint8_t *sb = fx_subbits(&s, &L);
        int8_t *lv = fx_levels(sb, L, rows[r].lc);
        char path[256];
        snprintf(path, sizeof path, "%s/t%zu.csv", dir, r);
        ulk_diag *d = ulk_diag_create();
        ulk_ratio fs = fx_ratio(rows[r].fs), rs = ulk_link_subbit_rate(&f.u.link);
        assert_int_equal(ulk_timing_write(&f.u, fs, path, d), 0);
        ulk_diag_destroy(d);
        FILE *fp = fopen(path, "r");
        assert_non_null(fp);
        char line[256];
        assert_non_null(fgets(line, sizeof line, fp));
        assert_string_equal(line, "index,start_s,first_sample,word,bit,bit_value,subbit,level,phase_deg\n");
        size_t j = 0;
        while (fgets(line, sizeof line, fp)) {
            char start[64];
            unsigned long long idx, first;
            int word, bit, bv, sbit, level, phase;
            if (sscanf(line, "%llu,%63[^,],%llu,%d,%d,%d,%d,%d,%d", &idx, start, &first, &word, &bit, &bv, &sbit, &level, &phase) != 9)
                fail_msg("%s: row %zu unreadable: %s", rows[r].name, j, line);
            assert_int_equal(idx, j);
            /* layout: P=2 idle patterns, word 1 (4 bits), G=1, word 2, T=1; n = 4 */
            size_t pat = j / 4;
            int want_word = 0, want_bit = -1;
            if (pat >= 2 && pat < 6) { want_word = 1; want_bit = (int)pat - 2; }
            if (pat >= 7 && pat < 11) { want_word = 2; want_bit = (int)pat - 7; }
            int want_bv = want_word ? s.words[want_word - 1][want_bit] - '0' : -1;
            if (word != want_word || bit != want_bit || bv != want_bv) fail_msg("%s: row %zu word/bit/value %d/%d/%d", rows[r].name, j, word, bit, bv);
            assert_int_equal(sbit, sb[j]);
            assert_int_equal(level, lv[j]);
            assert_int_equal(phase, lv[j] > 0 ? 0 : 180);
            __int128 num = (__int128)j * fs.num * rs.den, den = (__int128)fs.den * rs.num;
            uint64_t want_first = (uint64_t)((num + den - 1) / den);
            if (first != want_first) fail_msg("%s: row %zu first_sample %llu, want %" PRIu64, rows[r].name, j, first, want_first);
            if (rows[r].exact_decimal) {
                char want[64];
                exact_decimal(j, rs, want, sizeof want);
                if (strcmp(start, want)) fail_msg("%s: row %zu start_s '%s', want '%s'", rows[r].name, j, start, want);
            } else {
                double want = (double)j * (double)rs.den / (double)rs.num;
                double got = strtod(start, NULL);
                if (fabs(got - want) > 1e-15 * (want > 1 ? want : 1)) fail_msg("%s: row %zu start_s %s, want %.17g", rows[r].name, j, start, want);
            }
            j++;
        }
        fclose(fp);
        assert_int_equal(j, L);
        unlink(path);
        free(sb);
        free(lv);
    }
    rmdir(dir);
}

static void test_timing_write_errors(void **st)
{
    (void)st;
    fx_spec s = {"1000", "01", "10", "00", "4000", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 1, 1, 1, {"1010"}};
    fx_upload f;
    fx_make(&f, &s);
    ulk_diag *d = ulk_diag_create();
    /* a full device: the reason is named */
    FILE *full = fopen("/dev/full", "w");
    assert_non_null(full);
    int rc = ulk_timing_write_fp(&f.u, fx_ratio("48000"), full, "/dev/full", d);
    if (rc == 0) rc = fflush(full) == 0 ? 0 : ULK_EIO; /* a short table fits the stdio buffer */
    fclose(full);
    assert_int_equal(rc, ULK_EIO);
    /* a folder that does not exist: nothing is created */
    assert_int_equal(ulk_timing_write(&f.u, fx_ratio("48000"), "/nonexistent-ulk/t.csv", d), ULK_EIO);
    assert_non_null(strstr(ulk_diag_first_error(d)->msg, "/nonexistent-ulk/t.csv"));
    ulk_ratio zero = {0, 1};
    assert_int_equal(ulk_timing_write_fp(&f.u, zero, stdout, NULL, d), ULK_EINVAL);
    ulk_diag_destroy(d);
}

/* ---- the whole path into files ---- */

static int write_upload(const ulk_upload *u, const char *fs_text, const char *path, ulk_sample_format fmt, ulk_diag *d)
{
    ulk_ratio fs = fx_ratio(fs_text);
    ulk_mod_config cfg = {.upload = u, .fs = fs, .format = fmt};
    ulk_mod *m = NULL;
    int rc = ulk_mod_create(&cfg, &m, d);
    if (rc) return rc;
    ulk_sample_info info = {0};
    info.fs_hz = ulk_ratio_to_double(fs);
    info.format = fmt;
    info.channels = 1;
    info.fs_exact = fs_text;
    info.fsc_hz = ulk_ratio_to_double(u->link.fsc);
    ulk_writer *w = NULL;
    rc = ulk_writer_open(path, &info, &w, d);
    if (rc) { ulk_mod_destroy(m); return rc; }
    float buf[1000];
    long n;
    while ((n = ulk_mod_run(m, buf, 1000)) > 0)
        if (ulk_writer_write(w, buf, (size_t)n) < 0) break;
    ulk_mod_destroy(m);
    return ulk_writer_commit(w, d);
}

static int count_entries(const char *dir)
{
    DIR *dp = opendir(dir);
    if (!dp) return -1;
    int n = 0;
    struct dirent *e;
    while ((e = readdir(dp)))
        if (strcmp(e->d_name, ".") && strcmp(e->d_name, "..")) n++;
    closedir(dp);
    return n;
}

static void test_mod_to_dev_full(void **st)
{
    (void)st;
    /* /dev/full accepts opens and refuses every write with ENOSPC: the reason must reach the
     * user, and no temporary file may be made beside the device. */
    fx_spec s = {"1000", "0011", "1100", "0101", "8000", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 16, 1, 2, {W16, W16B}};
    fx_upload f;
    fx_make(&f, &s);
    static const struct { const char *name; ulk_container c; ulk_sample_format fmt; } rows[] = {
        {"raw f32", ULK_CONTAINER_RAW, ULK_FMT_F32},
        {"raw s16", ULK_CONTAINER_RAW, ULK_FMT_S16},
        {"WAV f32", ULK_CONTAINER_WAV, ULK_FMT_F32},
    };
    for (size_t r = 0; r < 3; r++) {
        ulk_mod_config cfg = {.upload = &f.u, .fs = fx_ratio("48000"), .format = rows[r].fmt};
        ulk_mod *m = NULL;
        ulk_diag *d = ulk_diag_create();
        assert_int_equal(ulk_mod_create(&cfg, &m, d), 0);
        ulk_sample_info info = {.fs_hz = 48000, .format = rows[r].fmt, .container = rows[r].c, .channels = 1};
        ulk_writer *w = NULL;
        int rc = ulk_writer_open("/dev/full", &info, &w, d);
        if (rc == 0) {
            float buf[4096];
            long n;
            while ((n = ulk_mod_run(m, buf, 4096)) > 0) ulk_writer_write(w, buf, (size_t)n);
            rc = ulk_writer_commit(w, d);
        }
        if (rc != ULK_EIO) fail_msg("%s: status %d, want ULK_EIO", rows[r].name, rc);
        const ulk_finding *e = ulk_diag_first_error(d);
        if (!e || !strstr(e->msg, "/dev/full") || !strstr(e->msg, strerror(ENOSPC)))
            fail_msg("%s: message '%s' must name /dev/full and '%s'", rows[r].name, e ? e->msg : "", strerror(ENOSPC));
        glob_t g;
        assert_int_equal(glob("/dev/full*.tmp.*", 0, NULL, &g), GLOB_NOMATCH);
        assert_int_equal(glob("/dev/full.sigmf-meta*", 0, NULL, &g), GLOB_NOMATCH);
        ulk_mod_destroy(m);
        ulk_diag_destroy(d);
    }
}

/* Runs fn(dir) in a child that cannot write dir: the folder is made read-only, and when we
 * are root (root ignores permission bits) the child drops to an unprivileged user first. */
static void test_mod_readonly_folder(void **st)
{
    (void)st;
    char dir[] = "/tmp/ulk-ro-XXXXXX";
    assert_non_null(mkdtemp(dir));
    assert_int_equal(chmod(dir, 0555), 0);
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        if (geteuid() == 0 && (setgid(65534) != 0 || setuid(65534) != 0)) _exit(3);
        fx_spec s = {"1000", "0011", "1100", "0101", "8000", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 2, 1, 2, {W16}};
        fx_upload f;
        fx_make(&f, &s);
        static const char *names[] = {"out.wav", "out.f32", "out.s16"};
        static const ulk_sample_format fmts[] = {ULK_FMT_F32, ULK_FMT_F32, ULK_FMT_S16};
        for (int k = 0; k < 3; k++) {
            char path[256];
            snprintf(path, sizeof path, "%s/%s", dir, names[k]);
            ulk_diag *d = ulk_diag_create();
            int rc = write_upload(&f.u, "48000", path, fmts[k], d);
            const ulk_finding *e = ulk_diag_first_error(d);
            if (rc != ULK_EIO || !e || !strstr(e->msg, path) || !strstr(e->msg, strerror(EACCES))) {
                fprintf(stderr, "%s: status %d, message '%s'\n", path, rc, e ? e->msg : "");
                _exit(1);
            }
            ulk_diag_destroy(d);
        }
        _exit(0);
    }
    int status = 0;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFEXITED(status));
    assert_int_equal(WEXITSTATUS(status), 0);
    assert_int_equal(count_entries(dir), 0); /* nothing left behind */
    chmod(dir, 0755);
    rmdir(dir);
}

/* A file that hits the file-size limit half way: the write fails in the middle of the data,
 * after the temporary exists; the commit must report it and leave the folder empty. */
static void test_mod_write_fails_midway(void **st)
{
    (void)st;
    char dir[] = "/tmp/ulk-fsize-XXXXXX";
    assert_non_null(mkdtemp(dir));
    pid_t pid = fork();
    assert_true(pid >= 0);
    if (pid == 0) {
        signal(SIGXFSZ, SIG_IGN);
        struct rlimit rl = {20000, 20000};
        if (setrlimit(RLIMIT_FSIZE, &rl) != 0) _exit(3);
        fx_spec s = {"1000", "0011", "1100", "0101", "8000", NULL, 0.5, 0, ULK_WAVE_SINE, ULK_LINE_NRZL, 200, 1, 2, {W16, W16B, W16}};
        fx_upload f;
        fx_make(&f, &s);
        static const char *names[] = {"out.wav", "out.f32", "out.s16"};
        static const ulk_sample_format fmts[] = {ULK_FMT_F32, ULK_FMT_F32, ULK_FMT_S16};
        for (int k = 0; k < 3; k++) {
            char path[256];
            snprintf(path, sizeof path, "%s/%s", dir, names[k]);
            ulk_diag *d = ulk_diag_create();
            int rc = write_upload(&f.u, "48000", path, fmts[k], d);
            const ulk_finding *e = ulk_diag_first_error(d);
            if (rc != ULK_EIO || !e || !strstr(e->msg, "no output written")) {
                fprintf(stderr, "%s: status %d, message '%s'\n", path, rc, e ? e->msg : "");
                _exit(1);
            }
            ulk_diag_destroy(d);
        }
        _exit(0);
    }
    int status = 0;
    assert_int_equal(waitpid(pid, &status, 0), pid);
    assert_true(WIFEXITED(status));
    assert_int_equal(WEXITSTATUS(status), 0);
    assert_int_equal(count_entries(dir), 0);
    rmdir(dir);
}

/* Modulate -> file -> read back: the samples are the modulator's (f32 exactly; s16 as
 * round(32767 x) / 32767), and a raw file's SigMF metadata gives back the rate and type. */
static void test_mod_file_round_trip(void **st)
{
    (void)st;
    fx_spec s = {"62.5", "0110", "1001", "0101", "500", "125", 0.6, 0.3, ULK_WAVE_SINE, ULK_LINE_NRZM, 2, 1, 1, {W16, W16B}};
    fx_upload f;
    fx_make(&f, &s);
    uint64_t n;
    float *x = modulate_all(&f.u, fx_ratio("44100"), 4096, &n);
    char dir[] = "/tmp/ulk-rt-XXXXXX";
    assert_non_null(mkdtemp(dir));
    static const char *names[] = {"a.wav", "b.wav", "c.f32", "d.s16"};
    static const ulk_sample_format fmts[] = {ULK_FMT_F32, ULK_FMT_S16, ULK_FMT_F32, ULK_FMT_S16};
    for (int k = 0; k < 4; k++) {
        char path[256];
        snprintf(path, sizeof path, "%s/%s", dir, names[k]);
        ulk_diag *d = ulk_diag_create();
        assert_int_equal(write_upload(&f.u, "44100", path, fmts[k], d), 0);
        ulk_reader *r = NULL;
        if (ulk_reader_open(path, NULL, -1, &r, d) != 0) { ulk_diag_print(d, stderr); fail_msg("%s: cannot read back", path); }
        const ulk_sample_info *in = ulk_reader_info(r);
        assert_true(in->fs_hz == 44100.0);
        assert_int_equal(in->format, fmts[k]);
        assert_int_equal(ulk_reader_length(r), (int64_t)n);
        float *y = malloc(n * sizeof(float));
        uint64_t got = 0;
        long m;
        while ((m = ulk_reader_read(r, y + got, 777)) > 0) got += (uint64_t)m;
        assert_int_equal(m, 0);
        assert_int_equal(got, n);
        for (uint64_t i = 0; i < n; i++) {
            float want = x[i];
            if (fmts[k] == ULK_FMT_S16) {
                double v = 32767.0 * (double)x[i];
                want = (float)((v >= 0 ? floor(v + 0.5) : -floor(-v + 0.5)) / 32767.0);
            }
            if (y[i] != want) fail_msg("%s: sample %" PRIu64 " reads %.9g, wrote %.9g", path, i, y[i], want);
        }
        free(y);
        ulk_reader_close(r);
        ulk_diag_destroy(d);
        unlink(path);
        char meta[300];
        snprintf(meta, sizeof meta, "%s/%c.sigmf-meta", dir, names[k][0]);
        unlink(meta);
    }
    assert_int_equal(count_entries(dir), 0);
    rmdir(dir);
    free(x);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_mod_matches_reference),
        cmocka_unit_test(test_mod_exact_boundaries),
        cmocka_unit_test(test_mod_line_codes),
        cmocka_unit_test(test_mod_sample_count),
        cmocka_unit_test(test_mod_rate_refusal),
        cmocka_unit_test(test_mod_square_alias_warning),
        cmocka_unit_test(test_mod_clip_refusal),
        cmocka_unit_test(test_mod_first_sample),
        cmocka_unit_test(test_mod_alloc_failure),
        cmocka_unit_test(test_timing_table),
        cmocka_unit_test(test_timing_write_errors),
        cmocka_unit_test(test_mod_to_dev_full),
        cmocka_unit_test(test_mod_readonly_folder),
        cmocka_unit_test(test_mod_write_fails_midway),
        cmocka_unit_test(test_mod_file_round_trip),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
