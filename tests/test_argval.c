/* tests/test_argval.c - engineering text -> raw field, the rules of docs/spec/subbit.md
 * section 2: range first, nearest calibrated raw with ties to the smaller raw, refusal
 * beyond half a raw step (exactly half accepted), two's complement, float32 rounded once to
 * nearest-even (IEEE 754 binary32), -0 kept, values beyond the largest finite refused.
 *
 * Scales in the tie rows are exact in binary (0.5, 0.25, 2) as the contract asks, so the
 * expected raws are worked out by hand from eng = offset + scale * raw. float32 bit patterns
 * are those of IEEE 754 binary32 (1.5 = 0x3FC00000, 0.1 -> 0x3DCCCCCD, largest finite
 * 0x7F7FFFFF = 3.4028234663852886e38 = 2^128 - 2^104; the rounding threshold to infinity is
 * that plus half an ulp, 2^128 - 2^103) -- from memory, and cross-checked by Python's struct
 * module ('>f') when the table was written.
 */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/dict.h"
#include "util.h"

static ulk_arg mk(ulk_arg_type t, int bits)
{
    ulk_arg a;
    memset(&a, 0, sizeof a);
    a.name = "x";
    a.type = t;
    a.bits = bits;
    return a;
}

typedef struct {
    const char *row;    /* test name of the row */
    const char *text;
    double scale;       /* SI prefix factor */
    int ok;
    uint64_t raw;
    const char *err;    /* fragment of the refusal */
} row_t;

static void run_rows(const ulk_arg *a, const row_t *rows, size_t n)
{
    for (size_t i = 0; i < n; i++) {
        ulk_argval v = {0, 0};
        char err[300] = "";
        int rc = ulk_arg_from_text(a, rows[i].text, rows[i].scale, &v, err, sizeof err);
        print_message("row %s: '%s' -> rc %d raw 0x%llx %s\n", rows[i].row, rows[i].text, rc,
                      (unsigned long long)v.raw, err);
        if (rows[i].ok) {
            if (rc != 0 || v.raw != rows[i].raw)
                fail_msg("row %s: '%s' gave rc %d raw 0x%llx (%s), expected raw 0x%llx", rows[i].row, rows[i].text,
                         rc, (unsigned long long)v.raw, err, (unsigned long long)rows[i].raw);
        } else {
            if (rc != ULK_EPARSE || !strstr(err, rows[i].err))
                fail_msg("row %s: '%s' gave rc %d '%s', expected a refusal with '%s'", rows[i].row, rows[i].text, rc,
                         err, rows[i].err);
        }
    }
}

/* unsigned 8 bits, eng = 0.5 * raw: raws 0..255 give 0, 0.5, ..., 127.5 */
static const row_t half_rows[] = {
    {"exact", "3.5", 1, 1, 7, NULL},
    {"tie_low_end", "0.25", 1, 1, 0, NULL},        /* 0 and 0.5 equally near: smaller raw */
    {"tie_mid", "3.75", 1, 1, 7, NULL},            /* 3.5 and 4.0: raw 7, not 8 */
    {"just_above_tie", "3.7500000000000000000001", 1, 1, 8, NULL}, /* decided on the decimal as written */
    {"just_below_tie", "3.7499999999999999999999", 1, 1, 7, NULL},
    {"half_step_above_top_accepted", "127.75", 1, 1, 255, NULL},
    {"beyond_half_step_top", "127.7500001", 1, 0, 0, "more than half a raw step"},
    {"half_step_below_zero_accepted", "-0.25", 1, 1, 0, NULL},
    {"beyond_half_step_below", "-0.2500001", 1, 0, 0, "more than half a raw step"},
    {"si_milli", "3750", 1e-3, 1, 7, NULL},        /* 3750m = 3.75 exactly: tie -> 7 */
    {"si_kilo", "0.0035", 1e3, 1, 7, NULL},
    {"scientific", "35e-1", 1, 1, 7, NULL},
    {"hex_is_a_value", "0x3", 1, 1, 6, NULL},
    {"not_a_number", "3.5.1", 1, 0, 0, "not a number"},
    {"empty", "", 1, 0, 0, "empty"},
};

static void test_calibration_half(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 8);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = 0.5;
    run_rows(&a, half_rows, sizeof half_rows / sizeof half_rows[0]);
}

/* signed 8 bits, eng = 2 * raw (raw -128..127 -> -256..254) */
static const row_t two_rows[] = {
    {"tie_minus1_before_0", "-1", 1, 1, 0xFF, NULL},  /* -2 (raw -1) and 0 (raw 0): -1 wins */
    {"tie_1", "1", 1, 1, 0x00, NULL},                  /* 0 and 2: raw 0 */
    {"tie_3", "3", 1, 1, 0x01, NULL},
    {"bottom_half_step", "-257", 1, 1, 0x80, NULL},    /* exactly half below -256: accepted */
    {"bottom_beyond", "-257.01", 1, 0, 0, "more than half a raw step"},
    {"top_half_step", "255", 1, 1, 0x7F, NULL},
    {"top_beyond", "255.5", 1, 0, 0, "more than half a raw step"},
};

static void test_calibration_two_signed(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_SIGNED, 8);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = 2;
    run_rows(&a, two_rows, sizeof two_rows / sizeof two_rows[0]);
}

/* decreasing calibration eng = 10 - 0.25 * raw, 4 bits (raw 0..15 -> 10 .. 6.25), range [7, 10] */
static const row_t dec_rows[] = {
    {"range_first", "6.5", 1, 0, 0, "outside the range [7, 10]"},
    {"exact", "9", 1, 1, 4, NULL},
    {"tie_smaller_raw", "9.125", 1, 1, 3, NULL},       /* 9.25 (raw 3) and 9.0 (raw 4) */
    {"nearer_larger_raw", "9.1", 1, 1, 4, NULL},
    {"top_end", "10", 1, 1, 0, NULL},
    {"range_above", "10.125", 1, 0, 0, "outside the range"},
};

static void test_calibration_decreasing(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 4);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = -0.25;
    a.cal_offset = 10;
    a.has_range = 1;
    a.range_min = 7;
    a.range_max = 10;
    run_rows(&a, dec_rows, sizeof dec_rows / sizeof dec_rows[0]);
}

/* polynomial eng = 1 + 0.5 raw + 0.25 raw^2 over 6 bits: f(2) = 3, f(3) = 4.75, f(4) = 7 */
static const row_t poly_rows[] = {
    {"exact_2", "3", 1, 1, 2, NULL},
    {"tie_2_3", "3.875", 1, 1, 2, NULL},
    {"above_tie", "3.876", 1, 1, 3, NULL},
    {"near_4", "6.5", 1, 1, 4, NULL},
    {"below_f0_half_step_ok", "0.875", 1, 1, 0, NULL}, /* f(-1) = 0.75, f(0) = 1: half step 0.125 */
    {"below_f0_beyond", "0.874", 1, 0, 0, "more than half a raw step"},
};

static void test_calibration_polynomial(void **st)
{
    (void)st;
    double c[3] = {1, 0.5, 0.25};
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 6);
    a.cal = ULK_CAL_POLY;
    a.poly = c;
    a.n_poly = 3;
    run_rows(&a, poly_rows, sizeof poly_rows / sizeof poly_rows[0]);
}

static const row_t int_rows[] = {
    {"u8_max", "255", 1, 1, 255, NULL},
    {"u8_over", "256", 1, 0, 0, "does not fit in 8"},
    {"u8_negative", "-1", 1, 0, 0, "does not fit"},
    {"u8_hex", "0xFF", 1, 1, 255, NULL},
    {"u8_bin", "0b1010", 1, 1, 10, NULL},
    {"u8_bad_bin", "0b102", 1, 0, 0, "not a binary integer"},
    {"u8_fraction", "2.5", 1, 0, 0, "not a whole number"},
    {"u8_sci_whole", "2.5e1", 1, 1, 25, NULL},
    {"u8_kilo_unit", "0.25", 1e3, 1, 250, NULL},
    {"u8_beyond_64", "0x10000000000000000", 1, 0, 0, "beyond 64 bits"},
    {"u8_beyond_64_dec", "18446744073709551616", 1, 0, 0, "beyond 64 bits"},
    {"u8_range", "201", 1, 0, 0, "outside the range [0, 200]"},
};

static void test_integers(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 8);
    run_rows(&a, int_rows, sizeof int_rows / sizeof int_rows[0] - 1);
    a.has_range = 1; /* the last row: a range narrower than the width */
    a.range_min = 0;
    a.range_max = 200;
    run_rows(&a, &int_rows[sizeof int_rows / sizeof int_rows[0] - 1], 1);
    /* 64-bit extremes */
    ulk_arg u64 = mk(ULK_ARG_UNSIGNED, 64), s64 = mk(ULK_ARG_SIGNED, 64), s5 = mk(ULK_ARG_SIGNED, 5);
    const row_t r64[] = {{"u64_max", "18446744073709551615", 1, 1, UINT64_MAX, NULL},
                         {"u64_max_hex", "0xFFFFFFFFFFFFFFFF", 1, 1, UINT64_MAX, NULL}};
    run_rows(&u64, r64, 2);
    const row_t rs64[] = {{"s64_min", "-9223372036854775808", 1, 1, 0x8000000000000000ull, NULL},
                          {"s64_min_minus_1", "-9223372036854775809", 1, 0, 0, "beyond 64 bits"},
                          {"s64_max_plus_1", "9223372036854775808", 1, 0, 0, "does not fit in 64"}};
    run_rows(&s64, rs64, 3);
    /* two's complement in 5 bits: -16..15 */
    const row_t rs5[] = {{"s5_minus3", "-3", 1, 1, 0x1D, NULL},
                         {"s5_min", "-16", 1, 1, 0x10, NULL},
                         {"s5_under", "-17", 1, 0, 0, "does not fit in 5 signed bits [-16, 15]"},
                         {"s5_max", "15", 1, 1, 0x0F, NULL}};
    run_rows(&s5, rs5, 4);
    char buf[40];
    ulk_arg_format(&s5, 0x1D, buf, sizeof buf);
    assert_string_equal(buf, "-3");
    assert_true(ulk_arg_raw_to_eng(&s5, 0x10) == -16.0);
}

static const row_t float_rows[] = {
    {"one_and_half", "1.5", 1, 1, 0x3FC00000, NULL},
    {"minus_zero", "-0", 1, 1, 0x80000000, NULL},
    {"minus_zero_decimal", "-0.0e5", 1, 1, 0x80000000, NULL},
    {"plus_zero", "0", 1, 1, 0x00000000, NULL},
    {"tenth_rounded", "0.1", 1, 1, 0x3DCCCCCD, NULL},
    {"ties_to_even_down", "16777217", 1, 1, 0x4B800000, NULL}, /* 2^24 + 1 -> 2^24 (even) */
    {"ties_to_even_up", "16777219", 1, 1, 0x4B800002, NULL},   /* 2^24 + 3 -> 2^24 + 4 */
    {"largest_finite", "3.4028234663852886e38", 1, 1, 0x7F7FFFFF, NULL},
    /* 2^128 - 2^103 lies halfway between the largest finite (odd significand) and 2^128:
     * one below rounds to the largest finite, the tie itself rounds to even = infinity */
    {"below_threshold", "340282356779733661637539395458142568447", 1, 1, 0x7F7FFFFF, NULL},
    {"threshold_tie_to_inf", "340282356779733661637539395458142568448", 1, 0, 0, "largest finite float32"},
    {"far_beyond", "1e39", 1, 0, 0, "largest finite float32"},
    {"negative_beyond", "-1e39", 1, 0, 0, "largest finite float32"},
    {"milli_once", "2.5", 1e-3, 1, 0x3B23D70A, NULL}, /* 0.0025 rounded once from the decimal */
    {"not_inf_text", "inf", 1, 0, 0, "not a number"},
    {"not_nan_text", "nan", 1, 0, 0, "not a number"},
};

static void test_float32(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_FLOAT32, 32);
    run_rows(&a, float_rows, sizeof float_rows / sizeof float_rows[0]);
    char buf[40];
    ulk_arg_format(&a, 0x80000000, buf, sizeof buf);
    assert_string_equal(buf, "-0");
    assert_true(signbit(ulk_arg_raw_to_eng(&a, 0x80000000)));
    ulk_arg_format(&a, 0x3DCCCCCD, buf, sizeof buf);
    assert_string_equal(buf, "0.1");
    ulk_arg_format(&a, 0x7F7FFFFF, buf, sizeof buf);
    assert_string_equal(buf, "3.4028235e+38");
}

static void test_boolean_enum(void **st)
{
    (void)st;
    ulk_arg b = mk(ULK_ARG_BOOLEAN, 1);
    const row_t br[] = {{"true", "true", 1, 1, 1, NULL},  {"on", "on", 1, 1, 1, NULL},
                        {"yes", "YES", 1, 1, 1, NULL},    {"one", "1", 1, 1, 1, NULL},
                        {"false", "false", 1, 1, 0, NULL}, {"off", "off", 1, 1, 0, NULL},
                        {"no", "no", 1, 1, 0, NULL},      {"zero", "0", 1, 1, 0, NULL},
                        {"two", "2", 1, 0, 0, "not a boolean"}, {"maybe", "maybe", 1, 0, 0, "true/false"}};
    run_rows(&b, br, sizeof br / sizeof br[0]);
    ulk_enum_value vals[3] = {{"OPEN", 2, {0}}, {"CLOSED", 1, {0}}, {"HOLD", 0, {0}}};
    ulk_arg e = mk(ULK_ARG_ENUM, 2);
    e.values = vals;
    e.n_values = 3;
    const row_t er[] = {{"label", "OPEN", 1, 1, 2, NULL},
                        {"typo", "OPN", 1, 0, 0, "did you mean 'OPEN'?"},
                        {"case", "closed", 1, 0, 0, "did you mean 'CLOSED'?"},
                        {"far", "SIDEWAYS", 1, 0, 0, "labels: OPEN, CLOSED, HOLD"},
                        {"code_not_label", "2", 1, 0, 0, "no label '2'"}};
    run_rows(&e, er, sizeof er / sizeof er[0]);
    assert_string_equal(ulk_arg_label(&e, 1), "CLOSED");
    assert_null(ulk_arg_label(&e, 3));
    char buf[32];
    ulk_arg_format(&e, 0, buf, sizeof buf);
    assert_string_equal(buf, "HOLD");
    assert_string_equal(ulk_arg_type_name(ULK_ARG_FLOAT32), "float32");
}

/* ulk_arg_format gives text that converts back to the same raw, for every raw of a few
 * calibrated arguments (including scales that are not exact in binary). */
static void test_format_round_trip(void **st)
{
    (void)st;
    const double scales[] = {0.5, 0.01, 0.005, -0.1, 3.3};
    const double offsets[] = {0, 0, 12, 5, -7.25};
    for (size_t k = 0; k < 5; k++) {
        ulk_arg a = mk(k == 3 ? ULK_ARG_SIGNED : ULK_ARG_UNSIGNED, 10);
        a.cal = ULK_CAL_LINEAR;
        a.cal_scale = scales[k];
        a.cal_offset = offsets[k];
        for (uint64_t raw = 0; raw < 1024; raw++) {
            char buf[64];
            ulk_arg_format(&a, raw, buf, sizeof buf);
            ulk_argval v;
            char err[200];
            int rc = ulk_arg_from_text(&a, buf, 1.0, &v, err, sizeof err);
            if (rc != 0 || v.raw != raw) print_message("scale %g raw %llu text %s: %s\n", scales[k], (unsigned long long)raw, buf, err);
            assert_int_equal(rc, 0);
            assert_true(v.raw == raw);
        }
    }
}

/* ---------------------------------------------------------------- exact arithmetic
 * Expected raws below were computed with Python's fractions.Fraction on the decimals as
 * written (python3 -c "from fractions import Fraction as F; ..."), the exact rationals the
 * contract decides on; float32 patterns with struct.pack('<f', ...). */

/* The case of issue 14: eng = 0.7 + 0.1 raw over 32 bits. (v - 0.7) / 0.1 for
 * v = 267639098.85000001485 is 2676390981.5000001485: just above the midpoint, raw
 * 2676390982 = 0x9f867c46. With the coefficients' doubles instead of their decimals the
 * quotient is 2676390981.49999999... and the raw would be 0x9f867c45; an 80-bit and a 128-bit
 * long double disagreed on it. v = 267639098.85 is the exact tie: the smaller raw. */
static const row_t issue_rows[] = {
    {"issue_just_above_tie", "267639098.85000001485", 1, 1, 0x9f867c46, NULL},
    {"issue_exact_tie_smaller_raw", "267639098.85", 1, 1, 0x9f867c45, NULL},
    {"issue_just_below_tie", "267639098.84999999999999999999", 1, 1, 0x9f867c45, NULL},
    {"issue_tie_plus_1e_minus_30", "267639098.850000000000000000000000000001", 1, 1, 0x9f867c46, NULL},
    {"issue_top", "429496730.2", 1, 1, 0xffffffff, NULL},
    {"issue_half_step_above_top", "429496730.25", 1, 1, 0xffffffff, NULL},
    {"issue_beyond_half_step_above_top", "429496730.25000000000000000001", 1, 0, 0, "more than half a raw step"},
};

static void test_issue_tie_linear(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 32);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = 0.1;
    a.cal_offset = 0.7;
    /* a model built in code: the doubles' shortest decimals, 0.1 and 0.7 */
    run_rows(&a, issue_rows, sizeof issue_rows / sizeof issue_rows[0]);
    /* the same with the texts a dictionary gives */
    a.cal_scale_text = "0.1";
    a.cal_offset_text = "0.7";
    run_rows(&a, issue_rows, sizeof issue_rows / sizeof issue_rows[0]);
    /* written with more digits than a double holds: decided on the digits */
    a.cal_scale_text = "0.10000000000000001";
    const row_t r2[] = {{"scale_long_decimal", "267639098.85000001485", 1, 1, 0x9f867c45, NULL}};
    run_rows(&a, r2, 1); /* (v - 0.7) / 0.10000000000000001 = 2676390981.4999998809: raw ...c45 */
    a.cal_scale_text = "0.1";
    /* engineering values: the double nearest to the exact value. Python:
     * float(F('0.7') + F('0.1') * 1) == 0.8, while 0.7 + 0.1 * 1 in doubles is 0.7999999999999999 */
    assert_true(ulk_arg_raw_to_eng(&a, 1) == 0.8);
    assert_true(ulk_arg_raw_to_eng(&a, 12) == 1.9);
    assert_true(ulk_arg_raw_to_eng(&a, 0x9f867c46) == 267639098.9);
    char buf[64];
    ulk_arg_format(&a, 1, buf, sizeof buf);
    assert_string_equal(buf, "0.8");
}

/* A range end is inside the range, whatever its binary rounding: 0.3 as a double is
 * 0.29999999999999998889776975, below the decimal 0.3. */
static void test_range_end_written(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 8);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = 0.1;
    a.cal_scale_text = "0.1";
    a.has_range = 1;
    a.range_min = 0;
    a.range_max = 0.3;
    a.range_min_text = "0";
    a.range_max_text = "0.3";
    const row_t rr[] = {{"range_max_as_written", "0.3", 1, 1, 3, NULL},
                        {"range_max_plus_tiny", "0.30000000000000000001", 1, 0, 0, "outside the range [0, 0.3]"}};
    run_rows(&a, rr, 2);
    ulk_arg f = mk(ULK_ARG_FLOAT32, 32);
    f.has_range = 1;
    f.range_min = -3.4e38;
    f.range_max = 3.4e38;
    f.range_min_text = "-3.4e38";
    f.range_max_text = "3.4e38";
    const row_t fr[] = {{"f32_bound_top", "3.4e38", 1, 1, 0x7f7fc99e, NULL},
                        {"f32_bound_bottom", "-3.4e38", 1, 1, 0xff7fc99e, NULL},
                        {"f32_bound_scientific", "340000000000000000000000000000000000000", 1, 1, 0x7f7fc99e, NULL},
                        {"f32_beyond_bound", "3.4000000000000000001e38", 1, 0, 0, "outside the range"}};
    run_rows(&f, fr, 4);
    /* no texts (a model built in code): the doubles' shortest decimals, so the same */
    f.range_min_text = f.range_max_text = NULL;
    run_rows(&f, fr, 4);
}

/* A polynomial, exact: f(r) = 0.5 + 0.25 r + 1e-20 r^2 (8 bits). Between raw 0 (0.5) and raw 1
 * (0.75 + 1e-20) the midpoint is 0.625 + 5e-21. */
static void test_polynomial_exact_tie(void **st)
{
    (void)st;
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 8);
    double c[3] = {0.5, 0.25, 1e-20};
    char *ct[3] = {"0.5", "0.25", "1e-20"};
    a.cal = ULK_CAL_POLY;
    a.poly = c;
    a.poly_text = ct;
    a.n_poly = 3;
    const row_t pr[] = {{"poly_midpoint_tie", "0.625000000000000000005", 1, 1, 0, NULL},
                        {"poly_above_midpoint", "0.6250000000000000000050000001", 1, 1, 1, NULL},
                        {"poly_decimal_of_midpoint_double", "0.625", 1, 1, 0, NULL}};
    run_rows(&a, pr, 3);
}

/* ulk_fmt_double at the extremes that once went through an undefined conversion to long long
 * (UBSan's float-cast-overflow check runs this in CI). Expected texts: Python's repr() of the
 * same doubles, which is also the shortest round-trip form; whole numbers below 2^53 as
 * Python's json module writes an int (the canonical form uses the same formatter). */
static void test_fmt_double_extremes(void **st)
{
    (void)st;
    static const struct { double v; const char *want; } rows[] = {
        {9223372036854775808.0, "9.223372036854776e+18"},   /* 2^63 (a uint64 raw) */
        {18446744073709551615.0, "1.8446744073709552e+19"}, /* 2^64 - 1 as a double */
        {-9223372036854775808.0, "-9.223372036854776e+18"},
        {3.4028234663852886e38, "3.4028234663852886e+38"},  /* FLT_MAX */
        {-3.4028234663852886e38, "-3.4028234663852886e+38"},
        {1e300, "1e+300"},
        {-1e300, "-1e+300"},
        {1.7976931348623157e308, "1.7976931348623157e+308"},
        {1e15, "1000000000000000"},                        /* whole below 2^53: digits, as json writes an int */
        {9007199254740991.0, "9007199254740991"},           /* 2^53 - 1 */
        {9007199254740992.0, "9007199254740992"},           /* 2^53: shortest %g, 16 digits */
        {1e16, "1e+16"},
        {999999999999999.0, "999999999999999"},
        {-999999999999999.0, "-999999999999999"},
        {-10.0, "-10"},
        {0.0, "0"},
        {-0.0, "-0"},
        {2.5, "2.5"},
        {5e-324, "5e-324"},
    };
    for (size_t i = 0; i < sizeof rows / sizeof rows[0]; i++) {
        char buf[40];
        ulk_fmt_double(rows[i].v, buf, sizeof buf);
        if (strcmp(buf, rows[i].want) != 0)
            fail_msg("ulk_fmt_double(%.17g) gave '%s', expected '%s'", rows[i].v, buf, rows[i].want);
    }
    char buf[40];
    ulk_fmt_double(NAN, buf, sizeof buf);
    assert_non_null(strstr(buf, "nan"));
    ulk_fmt_double(-HUGE_VAL, buf, sizeof buf);
    assert_string_equal(buf, "-inf");
    /* a calibration that reaches 1e300, and a uint64 of 2^63 and above, through the argument
     * formatter (these values reach the formatter from compile and decode --json) */
    ulk_arg a = mk(ULK_ARG_UNSIGNED, 2);
    a.cal = ULK_CAL_LINEAR;
    a.cal_scale = 1e300;
    assert_true(ulk_arg_raw_to_eng(&a, 3) == 3e300);
    ulk_arg_format(&a, 3, buf, sizeof buf);
    assert_string_equal(buf, "3e+300");
    ulk_arg u = mk(ULK_ARG_UNSIGNED, 64);
    assert_true(ulk_arg_raw_to_eng(&u, 0x8000000000000000ull) == 9223372036854775808.0);
    ulk_fmt_double(ulk_arg_raw_to_eng(&u, UINT64_MAX), buf, sizeof buf);
    assert_string_equal(buf, "1.8446744073709552e+19");
}

/* ---- through the dictionary loader: what validate decides, exactly */
static const char EXACT_YAML[] =
    "dictionary: {name: exact-cases, version: \"1\"}\n"
    "link:\n"
    "  profile: subbit\n"
    "  bit_rate: 62.5\n"
    "  subbits: {zero: \"0011\", one: \"1100\", idle: \"0101\"}\n"
    "  subcarrier: {frequency: 500, waveform: sine, amplitude: 0.8}\n"
    "  framing: {preamble: 16, gap: 4, postamble: 2}\n"
    "  word:\n"
    "    vehicle_address: {bits: 4, value: 0xA}\n"
    "    system_address_bits: 3\n"
    "    opcode_bits: 5\n"
    "    argument_bits: 64\n"
    "    check: parity-even\n"
    "systems:\n"
    "  - {name: EPS, address: 5}\n"
    "commands:\n"
    "  - mnemonic: SET\n"
    "    system: EPS\n"
    "    opcode: 1\n"
    "    arguments:\n"
    "      - %s\n";

typedef struct {
    const char *row;
    const char *arg;    /* the argument's flow mapping */
    const char *err;    /* NULL: loads; else a fragment of the first error */
    const char *value;  /* when it loads: a value to convert (NULL: none) */
    uint64_t raw;       /* and its raw */
} dict_case;

static const dict_case dict_cases[] = {
    /* 1 + 1e-20 r: steps of 1e-20 vanish in an 80-bit long double (its ulp at 1 is 1.1e-19),
     * so the sampled check called it flat on x86-64 and not on aarch64. Exactly it rises. */
    {"nearly_flat_polynomial_loads", "{name: v, type: unsigned, bits: 8, calibration: {polynomial: [1, 1e-20]}}",
     NULL, "1.000000000000000000015", 1}, /* midpoint of raws 1 and 2: the smaller */
    {"nearly_flat_polynomial_above_tie", "{name: v, type: unsigned, bits: 8, calibration: {polynomial: [1, 1e-20]}}",
     NULL, "1.0000000000000000000150000001", 2},
    /* r - 1e-12 r^2 over 64 bits: the step 1 - 1e-12 (2r + 1) changes sign between r = 499999999999
     * and 500000000000 (f(500000000001) < f(500000000000)). */
    {"wide_polynomial_turn_found_exactly",
     "{name: v, type: unsigned, bits: 64, calibration: {polynomial: [0, 1, -0.000000000001]}}",
     "it turns near raw 500000000001", NULL, 0},
    /* 3r - r^2 over 2 bits: 0, 2, 2, 0 */
    {"polynomial_flat_step", "{name: v, type: unsigned, bits: 2, calibration: {polynomial: [0, 3, -1]}}",
     "it is flat near raw 2", NULL, 0},
    /* r^3 over signed 64 bits: the step 3r^2 + 3r + 1 is never 0 */
    {"cubic_signed_64_loads", "{name: v, type: signed, bits: 64, calibration: {polynomial: [0, 0, 0, 1]}}",
     NULL, "-8", 0xfffffffffffffffeull},
    {"float32_range_written_bounds",
     "{name: v, type: float32, range: [-3.4e38, 3.4e38]}", NULL, "3.4e38", 0x7f7fc99e},
    /* FLT_MAX as usually printed (3.4028235e38) is above FLT_MAX but rounds to it: a valid end */
    {"float32_range_printed_flt_max", "{name: v, type: float32, range: [0, 3.4028235e38]}", NULL,
     "3.4028235e38", 0x7f7fffff},
    {"float32_range_beyond", "{name: v, type: float32, range: [0, 3.4028236e38]}",
     "beyond what float32 can represent", NULL, 0},
    /* 0.1 * 255 = 25.5 exactly: the end is representable (no tolerance needed) */
    {"calibrated_range_end_exact", "{name: v, type: unsigned, bits: 8, calibration: {scale: 0.1}, range: [0, 25.5]}",
     NULL, "25.5", 255},
    {"calibrated_range_end_beyond", "{name: v, type: unsigned, bits: 8, calibration: {scale: 0.1}, range: [0, 25.500000000000000001]}",
     "cannot be represented", NULL, 0},
    {"range_min_above_max_by_1e_minus_30", "{name: v, type: float32, range: [1.000000000000000000000000000001, 1]}",
     "has MIN above MAX", NULL, 0},
    {"coefficient_beyond_exact_limit", "{name: v, type: unsigned, bits: 8, calibration: {scale: 1e-2000}}",
     "cannot be kept exactly", NULL, 0},
    {"calibration_beyond_double", "{name: v, type: unsigned, bits: 16, calibration: {polynomial: [0, 1e300, 1e300]}}",
     "beyond the largest double", NULL, 0},
};

static void test_dictionary_exact(void **st)
{
    (void)st;
    for (size_t i = 0; i < sizeof dict_cases / sizeof dict_cases[0]; i++) {
        const dict_case *c = &dict_cases[i];
        char text[4096];
        snprintf(text, sizeof text, EXACT_YAML, c->arg);
        ulk_diag *dg = ulk_diag_create();
        ulk_dict *d = NULL;
        int rc = ulk_dict_load_mem("exact.yaml", text, strlen(text), 0, &d, dg);
        print_message("row %s: rc %d\n", c->row, rc);
        if (c->err) {
            if (rc != ULK_EPARSE || !ulk_diag_first_error(dg) || !strstr(ulk_diag_first_error(dg)->msg, c->err)) {
                ulk_diag_print(dg, stderr);
                fail_msg("row %s: expected a refusal with '%s'", c->row, c->err);
            }
        } else {
            if (rc != 0) {
                ulk_diag_print(dg, stderr);
                fail_msg("row %s: expected the dictionary to load", c->row);
            }
            if (c->value) {
                const ulk_arg *a = &ulk_dict_find_command(d, "SET")->args[0];
                ulk_argval v;
                char err[300] = "";
                rc = ulk_arg_from_text(a, c->value, 1.0, &v, err, sizeof err);
                if (rc != 0 || v.raw != c->raw)
                    fail_msg("row %s: %s -> rc %d raw 0x%llx (%s), expected 0x%llx", c->row, c->value, rc,
                             (unsigned long long)v.raw, err, (unsigned long long)c->raw);
            }
        }
        ulk_dict_destroy(d);
        ulk_diag_destroy(dg);
    }
}

/* Two dictionaries whose scales differ only beyond a double's precision encode different bits
 * (test_issue_tie_linear), so they must not share a canonical form and hash; written the usual
 * way (0.1, 0.100) the canonical form keeps the double's short text. */
static void test_canonical_keeps_exact_digits(void **st)
{
    (void)st;
    const char *scales[3] = {"0.1", "0.100", "0.10000000000000000001"};
    char sha[3][65];
    char *canon[3];
    for (int i = 0; i < 3; i++) {
        char arg[200], text[4096];
        snprintf(arg, sizeof arg, "{name: v, type: unsigned, bits: 32, calibration: {scale: %s, offset: 0.7}}", scales[i]);
        snprintf(text, sizeof text, EXACT_YAML, arg);
        ulk_diag *dg = ulk_diag_create();
        ulk_dict *d = NULL;
        if (ulk_dict_load_mem("canon.yaml", text, strlen(text), 0, &d, dg) != 0) {
            ulk_diag_print(dg, stderr);
            fail_msg("scale %s: the dictionary should load", scales[i]);
        }
        memcpy(sha[i], d->sha256, 65);
        if (ulk_dict_canonical(d, &canon[i], NULL) != 0) fail_msg("scale %s: no canonical form", scales[i]);
        ulk_dict_destroy(d);
        ulk_diag_destroy(dg);
    }
    if (!strstr(canon[0], "\"scale\":0.1}")) fail_msg("canonical form of 0.1: %s", canon[0]);
    if (strcmp(sha[0], sha[1]) != 0) fail_msg("0.1 and 0.100 are one value, yet hashes differ");
    if (!strstr(canon[2], "\"scale\":10000000000000000001e-20}")) fail_msg("exact digits not kept: %s", canon[2]);
    if (strcmp(sha[0], sha[2]) == 0) fail_msg("0.1 and 0.10000000000000000001 share a hash");
    for (int i = 0; i < 3; i++) free(canon[i]);
}

int main(void)
{
    const struct CMUnitTest tests[] = {
        cmocka_unit_test(test_calibration_half),
        cmocka_unit_test(test_calibration_two_signed),
        cmocka_unit_test(test_calibration_decreasing),
        cmocka_unit_test(test_calibration_polynomial),
        cmocka_unit_test(test_integers),
        cmocka_unit_test(test_float32),
        cmocka_unit_test(test_boolean_enum),
        cmocka_unit_test(test_format_round_trip),
        cmocka_unit_test(test_issue_tie_linear),
        cmocka_unit_test(test_range_end_written),
        cmocka_unit_test(test_polynomial_exact_tie),
        cmocka_unit_test(test_fmt_double_extremes),
        cmocka_unit_test(test_dictionary_exact),
        cmocka_unit_test(test_canonical_keeps_exact_digits),
    };
    return cmocka_run_group_tests(tests, NULL, NULL);
}
