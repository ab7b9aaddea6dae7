/* tests/test_carrier_ranging.c - the ranging correlator (ulk_rcorr_*) on captures made by the
 * composite-carrier generator: code phase of delayed captures within 0.1 chip, with an
 * unknown carrier phase, noise, a carrier offset and a sample rate that is not a whole
 * number of samples per chip (docs/spec/carrier.md section 3: a capture delayed by D chips
 * has chip index floor(t * chip_rate - D) mod N; a capture that starts k0 samples into the
 * signal is delayed by D = -k0 * chip_rate / f_s mod N). The generator's chips themselves are
 * checked against an independent shift register in tests/py/test_carrier_iq.py. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/carrier.h"
#include "ulk/dict.h"
#include "ulk/error.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* Generates n samples of mode mo of c at fs after skipping k0, rotated by phi, with complex
 * Gaussian noise of total variance sigma2 (fixed seed; Box-Muller), and folds them into a
 * correlator. */
static int measure(const ulk_carrier *c, const ulk_carrier_mode *mo, ulk_ratio fs, uint64_t k0, uint64_t n,
                   double phi, double sigma2, ulk_ranging_result *res)
{
    ulk_cgen_config cfg = {.carrier = c, .mode = mo, .fs = fs, .n_samples = k0 + n};
    ulk_cgen *g = NULL;
    assert_int_equal(ulk_cgen_create(&cfg, &g, NULL), 0);
    ulk_rcorr *r = NULL;
    assert_int_equal(ulk_rcorr_create(c, fs, &r, NULL), 0);
    enum { CH = 4096 };
    float *buf = malloc(2 * CH * sizeof *buf);
    assert_non_null(buf);
    uint64_t pos = 0;
    unsigned long long seed = 0x2545F4914F6CDD1Dull;
    double cp = cos(phi), sp = sin(phi), s = sqrt(sigma2 / 2);
    long got;
    while ((got = ulk_cgen_run(g, buf, CH)) > 0) {
        size_t from = pos >= k0 ? 0 : (size_t)(k0 - pos < (uint64_t)got ? k0 - pos : (uint64_t)got);
        for (long k = (long)from; k < got; k++) {
            double re = buf[2 * k], im = buf[2 * k + 1];
            double u1, u2;
            seed = seed * 6364136223846793005ull + 1442695040888963407ull;
            u1 = ((double)(seed >> 11) + 1.0) / 9007199254740993.0;
            seed = seed * 6364136223846793005ull + 1442695040888963407ull;
            u2 = (double)(seed >> 11) / 9007199254740992.0;
            double rad = sqrt(-2 * log(u1));
            buf[2 * k] = (float)(re * cp - im * sp + s * rad * cos(2 * M_PI * u2));
            buf[2 * k + 1] = (float)(re * sp + im * cp + s * rad * sin(2 * M_PI * u2));
        }
        if ((size_t)got > from) assert_int_equal(ulk_rcorr_feed(r, buf + 2 * from, (size_t)got - from), 0);
        pos += (uint64_t)got;
    }
    assert_int_equal(got, 0);
    int rc = ulk_rcorr_result(r, res);
    free(buf);
    ulk_rcorr_destroy(r);
    ulk_cgen_destroy(g);
    return rc;
}

static double chip_error(double got, double want, double n)
{
    double e = fmod(got - want + n / 2, n);
    if (e < 0) e += n;
    return e - n / 2;
}

static ulk_dict *g_dict;

static int setup(void **state)
{
    (void)state;
    return ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", &g_dict, NULL);
}

static int teardown(void **state)
{
    (void)state;
    ulk_dict_destroy(g_dict);
    return 0;
}

static void test_delays(void **state)
{
    (void)state;
    const ulk_carrier *c = ulk_dict_carrier(g_dict);
    assert_non_null(c);
    int mi = ulk_carrier_find_mode(c, "acquisition");
    assert_true(mi >= 0);
    const double n_code = 1023, rc = 2000;
    /* 44100 Hz: 22.05 samples per chip, so chip edges fall anywhere between samples */
    const ulk_ratio fs = ulk_ratio_make(44100, 1);
    const uint64_t period_samples = 22557; /* ceil(1023 * 22.05) */
    const uint64_t k0s[] = {0, 1, 12345, 100003, 33333};
    for (size_t i = 0; i < sizeof k0s / sizeof k0s[0]; i++) {
        ulk_ranging_result res;
        /* per-sample SNR -3 dB; two code periods */
        assert_int_equal(measure(c, &c->modes[mi], fs, k0s[i], 2 * period_samples, 0.3 + i, 2.0, &res), 0);
        double want = fmod(n_code - fmod((double)k0s[i] * rc / 44100.0, n_code), n_code);
        double e = chip_error(res.phase_chips, want, n_code);
        printf("k0 %llu: delay %.4f chips, measured %.4f (error %+.4f), peak/mean %.1f, %.2f periods\n",
               (unsigned long long)k0s[i], want, res.phase_chips, e, res.peak_to_mean, res.n_periods);
        assert_true(fabs(e) <= 0.1);
        assert_true(fabs(res.delay_s - res.phase_chips / rc) < 1e-12);
        assert_true(res.peak_to_mean > 20);
    }
}

static void test_offset_and_short(void **state)
{
    (void)state;
    const ulk_carrier *c0 = ulk_dict_carrier(g_dict);
    ulk_carrier c = *c0; /* shallow copy: only the offset changes */
    c.offset_hz = ulk_ratio_make(-2755, 2); /* -1377.5 Hz */
    int mi = ulk_carrier_find_mode(&c, "acquisition");
    const ulk_ratio fs = ulk_ratio_make(48000, 1);
    ulk_ranging_result res;
    assert_int_equal(measure(&c, &c.modes[mi], fs, 7777, 30000, 1.0, 0.5, &res), 0);
    double want = fmod(1023 - fmod(7777 * 2000.0 / 48000.0, 1023), 1023);
    printf("offset -1377.5 Hz: delay %.4f chips, measured %.4f\n", want, res.phase_chips);
    assert_true(fabs(chip_error(res.phase_chips, want, 1023)) <= 0.1);
    /* less than one code period: refused */
    assert_int_equal(measure(&c, &c.modes[mi], fs, 0, 20000, 0, 0, &res), ULK_ELIMIT);
}

static void test_no_ranging_no_peak(void **state)
{
    (void)state;
    const ulk_carrier *c = ulk_dict_carrier(g_dict);
    /* a mode without ranging: voice only (a mode of our own, not in the dictionary) */
    ulk_carrier_mode mo = {0};
    mo.name = (char *)"voice-only";
    mo.on[ULK_CH_VOICE] = 1;
    mo.m_rad[ULK_CH_VOICE] = 1.0;
    ulk_ranging_result res;
    assert_int_equal(measure(c, &mo, ulk_ratio_make(96000, 1), 0, 60000, 0.2, 0.5, &res), 0);
    printf("no ranging: peak/mean %.2f\n", res.peak_to_mean);
    assert_true(res.peak_to_mean < 6);
    ulk_rcorr *r = NULL;
    ulk_carrier nr = *c;
    nr.has_ranging = 0;
    assert_int_equal(ulk_rcorr_create(&nr, ulk_ratio_make(48000, 1), &r, NULL), ULK_EINVAL);
    assert_null(r);
    ulk_rcorr_destroy(NULL);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_delays),
        cmocka_unit_test(test_offset_and_short),
        cmocka_unit_test(test_no_ranging_no_peak),
    };
    return cmocka_run_group_tests(tests, setup, teardown);
}
