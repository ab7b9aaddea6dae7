/* tests/test_carrier.c - composite carrier (docs/spec/carrier.md): Bessel
 * functions against handbook tables and an independent integral, power division against the
 * Jacobi-Anger expansion summed term by term, ranging m-sequences against tables of
 * primitive polynomials and the shift-register properties, the baseband generator against
 * the closed-form mean, the solver against a brute-force search, and the carrier-section
 * loader's findings. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "ulk/carrier.h"
#include "ulk/error.h"
#include "util.h"

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

/* ---------------------------------------------------------------- references */

/* Bessel's integral J_n(x) = (1/pi) int_0^pi cos(n t - x sin t) dt (Abramowitz and Stegun
 * 9.1.21). The integrand is smooth and periodic, so the trapezoid rule converges
 * geometrically; 400 panels are far past double precision for |x| <= 12 and n <= 40. */
static double jn_integral(int n, double x)
{
    const int N = 400;
    double s = 0;
    for (int k = 0; k <= N; k++) {
        double t = M_PI * k / N, w = (k == 0 || k == N) ? 0.5 : 1.0;
        s += w * cos(n * t - x * sin(t));
    }
    return s / N;
}

/* ---------------------------------------------------------------- Bessel */

/* Abramowitz and Stegun Table 9.1 (10 decimals; values as printed there, from memory). */
static const struct { double x, j0, j1; } as_table_9_1[] = {
    {1.0, 0.7651976866, 0.4400505857},
    {2.0, 0.2238907791, 0.5767248078},
    {5.0, -0.1775967713, -0.3275791376},
    {10.0, -0.2459357645, 0.0434727462},
};

static void test_bessel_as_table_9_1(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof as_table_9_1 / sizeof as_table_9_1[0]; i++) {
        assert_true(fabs(ulk_bessel_j0(as_table_9_1[i].x) - as_table_9_1[i].j0) < 0.6e-10);
        assert_true(fabs(ulk_bessel_j1(as_table_9_1[i].x) - as_table_9_1[i].j1) < 0.6e-10);
    }
}

/* Zeros: Abramowitz and Stegun Table 9.5 (j_{0,1}, j_{0,2}, j_{1,1}; from memory, 15 digits). */
static void test_bessel_as_table_9_5_zeros(void **st)
{
    (void)st;
    double z01 = 2.404825557695773, z02 = 5.520078110286311, z11 = 3.831705970207512;
    /* |J'| ~ 0.52, 0.34, 0.40 at these zeros: 1e-15 of x is ~5e-16 of J */
    assert_true(fabs(ulk_bessel_j0(z01)) < 2e-15);
    assert_true(fabs(ulk_bessel_j0(z02)) < 2e-15);
    assert_true(fabs(ulk_bessel_j1(z11)) < 2e-15);
    /* and a sign change either side, so a zero function would not pass */
    assert_true(ulk_bessel_j0(z01 - 1e-9) > 0 && ulk_bessel_j0(z01 + 1e-9) < 0);
    assert_true(ulk_bessel_j1(z11 - 1e-9) > 0 && ulk_bessel_j1(z11 + 1e-9) < 0);
}

/* Over 0..10 rad against Bessel's integral and glibc's j0/j1: 1e-12 relative, with an
 * absolute floor of 1e-15 near the zeros where relative error means nothing. */
static void test_bessel_grid_vs_integral_and_libm(void **st)
{
    (void)st;
    for (int k = 0; k <= 2000; k++) {
        double x = 10.0 * k / 2000 + (k ? 1e-3 * sin(k) : 0); /* off the round grid too */
        if (x < 0) x = 0;
        double a0 = ulk_bessel_j0(x), a1 = ulk_bessel_j1(x);
        double r0 = jn_integral(0, x), r1 = jn_integral(1, x);
        assert_true(fabs(a0 - r0) <= 1e-12 * fabs(r0) + 1e-15);
        assert_true(fabs(a1 - r1) <= 1e-12 * fabs(r1) + 1e-15);
        assert_true(fabs(a0 - j0(x)) <= 1e-12 * fabs(j0(x)) + 1e-15);
        assert_true(fabs(a1 - j1(x)) <= 1e-12 * fabs(j1(x)) + 1e-15);
    }
    /* beyond the series: the asymptotic branch, against glibc */
    for (double x = 17.5; x < 60; x += 0.37) {
        assert_true(fabs(ulk_bessel_j0(x) - j0(x)) < 1e-14);
        assert_true(fabs(ulk_bessel_j1(x) - j1(x)) < 1e-14);
    }
    assert_true(ulk_bessel_j0(-3.3) == ulk_bessel_j0(3.3));
    assert_true(ulk_bessel_j1(-3.3) == -ulk_bessel_j1(3.3));
    assert_true(isnan(ulk_bessel_j0(NAN)));
}

/* ---------------------------------------------------------------- power division */

/* Intermodulation summed line by line (Jacobi-Anger: exp(j m sin t) = sum_n J_n(m) e^{jnt},
 * Abramowitz and Stegun, Handbook of Mathematical Functions, 1964, 9.1.41 to 9.1.45, from memory;
 * a binary channel is cos m + j c sin m): every line of the product that is not the carrier
 * or a channel's own first-order line. Independent of the 1 - ... definition. */
static double intermod_by_lines(const ulk_chan_term *t, int n)
{
    /* per-channel line powers: index 0 = carrier line, 1 = first-order (both sides), 2 = rest */
    double p[ULK_SPLIT_MAX][3];
    for (int k = 0; k < n; k++) {
        if (t[k].kind == ULK_CHAN_BINARY) {
            p[k][0] = cos(t[k].m_rad) * cos(t[k].m_rad);
            p[k][1] = sin(t[k].m_rad) * sin(t[k].m_rad);
            p[k][2] = 0;
        } else {
            double j0 = jn_integral(0, t[k].m_rad), j1 = jn_integral(1, t[k].m_rad), rest = 0;
            for (int h = 2; h <= 30; h++) {
                double jh = jn_integral(h, t[k].m_rad);
                rest += 2 * jh * jh;
            }
            p[k][0] = j0 * j0;
            p[k][1] = 2 * j1 * j1;
            p[k][2] = rest;
        }
    }
    /* sum over all combinations with at least two non-carrier factors, or any higher line */
    double im = 0;
    int total = 1;
    for (int k = 0; k < n; k++) total *= 3;
    for (int code = 0; code < total; code++) {
        int c = code, n_first = 0, n_rest = 0;
        double prod = 1;
        for (int k = 0; k < n; k++) {
            int s = c % 3;
            c /= 3;
            prod *= p[k][s];
            n_first += s == 1;
            n_rest += s == 2;
        }
        if (n_rest > 0 || n_first >= 2) im += prod;
    }
    return im;
}

static const struct {
    const char *name;
    int n;
    ulk_chan_term t[3];
} split_rows[] = {
    {"sine 1.1", 1, {{ULK_CHAN_SINE, 1.1}}},
    {"binary 1.2", 1, {{ULK_CHAN_BINARY, 1.2}}},
    {"sine 0.9 + sine 0.9", 2, {{ULK_CHAN_SINE, 0.9}, {ULK_CHAN_SINE, 0.9}}},
    {"sine 0.9 + sine 0.9 + binary 0.4", 3, {{ULK_CHAN_SINE, 0.9}, {ULK_CHAN_SINE, 0.9}, {ULK_CHAN_BINARY, 0.4}}},
    {"binary 0.7 + binary 1.0", 2, {{ULK_CHAN_BINARY, 0.7}, {ULK_CHAN_BINARY, 1.0}}},
    {"sine 2.404825557695773 (carrier null) + binary 0.3", 2,
     {{ULK_CHAN_SINE, 2.404825557695773}, {ULK_CHAN_BINARY, 0.3}}},
};

static void test_power_split_rows(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof split_rows / sizeof split_rows[0]; r++) {
        ulk_power_split s;
        assert_int_equal(ulk_power_split_compute(split_rows[r].t, split_rows[r].n, &s), 0);
        double sum = s.carrier + s.intermod;
        for (int k = 0; k < split_rows[r].n; k++) sum += s.useful[k];
        assert_true(fabs(sum - 1.0) < 1e-12);
        double im = intermod_by_lines(split_rows[r].t, split_rows[r].n);
        if (fabs(im - s.intermod) > 1e-12) fail_msg("row '%s': intermod %.15g, by lines %.15g", split_rows[r].name, s.intermod, im);
        assert_true(s.intermod >= 0);
    }
    ulk_power_split s;
    assert_int_equal(ulk_power_split_compute(NULL, 1, &s), ULK_EINVAL);
    assert_int_equal(ulk_power_split_compute(split_rows[0].t, ULK_SPLIT_MAX + 1, &s), ULK_EINVAL);
}

/* ---------------------------------------------------------------- ranging */

/* Primitive polynomials (tables of primitive trinomials, e.g. Golomb, "Shift Register
 * Sequences"; from memory) and non-primitive ones with their known periods:
 * x^4+x^3+x^2+x+1 divides x^5 - 1 (period 5); x^4+x^2+1 = (x^2+x+1)^2 (period 6);
 * x^6+x^3+1 divides x^9 - 1 (period 9). */
static const struct { const char *name; int e[6]; int n; uint64_t period; int primitive; } mls_rows[] = {
    {"x^3+x+1", {3, 1, 0}, 3, 7, 1},
    {"x^4+x+1", {4, 1, 0}, 3, 15, 1},
    {"x^5+x^2+1", {5, 2, 0}, 3, 31, 1},
    {"x^7+x+1", {7, 1, 0}, 3, 127, 1},
    {"x^9+x^4+1", {9, 4, 0}, 3, 511, 1},
    {"x^10+x^3+1", {10, 3, 0}, 3, 1023, 1},
    {"x^10+x^7+1", {0, 7, 10}, 3, 1023, 1},
    {"x^11+x^2+1", {11, 2, 0}, 3, 2047, 1},
    {"x^15+x+1", {15, 1, 0}, 3, 32767, 1},
    {"x^8+x^4+x^3+x^2+1", {8, 4, 3, 2, 0}, 5, 255, 1},
    {"x^4+x^3+x^2+x+1", {4, 3, 2, 1, 0}, 5, 5, 0},
    {"x^4+x^2+1", {4, 2, 0}, 3, 6, 0},
    {"x^6+x^3+1", {6, 3, 0}, 3, 9, 0},
};

static void test_mls_rows(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof mls_rows / sizeof mls_rows[0]; r++) {
        uint64_t p = 0;
        uint8_t *a = NULL;
        int rc = ulk_mls_generate(mls_rows[r].e, mls_rows[r].n, &p, &a);
        if (rc) fail_msg("row %s: status %d", mls_rows[r].name, rc);
        if (p != mls_rows[r].period) fail_msg("row %s: period %llu, want %llu", mls_rows[r].name,
                                              (unsigned long long)p, (unsigned long long)mls_rows[r].period);
        int r_deg = 0;
        for (int i = 0; i < mls_rows[r].n; i++)
            if (mls_rows[r].e[i] > r_deg) r_deg = mls_rows[r].e[i];
        assert_int_equal(p == ((uint64_t)1 << r_deg) - 1, mls_rows[r].primitive);
        /* a_0 .. a_{r-1} = 1 and the recurrence, read cyclically over the period */
        for (int i = 0; i < r_deg && (uint64_t)i < p; i++) assert_int_equal(a[i], 1);
        for (uint64_t k = 0; k < p; k++) {
            int x = 0;
            for (int i = 0; i < mls_rows[r].n; i++)
                if (mls_rows[r].e[i] < r_deg) x ^= a[(k + (uint64_t)mls_rows[r].e[i]) % p];
            if (x != a[(k + (uint64_t)r_deg) % p]) fail_msg("row %s: recurrence broken at k=%llu", mls_rows[r].name, (unsigned long long)k);
        }
        if (mls_rows[r].primitive) {
            /* balance: 2^(r-1) ones; two-valued autocorrelation of the chips: N at lag 0, -1
             * elsewhere (Golomb's postulates for m-sequences; from memory) */
            uint64_t ones = 0;
            for (uint64_t k = 0; k < p; k++) ones += a[k];
            assert_int_equal(ones, (uint64_t)1 << (r_deg - 1));
            if (p <= 2047) {
                for (uint64_t lag = 1; lag < p; lag++) {
                    long s = 0;
                    for (uint64_t k = 0; k < p; k++) s += ulk_mls_chip(a[k]) * ulk_mls_chip(a[(k + lag) % p]);
                    if (s != -1) fail_msg("row %s: autocorrelation %ld at lag %llu", mls_rows[r].name, s, (unsigned long long)lag);
                }
            }
        }
        free(a);
    }
    uint64_t p;
    int nocon[] = {4, 1};
    assert_int_equal(ulk_mls_generate(nocon, 2, &p, NULL), ULK_EPARSE);
    int rep[] = {5, 2, 2, 0};
    assert_int_equal(ulk_mls_generate(rep, 4, &p, NULL), ULK_EINVAL);
    int big[] = {ULK_MLS_MAX_DEGREE + 1, 0};
    assert_int_equal(ulk_mls_generate(big, 2, &p, NULL), ULK_ELIMIT);
    assert_int_equal(ulk_mls_chip(0), 1);
    assert_int_equal(ulk_mls_chip(1), -1);
}

/* ---------------------------------------------------------------- generator */

/* A carrier built in code: data sine subcarrier (no pilot), voice FM tone, ranging. */
static void demo_carrier(ulk_carrier *c, ulk_ratio fsc, ulk_ratio fv, ulk_ratio dev, ulk_ratio fa,
                         ulk_ratio chip, const int *exps, int n_exp)
{
    memset(c, 0, sizeof *c);
    c->has_data = 1;
    c->data_wave = ULK_WAVE_SINE;
    c->data_fsc_hz = fsc;
    c->data_rb = ulk_ratio_make(1000, 1);
    c->data_symbol_rate = ulk_ratio_make(5000, 1);
    c->data_amp = 0.9;
    c->has_voice = 1;
    c->voice_fv_hz = fv;
    c->voice_dev_hz = dev;
    c->voice_tone_hz = fa;
    c->has_ranging = 1;
    c->chip_rate = chip;
    memcpy(c->poly_exps, exps, sizeof(int) * (size_t)n_exp);
    c->n_poly_exps = n_exp;
    c->degree = exps[0];
    c->offset_hz = ulk_ratio_make(0, 1);
    for (int ch = 0; ch < ULK_CH_N; ch++) { c->bound_lo[ch] = 0; c->bound_hi[ch] = 1.5; }
}

/* Data source: a constant +1 bit on a sine subcarrier, phase exact on the sample index
 * (num/den cycles per sample). */
typedef struct { int64_t num, den, acc; } sine_src;
static long sine_data(void *u, float *out, size_t n)
{
    sine_src *s = u;
    for (size_t i = 0; i < n; i++) {
        out[i] = (float)sin(2 * M_PI * (double)s->acc / (double)s->den);
        s->acc = (s->acc + s->num) % s->den;
    }
    return (long)n;
}

static void test_generator_mean_is_product(void **st)
{
    (void)st;
    /* Incommensurate frequencies (docs/spec/carrier.md s.2): f_sc 10007.3 Hz, f_v 31234.5 Hz,
     * f_a 1013.7 Hz, chip rate 2046 (N = 1023: a 0.5 s period), f_s 1 MHz, 2 s. */
    ulk_carrier c;
    int e[] = {10, 3, 0};
    demo_carrier(&c, ulk_ratio_make(100073, 10), ulk_ratio_make(62469, 2), ulk_ratio_make(4000, 1),
                 ulk_ratio_make(10137, 10), ulk_ratio_make(2046, 1), e, 3);
    ulk_carrier_mode mo = {0};
    mo.name = "full";
    mo.on[0] = mo.on[1] = mo.on[2] = 1;
    mo.m_rad[0] = 0.9;
    mo.m_rad[1] = 0.8;
    mo.m_rad[2] = 0.4;
    const uint64_t n_total = 2000000;
    sine_src src = {100073, 10000000, 0}; /* 10007.3 / 1e6 = 100073 / 1e7 cycles per sample */
    ulk_cgen_config cfg = {&c, &mo, ulk_ratio_make(1000000, 1), sine_data, &src, n_total};
    ulk_cgen *g;
    ulk_diag *d = ulk_diag_create();
    assert_int_equal(ulk_cgen_create(&cfg, &g, d), 0);
    float *iq = malloc(2 * 4096 * sizeof(float));
    double si = 0, sq = 0;
    /* narrow-band power at the data subcarrier's two first-harmonic lines */
    double cp_r = 0, cp_i = 0, cm_r = 0, cm_i = 0;
    uint64_t pos = 0, sph = 0;
    long n;
    while ((n = ulk_cgen_run(g, iq, 4096)) > 0) {
        for (long i = 0; i < n; i++) {
            double I = iq[2 * i], Q = iq[2 * i + 1];
            si += I;
            sq += Q;
            double ph = 2 * M_PI * (double)sph / 10000000.0, cs = cos(ph), sn = sin(ph);
            sph = (sph + 100073) % 10000000;
            /* x e^{-j ph} and x e^{+j ph} */
            cp_r += I * cs + Q * sn; cp_i += Q * cs - I * sn;
            cm_r += I * cs - Q * sn; cm_i += Q * cs + I * sn;
        }
        pos += (uint64_t)n;
    }
    assert_int_equal(pos, n_total);
    assert_int_equal(ulk_cgen_run(g, iq, 4096), 0);
    double mi = si / (double)pos, mq = sq / (double)pos;
    double got_db = 10 * log10(mi * mi + mq * mq);
    /* the page's closed form with the reference integral, not the library's J0 */
    double ref = jn_integral(0, 0.9) * jn_integral(0, 0.8) * cos(0.4);
    double ref_db = 10 * log10(ref * ref);
    print_message("mean power %.4f dB, closed form %.4f dB\n", got_db, ref_db);
    if (fabs(got_db - ref_db) > 0.05) fail_msg("mean power %.4f dB, expected %.4f dB", got_db, ref_db);
    ulk_carrier_plan p;
    assert_int_equal(ulk_carrier_plan_indices(&c, &mo, mo.m_rad, NAN, &p), 0);
    assert_true(fabs(10 * log10(p.carrier) - ref_db) < 1e-9);
    /* both data lines together tend to P_d / P_T */
    double line = (cp_r * cp_r + cp_i * cp_i + cm_r * cm_r + cm_i * cm_i) / ((double)pos * (double)pos);
    print_message("data lines %.4f dB, planner %.4f dB\n", 10 * log10(line), 10 * log10(p.useful[ULK_CH_DATA]));
    if (fabs(10 * log10(line) - 10 * log10(p.useful[ULK_CH_DATA])) > 0.05)
        fail_msg("data lines %.4f dB, planner %.4f dB", 10 * log10(line), 10 * log10(p.useful[ULK_CH_DATA]));
    free(iq);
    ulk_cgen_destroy(g);
    ulk_cgen_destroy(NULL);
    ulk_diag_destroy(d);
}

/* Chip timing exact: with only ranging on, sign(Q) is the chip of floor(i * chip_rate / f_s)
 * mod N, taken here in integer arithmetic with a shift register written in the test. */
static void test_generator_chip_timing(void **st)
{
    (void)st;
    ulk_carrier c;
    int e[] = {5, 2, 0};
    /* 3 samples per chip exactly at 3000 chips/s, 9000 Hz: edges fall on samples */
    demo_carrier(&c, ulk_ratio_make(1, 1), ulk_ratio_make(1, 1), ulk_ratio_make(1, 1), ulk_ratio_make(1, 1),
                 ulk_ratio_make(3000, 1), e, 3);
    ulk_carrier_mode mo = {0};
    mo.name = "ranging";
    mo.on[ULK_CH_RANGING] = 1;
    mo.m_rad[ULK_CH_RANGING] = 1.0;
    /* the test's own register: a_{k+5} = a_{k+2} XOR a_k */
    uint8_t a[31 + 5];
    for (int k = 0; k < 5; k++) a[k] = 1;
    for (int k = 0; k + 5 < 36; k++) a[k + 5] = a[k + 2] ^ a[k];
    const int64_t fs = 9000, cr = 3000;
    for (int rate_case = 0; rate_case < 2; rate_case++) {
        int64_t fsx = rate_case ? 7001 : fs; /* second case: edges between samples */
        ulk_cgen_config cfg = {&c, &mo, ulk_ratio_make(fsx, 1), NULL, NULL, 200};
        ulk_cgen *g;
        assert_int_equal(ulk_cgen_create(&cfg, &g, NULL), 0);
        float iq[400];
        assert_int_equal(ulk_cgen_run(g, iq, 200), 200);
        for (int64_t i = 0; i < 200; i++) {
            int64_t k = (i * cr / fsx) % 31;
            int chip = 1 - 2 * a[k];
            int sgn = iq[2 * i + 1] > 0 ? 1 : -1;
            if (sgn != chip) fail_msg("fs %lld sample %lld: chip sign %d, want %d", (long long)fsx, (long long)i, sgn, chip);
            assert_true(fabs(iq[2 * i] - cos(1.0)) < 1e-6);
        }
        ulk_cgen_destroy(g);
    }
}

/* Voice: the phase term (Delta/f_a)(1 - cos 2 pi f_a t) of the page, at exact sample times. */
static void test_voice_tone_phase(void **st)
{
    (void)st;
    ulk_ratio fv = ulk_ratio_make(30000, 1), dev = ulk_ratio_make(4000, 1), fa = ulk_ratio_make(1000, 1);
    ulk_ratio fs = ulk_ratio_make(48000, 1);
    for (uint64_t i = 0; i < 500; i += 7) {
        double t = (double)i / 48000.0, ph;
        assert_int_equal(ulk_voice_tone_phase(fv, dev, fa, fs, i, &ph), 0);
        double want = fmod(2 * M_PI * 30000 * t, 2 * M_PI) + 4.0 * (1 - cos(2 * M_PI * 1000 * t));
        double dphi = remainder(ph - want, 2 * M_PI);
        assert_true(fabs(dphi) < 1e-9);
    }
    /* one hour in: exact integer phase keeps f_v t whole (30000 * 3600 cycles) */
    double ph;
    assert_int_equal(ulk_voice_tone_phase(fv, dev, fa, fs, (uint64_t)48000 * 3600, &ph), 0);
    assert_true(fabs(ph) < 1e-12);
    /* generator with voice only: Q = sin(m sin(phase)) */
    ulk_carrier c;
    int e[] = {3, 1, 0};
    demo_carrier(&c, fv, fv, dev, fa, ulk_ratio_make(1, 1), e, 3);
    ulk_carrier_mode mo = {0};
    mo.name = "voice";
    mo.on[ULK_CH_VOICE] = 1;
    mo.m_rad[ULK_CH_VOICE] = 0.7;
    ulk_cgen_config cfg = {&c, &mo, fs, NULL, NULL, 300};
    ulk_cgen *g;
    assert_int_equal(ulk_cgen_create(&cfg, &g, NULL), 0);
    float iq[600];
    assert_int_equal(ulk_cgen_run(g, iq, 300), 300);
    for (uint64_t i = 0; i < 300; i++) {
        assert_int_equal(ulk_voice_tone_phase(fv, dev, fa, fs, i, &ph), 0);
        assert_true(fabs(iq[2 * i + 1] - sin(0.7 * sin(ph))) < 1e-6);
    }
    ulk_cgen_destroy(g);
}

/* ---------------------------------------------------------------- solver */

static void test_solver_vs_brute_force(void **st)
{
    (void)st;
    ulk_carrier c;
    int e[] = {10, 3, 0};
    demo_carrier(&c, ulk_ratio_make(10000, 1), ulk_ratio_make(30000, 1), ulk_ratio_make(4000, 1),
                 ulk_ratio_make(1000, 1), ulk_ratio_make(2000, 1), e, 3);
    c.has_loop = 1;
    c.loop_bw_hz = 20;
    c.loop_snr_req_db = 12;
    c.has_data_need = 1;
    c.data_ebn0_req_db = 9.6;
    c.has_voice_need = 1;
    c.voice_pn0_req_dbhz = 45;
    c.has_ranging_need = 1;
    c.ranging_pn0_req_dbhz = 30;
    c.bound_lo[0] = 0.2; c.bound_hi[0] = 1.5;
    c.bound_lo[1] = 0.2; c.bound_hi[1] = 1.5;
    c.bound_lo[2] = 0.1; c.bound_hi[2] = 1.4;
    ulk_carrier_mode mo = {0};
    mo.name = "full";
    mo.on[0] = mo.on[1] = mo.on[2] = 1;
    const double pt = 62;
    double m[ULK_CH_N];
    ulk_carrier_plan p;
    assert_int_equal(ulk_carrier_solve(&c, &mo, pt, m, &p), 0);
    /* test-side margins from the reference integral */
    double best = -HUGE_VAL;
    for (double a = 0.2; a <= 1.5 + 1e-9; a += 0.05)
        for (double b = 0.2; b <= 1.5 + 1e-9; b += 0.05)
            for (double r = 0.1; r <= 1.4 + 1e-9; r += 0.05) {
                double ja0 = jn_integral(0, a), ja1 = jn_integral(1, a), jb0 = jn_integral(0, b), jb1 = jn_integral(1, b);
                double pc = ja0 * ja0 * jb0 * jb0 * cos(r) * cos(r);
                double pd = 2 * ja1 * ja1 * jb0 * jb0 * cos(r) * cos(r);
                double pv = 2 * jb1 * jb1 * ja0 * ja0 * cos(r) * cos(r);
                double pr = ja0 * ja0 * jb0 * jb0 * sin(r) * sin(r);
                double mg[4] = {pt + 10 * log10(pc) - 10 * log10(20) - 12, pt + 10 * log10(pd) - 30 - 9.6,
                                pt + 10 * log10(pv) - 45, pt + 10 * log10(pr) - 30};
                double mn = fmin(fmin(mg[0], mg[1]), fmin(mg[2], mg[3]));
                if (mn > best) best = mn;
            }
    /* the 0.01 lattice contains the 0.05 grid (offsets 0.2 and 0.1 are on it) */
    if (p.min_margin_db < best - 1e-9) fail_msg("solver %.6f dB below the coarse grid's %.6f dB", p.min_margin_db, best);
    /* and is not above anything the fine neighbourhood can reach */
    for (int da = -1; da <= 1; da++)
        for (int dv = -1; dv <= 1; dv++)
            for (int dr = -1; dr <= 1; dr++) {
                double mm[ULK_CH_N] = {m[0] + 0.01 * da, m[1] + 0.01 * dv, m[2] + 0.01 * dr};
                if (mm[0] < 0.2 - 1e-9 || mm[0] > 1.5 + 1e-9 || mm[1] < 0.2 - 1e-9 || mm[1] > 1.5 + 1e-9 ||
                    mm[2] < 0.1 - 1e-9 || mm[2] > 1.4 + 1e-9)
                    continue;
                ulk_carrier_plan q;
                ulk_carrier_plan_indices(&c, &mo, mm, pt, &q);
                assert_true(q.min_margin_db <= p.min_margin_db + 1e-9);
            }
    /* results on the lattice, inside the bounds */
    for (int ch = 0; ch < 3; ch++) {
        assert_true(fabs(m[ch] * 100 - round(m[ch] * 100)) < 1e-6);
        assert_true(m[ch] >= c.bound_lo[ch] - 1e-9 && m[ch] <= c.bound_hi[ch] + 1e-9);
    }
    /* deterministic */
    double m2[ULK_CH_N];
    assert_int_equal(ulk_carrier_solve(&c, &mo, pt, m2, NULL), 0);
    assert_memory_equal(m, m2, sizeof m);
    /* nothing to maximise */
    c.has_loop = c.has_data_need = c.has_voice_need = c.has_ranging_need = 0;
    assert_int_equal(ulk_carrier_solve(&c, &mo, pt, m, NULL), ULK_EINVAL);
    assert_int_equal(ulk_carrier_solve(&c, &mo, NAN, m, NULL), ULK_EINVAL);
}

/* ---------------------------------------------------------------- loader */

static char *write_tmp(const char *text, const char *suffix)
{
    static int seq;
    char *path = malloc(256);
    snprintf(path, 256, "%s/carrier_test_%d_%d%s", ULK_BINARY_DIR, (int)getpid(), seq++, suffix);
    FILE *f = fopen(path, "w");
    assert_non_null(f);
    fputs(text, f);
    fclose(f);
    return path;
}

static const char good_standalone[] =
    "carrier:\n"
    "  loop: {bandwidth_hz: 20, required_snr_db: 12}\n"
    "  voice: {subcarrier_hz: 30000, deviation_hz: 4000, tone_hz: 1000, required_pn0_dbhz: 45}\n"
    "  ranging: {chip_rate: 2000, polynomial: [10, 3, 0], required_pn0_dbhz: 30}\n"
    "  modes:\n"
    "    acquisition: {ranging: 1.2}\n"
    "    talk: {voice: 0.9, ranging: 0.4}\n";

/* Rows: file text, the finding expected (substring of the formatted first error or of the
 * warning), its line and column, whether it is a warning only (load succeeds). */
static const struct { const char *name, *text, *want; int line, col, warning; } load_rows[] = {
    {"non-primitive polynomial",
     "carrier:\n  ranging: {chip_rate: 2000, polynomial: [4, 3, 2, 1, 0]}\n  modes: {a: {ranging: 1}}\n",
     "is not primitive: its sequence repeats every 5 chips, not 2^4 - 1 = 15", 2, 42, 0},
    {"polynomial without constant term",
     "carrier:\n  ranging: {chip_rate: 2000, polynomial: [4, 1]}\n  modes: {a: {ranging: 1}}\n",
     "has no constant term", 2, 42, 0},
    {"misspelt key",
     "carrier:\n  ranging: {chip_rate: 2000, polynomal: [5, 2, 0]}\n  modes: {a: {ranging: 1}}\n",
     "unknown key 'polynomal' in carrier.ranging (did you mean 'polynomial'?)", 2, 30, 0},
    {"mode uses an undefined channel",
     "carrier:\n  ranging: {chip_rate: 2000, polynomial: [5, 2, 0]}\n  modes:\n    a: {voice: 1}\n",
     "turns on the voice channel, but carrier.voice is missing or invalid", 4, 16, 0},
    {"data without a link",
     "carrier:\n  data: {required_ebn0_db: 9.6}\n  modes: {a: {data: 1}}\n",
     "the data channel takes its signal from the dictionary's link", 2, 9, 0},
    {"index out of range",
     "carrier:\n  ranging: {chip_rate: 2000, polynomial: [5, 2, 0]}\n  modes: {a: {ranging: 4}}\n",
     "ranging index 4 rad is outside (0, pi]", 3, 24, 0},
    {"bad bounds",
     "carrier:\n  ranging: {chip_rate: 2000, polynomial: [5, 2, 0], bounds: [1.2, 0.3]}\n  modes: {a: {ranging: 1}}\n",
     "bounds [1.2, 0.3] must satisfy", 2, 61, 0},
    {"no modes", "carrier:\n  loop: {bandwidth_hz: 20, required_snr_db: 12}\n", "carrier has no 'modes' (required)", 2, 3, 0},
    {"negative chip rate",
     "carrier:\n  ranging: {chip_rate: -5, polynomial: [5, 2, 0]}\n  modes: {a: {ranging: 1}}\n",
     "chip_rate must be greater than 0", 2, 24, 0},
    {"stray top-level key", "carrier:\n  modes: {a: {ranging: 1}}\nextra: 1\n", "unknown top-level key 'extra'", 3, 1, 0},
    {"voice in the ranging main lobe (warning)",
     "carrier:\n  voice: {subcarrier_hz: 3000, deviation_hz: 400, tone_hz: 100}\n"
     "  ranging: {chip_rate: 5000, polynomial: [5, 2, 0]}\n  modes: {a: {ranging: 1, voice: 1}}\n",
     "voice subcarrier main lobe (3000 +- 500 Hz) reaches into the ranging main lobe", 3, 12, 1},
};

static void test_loader_rows(void **st)
{
    (void)st;
    for (size_t r = 0; r < sizeof load_rows / sizeof load_rows[0]; r++) {
        char *path = write_tmp(load_rows[r].text, ".yaml");
        ulk_diag *d = ulk_diag_create();
        ulk_carrier *c = NULL;
        int rc = ulk_carrier_load(path, &c, d);
        const ulk_finding *f = NULL;
        if (load_rows[r].warning) {
            assert_int_equal(rc, 0);
            assert_non_null(c);
            for (size_t i = 0; i < ulk_diag_count(d); i++)
                if (ulk_diag_get(d, i)->sev == ULK_SEV_WARNING) f = ulk_diag_get(d, i);
        } else {
            if (rc != ULK_EPARSE) fail_msg("row '%s': status %d, want a parse error", load_rows[r].name, rc);
            assert_null(c);
            f = ulk_diag_first_error(d);
        }
        if (!f) fail_msg("row '%s': no finding", load_rows[r].name);
        char buf[600];
        ulk_finding_format(f, buf, sizeof buf);
        if (!strstr(buf, load_rows[r].want) || f->line != load_rows[r].line || f->col != load_rows[r].col)
            fail_msg("row '%s': got '%s' at %d:%d, want '%s' at %d:%d", load_rows[r].name, buf, f->line, f->col,
                     load_rows[r].want, load_rows[r].line, load_rows[r].col);
        assert_non_null(strstr(buf, path)); /* the file is named */
        ulk_carrier_destroy(c);
        ulk_diag_destroy(d);
        unlink(path);
        free(path);
    }
}

static void test_loader_good_and_json(void **st)
{
    (void)st;
    static const char json[] =
        "{\"carrier\": {\"voice\": {\"subcarrier_hz\": 30000, \"deviation_hz\": 4000, \"tone_hz\": 1000},\n"
        " \"ranging\": {\"chip_rate\": \"62.5\", \"polynomial\": [5, 2, 0]},\n"
        " \"offset_hz\": -250.5,\n"
        " \"modes\": {\"talk\": {\"voice\": 0.9, \"ranging\": 0.4}}}}\n";
    char *py = write_tmp(good_standalone, ".yaml"), *pj = write_tmp(json, ".json");
    ulk_diag *d = ulk_diag_create();
    ulk_carrier *c;
    assert_int_equal(ulk_carrier_load(py, &c, d), 0);
    assert_int_equal(ulk_diag_errors(d), 0);
    assert_int_equal(c->n_modes, 2);
    assert_int_equal(ulk_carrier_find_mode(c, "talk"), 1);
    assert_int_equal(ulk_carrier_find_mode(c, "nope"), -1);
    assert_int_equal(c->period, 1023);
    assert_true(c->modes[1].on[ULK_CH_VOICE] && c->modes[1].on[ULK_CH_RANGING] && !c->modes[1].on[ULK_CH_DATA]);
    assert_int_equal(c->modes[1].loc.line, 7);
    ulk_carrier_destroy(c);
    assert_int_equal(ulk_carrier_load(pj, &c, d), 0);
    assert_int_equal(c->chip_rate.num, 125);
    assert_int_equal(c->chip_rate.den, 2);
    assert_int_equal(c->offset_hz.num, -501);
    assert_int_equal(c->offset_hz.den, 2);
    ulk_carrier_destroy(c);
    ulk_carrier_destroy(NULL);
    /* allocation failures: every one ends in a clean error, then it loads */
    for (long k = 1;; k++) {
        ulk_diag_clear(d);
        ulk_alloc_fail_at(k);
        c = NULL;
        int rc = ulk_carrier_load(py, &c, d);
        ulk_alloc_fail_at(0);
        if (rc == 0) { assert_non_null(c); ulk_carrier_destroy(c); break; }
        assert_null(c);
        assert_true(rc == ULK_ENOMEM || rc == ULK_EIO || rc == ULK_EPARSE);
        assert_true(k < 10000);
    }
    /* the demo file, with its dictionary */
    ulk_diag_clear(d);
    assert_int_equal(ulk_carrier_load(ULK_SOURCE_DIR "/dictionaries/carrier/demo-carrier.yaml", &c, d), 0);
    assert_int_equal(ulk_diag_warnings(d), 0);
    assert_true(c->has_data && c->has_voice && c->has_ranging && c->has_loop && c->has_pt_n0);
    assert_int_equal(c->n_modes, 3);
    ulk_carrier_destroy(c);
    ulk_diag_destroy(d);
    unlink(py); unlink(pj);
    free(py); free(pj);
}

/* `test_carrier --print-bessel`: x, J0(x), J1(x) for tests/py/test_carrier_scipy.py, which
 * checks them against scipy.special (0..10 in steps of 0.0025, 10..40 in steps of 0.05, and
 * the first zero of J0). */
static int print_bessel(void)
{
    for (int k = 0; k <= 4000; k++) {
        double x = 10.0 * k / 4000;
        printf("%.17g %.17g %.17g\n", x, ulk_bessel_j0(x), ulk_bessel_j1(x));
    }
    for (int k = 1; k <= 600; k++) {
        double x = 10.0 + 30.0 * k / 600;
        printf("%.17g %.17g %.17g\n", x, ulk_bessel_j0(x), ulk_bessel_j1(x));
    }
    double z = 2.404825557695773;
    printf("%.17g %.17g %.17g\n", z, ulk_bessel_j0(z), ulk_bessel_j1(z));
    return 0;
}

int main(int argc, char **argv)
{
    if (argc > 1 && !strcmp(argv[1], "--print-bessel")) return print_bessel();
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_bessel_as_table_9_1),
        cmocka_unit_test(test_bessel_as_table_9_5_zeros),
        cmocka_unit_test(test_bessel_grid_vs_integral_and_libm),
        cmocka_unit_test(test_power_split_rows),
        cmocka_unit_test(test_mls_rows),
        cmocka_unit_test(test_generator_mean_is_product),
        cmocka_unit_test(test_generator_chip_timing),
        cmocka_unit_test(test_voice_tone_phase),
        cmocka_unit_test(test_solver_vs_brute_force),
        cmocka_unit_test(test_loader_rows),
        cmocka_unit_test(test_loader_good_and_json),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
