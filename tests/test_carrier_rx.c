/* tests/test_carrier_rx.c - carrier recovery (ulk_crec_*) and the voice demodulator
 * (ulk_vdemod_*): pull-in of the coarse FFT plus the second-order loop at carrier offsets up
 * to +-5 kHz with noise, the recovered composite phase against the phase that was sent, and
 * the FM discriminator's audio against the tone that was sent.
 * The signals are built here from composite-carrier.md section 1 (x = exp(j (sum m_k c_k(t)
 * + 2 pi f_o t))), independently of the library's generator. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>

#include "ulk/carrier.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

static unsigned long long seed_ = 0x9E3779B97F4A7C15ull;
static double gauss(void)
{
    seed_ = seed_ * 6364136223846793005ull + 1442695040888963407ull;
    double u1 = ((double)(seed_ >> 11) + 1.0) / 9007199254740993.0;
    seed_ = seed_ * 6364136223846793005ull + 1442695040888963407ull;
    double u2 = (double)(seed_ >> 11) / 9007199254740992.0;
    return sqrt(-2 * log(u1)) * cos(2 * M_PI * u2);
}

/* The composite phase sent: a sine subcarrier of index 0.9 at 10 kHz carrying +-1 symbols at
 * 5000/s, an FM voice subcarrier of index 0.9 at 30 kHz (1 kHz tone, 4 kHz deviation) and a
 * +-1 square wave of index 0.4 at 1 kHz standing in for ranging chips. */
static double sent_phase(double t, int voice_only)
{
    double v = 0.9 * sin(2 * M_PI * 30000 * t + 4.0 * (1 - cos(2 * M_PI * 1000 * t)));
    if (voice_only) return v;
    long sym = (long)floor(t * 5000);
    double d = ((sym * 2654435761u) >> 7) & 1 ? 1 : -1;
    double r = fmod(floor(t * 2000), 2) ? 0.4 : -0.4;
    return 0.9 * d * sin(2 * M_PI * 10000 * t) + v + r;
}

/* Runs n samples at fs with offset f_o, start phase ph0 and complex noise of total variance
 * sigma2 through acquisition and tracking; returns the loop's mean frequency over the second
 * half and the rms of (recovered - sent phase) over the second half. */
static void run_loop(double fo, double ph0, double sigma2, double *f_end, double *rms_end, double *coarse)
{
    const double fs = 96000;
    const size_t n = 96000;
    float *iq = malloc(2 * n * sizeof *iq), *phi = malloc(n * sizeof *phi);
    assert_non_null(iq);
    assert_non_null(phi);
    double s = sqrt(sigma2 / 2);
    for (size_t i = 0; i < n; i++) {
        double t = (double)i / fs;
        double a = sent_phase(t, 0) + 2 * M_PI * fo * t + ph0;
        iq[2 * i] = (float)(cos(a) + s * gauss());
        iq[2 * i + 1] = (float)(sin(a) + s * gauss());
    }
    ulk_crec_config cfg = {.fs_hz = fs};
    ulk_crec *r = NULL;
    assert_int_equal(ulk_crec_create(&cfg, &r, NULL), 0);
    assert_int_equal(ulk_crec_acquire(r, iq, n), 0);
    ulk_crec_status st;
    ulk_crec_get_status(r, &st);
    *coarse = st.coarse_hz;
    assert_int_equal(ulk_crec_track(r, iq, n / 2, NULL, phi), 0);
    ulk_crec_get_status(r, &st);
    double sum_om0 = st.mean_freq_hz * (double)st.n_tracked;
    assert_int_equal(ulk_crec_track(r, iq + n, n - n / 2, NULL, phi + n / 2), 0);
    ulk_crec_get_status(r, &st);
    *f_end = (st.mean_freq_hz * (double)st.n_tracked - sum_om0) / (double)(n - n / 2);
    double e2 = 0;
    for (size_t i = n / 2; i < n; i++) {
        double d = phi[i] - sent_phase((double)i / fs, 0);
        d -= 2 * M_PI * floor((d + M_PI) / (2 * M_PI));
        e2 += d * d;
    }
    *rms_end = sqrt(e2 / (double)(n - n / 2));
    ulk_crec_destroy(r);
    free(iq);
    free(phi);
}

static void test_pull_in(void **state)
{
    (void)state;
    /* offsets at and inside the +-5 kHz bound, off any bin centre; per-sample SNR 10 dB */
    const double offs[] = {5000.0, -5000.0, 3200.0, -1234.567, 4999.3, 0.0};
    for (size_t k = 0; k < sizeof offs / sizeof offs[0]; k++) {
        double f, rms, coarse;
        run_loop(offs[k], 0.3 + k, 0.1, &f, &rms, &coarse);
        printf("offset %+10.3f Hz: coarse %+10.3f Hz, loop %+10.4f Hz, phase rms %.4f rad\n", offs[k], coarse, f, rms);
        /* coarse: within a quarter bin (bin 96000 / 65536 = 1.46 Hz) */
        assert_true(fabs(coarse - offs[k]) < 0.37);
        /* locked: the loop's mean frequency over the second half within 0.05 Hz */
        assert_true(fabs(f - offs[k]) < 0.05);
        /* phase noise of 10 dB SNR is sigma^2/2 = 0.05 rad^2 per sample (0.22 rad rms);
         * a slip or an unlocked loop would give errors of order 1 rad */
        assert_true(rms < 0.3);
    }
}

static void test_noiseless_phase(void **state)
{
    (void)state;
    double f, rms, coarse;
    run_loop(-4321.0, -2.0, 0, &f, &rms, &coarse);
    /* without noise the recovered phase is the sent one but for the loop's own jitter from the
     * ranging stand-in (a 1 kHz square wave of +-0.4 rad, outside B_L = 20 Hz) */
    assert_true(rms < 0.02);
    assert_true(fabs(f + 4321.0) < 0.01);
}

static void test_bad_config(void **state)
{
    (void)state;
    ulk_crec *r = (ulk_crec *)1;
    ulk_crec_config cfg = {.fs_hz = 8000, .max_offset_hz = 5000};
    assert_int_equal(ulk_crec_create(&cfg, &r, NULL), ULK_EINVAL);
    assert_null(r);
    cfg.max_offset_hz = 0;
    cfg.fs_hz = 0;
    assert_int_equal(ulk_crec_create(&cfg, &r, NULL), ULK_EINVAL);
    assert_int_equal(ulk_crec_create(NULL, &r, NULL), ULK_EINVAL);
    ulk_crec_destroy(NULL);
    ulk_vdemod_destroy(NULL);
    ulk_vdemod *v = NULL;
    assert_int_equal(ulk_vdemod_create(48000, 30000, 4000, 1000, &v, NULL), ULK_EINVAL); /* above fs/2 */
    assert_int_equal(ulk_vdemod_create(96000.5, 30000, 4000, 1000, &v, NULL), ULK_EINVAL);
}

static void voice_case(int voice_only, double resid_max)
{
    const double fs = 96000;
    const size_t n = 96000;
    float *phi = malloc(n * sizeof *phi), *audio = malloc(n * sizeof *audio);
    assert_non_null(phi);
    assert_non_null(audio);
    for (size_t i = 0; i < n; i++) phi[i] = (float)sent_phase((double)i / fs, voice_only);
    ulk_vdemod *v = NULL;
    assert_int_equal(ulk_vdemod_create(fs, 30000, 4000, 1000, &v, NULL), 0);
    int rate = ulk_vdemod_rate(v);
    assert_int_equal(rate, 16000);
    long m = ulk_vdemod_push(v, phi, n, audio);
    assert_int_equal(m, 16000);
    /* the tone a(t) = sin(2 pi 1000 t) of peak 1: after the filters' start-up, project the
     * audio on sin and cos of 1 kHz: amplitude within 2 % of 1, and little else */
    double sc = 0, cc = 0, p = 0;
    long k0 = 1000;
    for (long k = k0; k < m; k++) {
        double t = (double)k / rate;
        sc += audio[k] * sin(2 * M_PI * 1000 * t);
        cc += audio[k] * cos(2 * M_PI * 1000 * t);
        p += (double)audio[k] * audio[k];
    }
    double amp = 2 * sqrt(sc * sc + cc * cc) / (double)(m - k0);
    double resid = p / (double)(m - k0) - amp * amp / 2;
    printf("voice: tone amplitude %.4f, residual power %.2e\n", amp, resid);
    assert_true(fabs(amp - 1) < 0.02);
    assert_true(resid < resid_max);
    ulk_vdemod_destroy(v);
    free(phi);
    free(audio);
}

static void test_voice(void **state)
{
    (void)state;
    voice_case(1, 1e-4);
    /* with the other channels: the 1 kHz square wave standing in for ranging has odd
     * harmonics at 29 and 31 kHz, inside the voice band, so some residual is expected */
    voice_case(0, 1e-2);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_pull_in),
        cmocka_unit_test(test_noiseless_phase),
        cmocka_unit_test(test_bad_config),
        cmocka_unit_test(test_voice),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
