/* src/argval.c - argument values: the operator's engineering text <-> the raw field
 * (docs/dictionary.md section 4: exact arithmetic and the rounding rules).
 *
 * Why exact: the contract decides calibration ties, range ends and the half-step refusal on
 * the decimal value *as written*, not on a binary rounding of it, and the same text must give
 * the same bits on every machine. A value is therefore kept as the exact rational its text
 * denotes (GMP, src/exact.h); calibrations are integer polynomials over one denominator
 * (ulk_calq), so f(raw) and the midpoints between neighbouring raws are exact integers and
 * every comparison is an exact one. A binary value appears only at the end, by one correct
 * rounding: a float32 field (nearest, ties to even) and the engineering value of a raw (the
 * double nearest to the exact f(raw)). Polynomials are monotonic (the dictionary validator
 * checks it exactly), so the nearest raw is found by bisection over the raw range and a
 * comparison of the two neighbours; a tie goes to the smaller raw.
 */
#include <stdint.h>
#include <ctype.h>
#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/dict.h"
#include "exact.h"
#include "util.h"

#define MAX_VALUE_TEXT 1000 /* longest value text taken (bytes) */
#define MAX_VALUE_EXP10 100000 /* exponents beyond are clamped (src/exact.h: compares the same) */

typedef __int128 i128;

/* An operator's number, exact. */
typedef struct {
    int neg;    /* a '-' was written (-0 keeps its sign in a float32) */
    mpq_t q;    /* the exact value, scale applied */
    int is_int; /* q is a whole number */
    int fits;   /* is_int and -2^63 <= q < 2^64: ival valid */
    i128 ival;
} num_t;

static void seterr(char *err, size_t errlen, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void seterr(char *err, size_t errlen, const char *fmt, ...)
{
    if (!err || !errlen) return;
    va_list ap;
    va_start(ap, fmt);
    vsnprintf(err, errlen, fmt, ap);
    va_end(ap);
}

const char *ulk_arg_type_name(ulk_arg_type t)
{
    switch (t) {
    case ULK_ARG_UNSIGNED: return "unsigned";
    case ULK_ARG_SIGNED: return "signed";
    case ULK_ARG_BOOLEAN: return "boolean";
    case ULK_ARG_ENUM: return "enum";
    case ULK_ARG_FLOAT32: return "float32";
    default: return "?";
    }
}

/* 10^k for a scale that is exactly a power of ten as a double (the SI prefixes), else 99.
 * The literals are correctly rounded by the compiler, as strtod would round them. */
static int scale_pow10(double scale)
{
    static const double p10[49] = {1e-24, 1e-23, 1e-22, 1e-21, 1e-20, 1e-19, 1e-18, 1e-17, 1e-16, 1e-15, 1e-14, 1e-13, 1e-12, 1e-11, 1e-10, 1e-9, 1e-8, 1e-7, 1e-6, 1e-5, 1e-4, 1e-3, 1e-2, 1e-1, 1e0, 1e1, 1e2, 1e3, 1e4, 1e5, 1e6, 1e7, 1e8, 1e9, 1e10, 1e11, 1e12, 1e13, 1e14, 1e15, 1e16, 1e17, 1e18, 1e19, 1e20, 1e21, 1e22, 1e23, 1e24};
    if (scale == 1.0) return 0;
    for (int k = 0; k < 49; k++)
        if (p10[k] == scale) return k - 24;
    return 99;
}

static void i128_to_dec(i128 v, char *buf)
{
    char tmp[48];
    int n = 0, neg = v < 0;
    unsigned __int128 u = neg ? (unsigned __int128)(-(v + 1)) + 1 : (unsigned __int128)v;
    do { tmp[n++] = (char)('0' + (int)(u % 10)); u /= 10; } while (u);
    int j = 0;
    if (neg) buf[j++] = '-';
    while (n) buf[j++] = tmp[--n];
    buf[j] = 0;
}

/* Checks the syntax of text (whole string) for a clear message; 0, or -1 with a reason.
 * Command lists take decimals and 0x / 0b integers of at most 64 bits. */
static int num_syntax(const char *text, char *err, size_t errlen)
{
    size_t tl = strlen(text);
    if (tl == 0) { seterr(err, errlen, "empty value"); return -1; }
    if (tl > MAX_VALUE_TEXT) { seterr(err, errlen, "value text is longer than %d characters", MAX_VALUE_TEXT); return -1; }
    const char *p = text;
    if (*p == '+' || *p == '-') p++;
    if (p[0] == '0' && (p[1] == 'x' || p[1] == 'X' || p[1] == 'b' || p[1] == 'B')) {
        int base = (p[1] == 'x' || p[1] == 'X') ? 16 : 2;
        p += 2;
        if (!*p) { seterr(err, errlen, "'%s' has no digits after the base prefix", text); return -1; }
        unsigned __int128 v = 0;
        for (; *p; p++) {
            int d;
            if (isdigit((unsigned char)*p)) d = *p - '0';
            else if (isxdigit((unsigned char)*p)) d = tolower((unsigned char)*p) - 'a' + 10;
            else d = 99;
            if (d >= base) {
                seterr(err, errlen, "'%s' is not a %s integer (unexpected '%c')", text,
                       base == 16 ? "hexadecimal" : "binary", *p);
                return -1;
            }
            v = v * (unsigned)base + (unsigned)d;
            if (v > (unsigned __int128)UINT64_MAX) {
                seterr(err, errlen, "value %s is beyond 64 bits", text);
                return -1;
            }
        }
        if (text[0] == '-' && v > ((unsigned __int128)1 << 63)) {
            seterr(err, errlen, "value %s is beyond 64 bits", text);
            return -1;
        }
        return 0;
    }
    size_t ni = 0, nf = 0;
    while (isdigit((unsigned char)p[ni])) ni++;
    p += ni;
    if (*p == '.') {
        p++;
        while (isdigit((unsigned char)p[nf])) nf++;
        p += nf;
    }
    if (ni + nf == 0) { seterr(err, errlen, "'%s' is not a number", text); return -1; }
    if (*p == 'e' || *p == 'E') {
        const char *q = p + 1;
        if (*q == '+' || *q == '-') q++;
        if (!isdigit((unsigned char)*q)) { seterr(err, errlen, "'%s' is not a number (bad exponent)", text); return -1; }
        while (isdigit((unsigned char)*q)) q++;
        p = q;
    }
    if (*p) { seterr(err, errlen, "'%s' is not a number (unexpected '%c')", text, *p); return -1; }
    return 0;
}

/* Parses text (whole string) into x (x->q initialised by the caller); scale multiplies it.
 * 0, or -1 with a reason. */
static int num_parse(const char *text, double scale, num_t *x, char *err, size_t errlen)
{
    x->neg = x->is_int = x->fits = 0;
    x->ival = 0;
    if (num_syntax(text, err, errlen) < 0) return -1;
    int rc = ulk_q_set_text(x->q, text, MAX_VALUE_EXP10, 1, &x->neg);
    if (rc) { seterr(err, errlen, "'%s' is not a number", text); return -1; }
    if (scale != 1.0) {
        int k10 = scale_pow10(scale);
        mpq_t f;
        mpq_init(f);
        if (k10 != 99) {
            mpq_set_ui(f, 1, 1);
            mpz_ui_pow_ui(k10 >= 0 ? mpq_numref(f) : mpq_denref(f), 10, (unsigned long)abs(k10));
            mpq_canonicalize(f);
        } else {
            ulk_q_set_double_short(f, scale);
        }
        mpq_mul(x->q, x->q, f);
        mpq_clear(f);
    }
    x->is_int = mpz_cmp_ui(mpq_denref(x->q), 1) == 0;
    if (x->is_int && mpz_sizeinbase(mpq_numref(x->q), 2) <= 65) {
        i128 v;
        if (ulk_z_get_i128(mpq_numref(x->q), &v) == 0 && v >= -(((i128)1) << 63) && v <= (i128)UINT64_MAX) {
            x->ival = v;
            x->fits = 1;
        }
    }
    return 0;
}

static void fmt_sig(double v, int p, char *buf, size_t len);
/* Shortest text that reads back to v, plain notation where it stays short. */
static void fmt_short(double v, char *buf, size_t len)
{
    for (int p = 1; p <= 17; p++) {
        fmt_sig(v, p, buf, len);
        if (strtod(buf, NULL) == v) return;
    }
}

/* Raw range of an integer argument as integers. */
static void raw_range(const ulk_arg *a, i128 *lo, i128 *hi)
{
    if (a->type == ULK_ARG_SIGNED) {
        *lo = -(((i128)1) << (a->bits - 1));
        *hi = (((i128)1) << (a->bits - 1)) - 1;
    } else {
        *lo = 0;
        *hi = (((i128)1) << a->bits) - 1;
    }
}

static int is_calibrated(const ulk_arg *a)
{
    return (a->type == ULK_ARG_UNSIGNED || a->type == ULK_ARG_SIGNED) &&
           (a->cal == ULK_CAL_LINEAR || (a->cal == ULK_CAL_POLY && a->n_poly > 0 && a->poly));
}

static uint64_t mask_bits(int bits) { return bits >= 64 ? UINT64_MAX : (((uint64_t)1 << bits) - 1); }

/* Message text of f(r): the double nearest to it. */
static void fmt_cal(const ulk_calq *k, i128 r, char *buf, size_t len)
{
    mpq_t v;
    mpq_init(v);
    ulk_calq_value(k, v, r);
    fmt_short(ulk_q_to_double(v), buf, len);
    mpq_clear(v);
}

/* g(r) = s * (numerator of f(r)): non-decreasing in r for a monotonic calibration. */
static void cal_g(const ulk_calq *k, int s, i128 r, mpz_t out, mpz_t tmp)
{
    ulk_z_set_i128(tmp, r);
    ulk_calq_num(k, out, tmp);
    if (s < 0) mpz_neg(out, out);
}

/* Nearest raw of a calibrated argument (docs/dictionary.md section 4): exact. With
 * X = s * x * den and g(r) = s * den * f(r) (integers), the smallest raw u with g(u) >= X is
 * found by bisection; the midpoint between two neighbours decides, compared as
 * 2X against g(a) + g(b); a tie goes to the smaller raw. 0, or -1 with a reason. */
static int cal_nearest(const ulk_arg *a, const num_t *x, const char *text, i128 *out, char *err, size_t errlen)
{
    const ulk_calq *k = ulk_calq_get(a);
    if (!k) {
        seterr(err, errlen, "the calibration of '%s' has a coefficient that is not an exact number",
               a->name ? a->name : "?");
        return -1;
    }
    i128 lo, hi;
    raw_range(a, &lo, &hi);
    /* scratch numbers kept per thread (the compiler converts many values) */
    static _Thread_local mpz_t g1, g2, t;
    static _Thread_local mpq_t X, X2, y;
    static _Thread_local int scratch_init;
    if (!scratch_init) {
        mpz_inits(g1, g2, t, NULL);
        mpq_init(X);
        mpq_init(X2);
        mpq_init(y);
        scratch_init = 1;
    }
    cal_g(k, 1, lo, g1, t);
    cal_g(k, 1, hi, g2, t);
    const int s = mpz_cmp(g2, g1) >= 0 ? 1 : -1;
    mpz_mul(mpq_numref(X), mpq_numref(x->q), k->den);
    mpz_set(mpq_denref(X), mpq_denref(x->q));
    mpq_canonicalize(X);
    if (s < 0) mpq_neg(X, X);
    mpq_mul_2exp(X2, X, 1);
#define G(r, z) cal_g(k, s, (r), (z), t)
    /* sign of (2X - (g1 + g2)): where x lies against the midpoint of g1 and g2 */
#define HALF() (mpz_add(t, g1, g2), mpq_cmp_z(X2, t))
    int rc = 0;
    i128 u;
    if (k->n == 2) {
        /* linear: g(r) = s (c0 + c1 r) rises with r, so u = ceil((s X - c0) / c1), clamped */
        mpq_set(y, X);
        if (s < 0) mpq_neg(y, y);
        mpz_mul(t, mpq_denref(y), k->c[0]);
        mpz_sub(mpq_numref(y), mpq_numref(y), t);
        mpz_mul(mpq_denref(y), mpq_denref(y), k->c[1]);
        mpq_canonicalize(y);                          /* (x den - c0) / c1 */
        mpz_cdiv_q(g1, mpq_numref(y), mpq_denref(y)); /* ceiling */
        ulk_z_set_i128(g2, lo);
        if (mpz_cmp(g1, g2) < 0) u = lo;
        else {
            ulk_z_set_i128(g2, hi);
            if (mpz_cmp(g1, g2) > 0) u = hi + 1;
            else ulk_z_get_i128(g1, &u);
        }
    } else {
        i128 l = lo, h = hi + 1;
        while (l < h) {
            i128 mid = l + (h - l) / 2;
            G(mid, g1);
            if (mpq_cmp_z(X, g1) <= 0) h = mid;
            else l = mid + 1;
        }
        u = l;
    }
    i128 pick = lo;
    char b1[64], b2[64];
    if (u == lo) {
        G(lo, g2);
        if (mpq_cmp_z(X, g2) != 0) {
            G(lo - 1, g1); /* exactly half a step below f(lo) is accepted */
            if (HALF() < 0) {
                fmt_cal(k, lo, b1, sizeof b1);
                i128_to_dec(lo, b2);
                seterr(err, errlen,
                       "value %s is more than half a raw step from the nearest calibrated value %s (raw %s)",
                       text, b1, b2);
                rc = -1;
            }
        }
        pick = lo;
    } else if (u == hi + 1) {
        G(hi, g1);
        G(hi + 1, g2);
        if (HALF() > 0) {
            fmt_cal(k, hi, b1, sizeof b1);
            i128_to_dec(hi, b2);
            seterr(err, errlen,
                   "value %s is more than half a raw step from the nearest calibrated value %s (raw %s)",
                   text, b1, b2);
            rc = -1;
        }
        pick = hi;
    } else {
        /* g(u-1) < X <= g(u): the nearer one, the smaller raw (u-1) on a tie */
        G(u - 1, g1);
        G(u, g2);
        pick = HALF() <= 0 ? u - 1 : u;
    }
    /* a flat stretch (a model built in code may have one; the validator refuses them): the
     * smallest raw of equal value wins */
    if (rc == 0 && pick > lo) {
        G(pick - 1, g1);
        G(pick, g2);
        if (mpz_cmp(g1, g2) == 0) {
            i128 l2 = lo, h2 = pick;
            while (l2 < h2) {
                i128 mid = l2 + (h2 - l2) / 2;
                G(mid, g1);
                if (mpz_cmp(g1, g2) >= 0) h2 = mid;
                else l2 = mid + 1;
            }
            pick = l2;
        }
    }
#undef G
#undef HALF
    if (rc == 0) *out = pick;
    return rc;
}

static int range_check(const ulk_arg *a, const num_t *x, const char *text, char *err, size_t errlen)
{
    if (!a->has_range) return 0;
    mpq_srcptr lo, hi;
    if (ulk_arg_range_get(a, &lo, &hi) != 0) {
        seterr(err, errlen, "the range of '%s' is not an exact number", a->name ? a->name : "?");
        return -1;
    }
    if (mpq_cmp(x->q, lo) < 0 || mpq_cmp(x->q, hi) > 0) {
        char b1[40], b2[40];
        fmt_short(a->range_min, b1, sizeof b1);
        fmt_short(a->range_max, b2, sizeof b2);
        seterr(err, errlen, "value %s is outside the range [%s, %s]%s%s", text, b1, b2,
               a->units ? " " : "", a->units ? a->units : "");
        return -1;
    }
    return 0;
}

static int eq_nocase(const char *a, const char *b)
{
    for (; *a && *b; a++, b++)
        if (tolower((unsigned char)*a) != tolower((unsigned char)*b)) return 0;
    return *a == *b;
}

/* The numeric part of ulk_arg_from_text (x->q initialised and cleared by the caller). */
static int convert_number(const ulk_arg *a, const char *text, double scale, num_t *x, ulk_argval *out,
                          char *err, size_t errlen)
{
    if (num_parse(text, scale, x, err, errlen) < 0) return ULK_EPARSE;
    char shown[MAX_VALUE_TEXT + 64];
    if (scale != 1.0) {
        char sb[40];
        fmt_short(scale, sb, sizeof sb);
        snprintf(shown, sizeof shown, "%s (x%s)", text, sb);
    } else {
        snprintf(shown, sizeof shown, "%s", text);
    }
    if (range_check(a, x, shown, err, errlen) < 0) return ULK_EPARSE;

    if (a->type == ULK_ARG_FLOAT32) {
        /* rounded once from the exact value: nearest, ties to even (IEEE 754 binary32) */
        int ovf = 0;
        double d = ulk_q_round_binary(x->q, 24, -126, 127, &ovf);
        if (ovf) {
            seterr(err, errlen, "value %s is beyond the largest finite float32 (%g)", shown, (double)FLT_MAX);
            return ULK_EPARSE;
        }
        float f = (float)d; /* exact: d is a binary32 value */
        if (d == 0.0 && x->neg) f = -0.0f;
        uint32_t bitsv;
        memcpy(&bitsv, &f, 4);
        out->raw = bitsv;
        out->eng = (double)f;
        return 0;
    }

    if (is_calibrated(a)) {
        i128 r;
        if (cal_nearest(a, x, shown, &r, err, errlen) < 0) return ULK_EPARSE;
        out->raw = (uint64_t)r & mask_bits(a->bits);
        out->eng = ulk_arg_raw_to_eng(a, out->raw);
        return 0;
    }

    /* plain integer */
    if (!x->is_int) {
        seterr(err, errlen, "value %s is not a whole number (argument '%s' takes integers)", shown,
               a->name ? a->name : "?");
        return ULK_EPARSE;
    }
    i128 lo, hi;
    raw_range(a, &lo, &hi);
    if (!x->fits || x->ival < lo || x->ival > hi) {
        char b1[48], b2[48];
        i128_to_dec(lo, b1);
        i128_to_dec(hi, b2);
        if (!x->fits)
            seterr(err, errlen, "value %s is beyond 64 bits", shown);
        else
            seterr(err, errlen, "value %s does not fit in %d %s bits [%s, %s]", shown, a->bits,
                   ulk_arg_type_name(a->type), b1, b2);
        return ULK_EPARSE;
    }
    out->raw = (uint64_t)x->ival & mask_bits(a->bits);
    out->eng = (double)x->ival;
    return 0;
}

int ulk_arg_from_text(const ulk_arg *a, const char *text, double scale, ulk_argval *out, char *err,
                      size_t errlen)
{
    if (!a || !text || !out) { seterr(err, errlen, "no value"); return ULK_EPARSE; }
    out->raw = 0;
    out->eng = 0;
    if (a->type == ULK_ARG_BOOLEAN) {
        static const char *t[] = {"true", "on", "yes", "1"}, *f[] = {"false", "off", "no", "0"};
        for (int i = 0; i < 4; i++) {
            if (eq_nocase(text, t[i])) { out->raw = 1; out->eng = 1; return 0; }
            if (eq_nocase(text, f[i])) { out->raw = 0; out->eng = 0; return 0; }
        }
        seterr(err, errlen, "'%.60s' is not a boolean (expected true/false, on/off, yes/no or 1/0)", text);
        return ULK_EPARSE;
    }
    if (a->type == ULK_ARG_ENUM) {
        for (int i = 0; i < a->n_values; i++)
            if (a->values[i].label && !strcmp(a->values[i].label, text)) {
                out->raw = (uint64_t)a->values[i].code & mask_bits(a->bits);
                out->eng = (double)a->values[i].code;
                return 0;
            }
        const char *cands[256];
        size_t nc = 0;
        for (int i = 0; i < a->n_values && nc < 256; i++) cands[nc++] = a->values[i].label;
        const char *sug = ulk_suggest(text, cands, nc);
        if (sug)
            seterr(err, errlen, "no label '%.60s' for argument '%s' (did you mean '%s'?)", text, a->name, sug);
        else {
            char list[300] = "";
            size_t used = 0;
            for (int i = 0; i < a->n_values && used + 40 < sizeof list; i++)
                used += (size_t)snprintf(list + used, sizeof list - used, "%s%s", i ? ", " : "", a->values[i].label);
            seterr(err, errlen, "no label '%.60s' for argument '%s' (labels: %s)", text, a->name, list);
        }
        return ULK_EPARSE;
    }
    if (a->bits < 1 || a->bits > 64 || (a->type == ULK_ARG_FLOAT32 && a->bits != 32)) {
        seterr(err, errlen, "argument '%s' has an unusable width of %d bits", a->name ? a->name : "?", a->bits);
        return ULK_EPARSE;
    }
    num_t x;
    mpq_init(x.q);
    int rc = convert_number(a, text, scale, &x, out, err, errlen);
    mpq_clear(x.q);
    return rc;
}

static int64_t sign_extend(uint64_t raw, int bits)
{
    if (bits >= 64) return (int64_t)raw;
    uint64_t m = (uint64_t)1 << (bits - 1);
    raw &= mask_bits(bits);
    return (int64_t)((raw ^ m) - m);
}

double ulk_arg_raw_to_eng(const ulk_arg *a, uint64_t raw)
{
    switch (a->type) {
    case ULK_ARG_BOOLEAN: return (double)(raw & 1);
    case ULK_ARG_ENUM:
        for (int i = 0; i < a->n_values; i++)
            if (((uint64_t)a->values[i].code & mask_bits(a->bits)) == (raw & mask_bits(a->bits)))
                return (double)a->values[i].code;
        return (double)raw;
    case ULK_ARG_FLOAT32: {
        uint32_t b = (uint32_t)raw;
        float f;
        memcpy(&f, &b, 4);
        return (double)f;
    }
    default: break;
    }
    int bits = a->bits < 1 ? 1 : a->bits > 64 ? 64 : a->bits;
    i128 r = a->type == ULK_ARG_SIGNED ? (i128)sign_extend(raw, bits) : (i128)(raw & mask_bits(bits));
    if (is_calibrated(a)) {
        /* the double nearest to the exact f(r): the same on every machine */
        const ulk_calq *k = ulk_calq_get(a);
        double v = NAN;
        if (k) {
            mpq_t q;
            mpq_init(q);
            ulk_calq_value(k, q, r);
            v = ulk_q_to_double(q);
            mpq_clear(q);
        }
        return v;
    }
    return (double)r;
}

const char *ulk_arg_label(const ulk_arg *a, int64_t code)
{
    for (int i = 0; i < a->n_values; i++)
        if (a->values[i].code == code) return a->values[i].label;
    return NULL;
}

/* v with p significant digits, in plain notation where it stays short (90, not 9e+01). */
static void fmt_sig(double v, int p, char *buf, size_t len)
{
    snprintf(buf, len, "%.*g", p, v);
    char *e = strchr(buf, 'e');
    if (!e) return;
    int ex = atoi(e + 1);
    if (ex >= -5 && ex < 16) {
        int dec = p - 1 - ex;
        snprintf(buf, len, "%.*f", dec < 0 ? 0 : dec, v);
    }
}

void ulk_arg_format(const ulk_arg *a, uint64_t raw, char *buf, size_t len)
{
    if (!buf || !len) return;
    int bits = a->bits < 1 ? 1 : a->bits > 64 ? 64 : a->bits;
    switch (a->type) {
    case ULK_ARG_BOOLEAN: snprintf(buf, len, "%s", (raw & 1) ? "true" : "false"); return;
    case ULK_ARG_ENUM:
        for (int i = 0; i < a->n_values; i++)
            if (((uint64_t)a->values[i].code & mask_bits(bits)) == (raw & mask_bits(bits))) {
                snprintf(buf, len, "%s", a->values[i].label);
                return;
            }
        snprintf(buf, len, "0x%llx", (unsigned long long)(raw & mask_bits(bits)));
        return;
    case ULK_ARG_FLOAT32: {
        uint32_t b = (uint32_t)raw;
        float f;
        memcpy(&f, &b, 4);
        for (int p = 1; p <= 9; p++) {
            fmt_sig((double)f, p, buf, len);
            float g = strtof(buf, NULL);
            if (memcmp(&g, &f, 4) == 0) return;
        }
        return;
    }
    default: break;
    }
    if (!is_calibrated(a)) {
        if (a->type == ULK_ARG_SIGNED) snprintf(buf, len, "%lld", (long long)sign_extend(raw, bits));
        else snprintf(buf, len, "%llu", (unsigned long long)(raw & mask_bits(bits)));
        return;
    }
    /* the shortest decimal that compiles back to the same raw */
    double eng = ulk_arg_raw_to_eng(a, raw);
    for (int p = 1; p <= 17; p++) {
        fmt_sig(eng, p, buf, len);
        ulk_argval v;
        if (ulk_arg_from_text(a, buf, 1.0, &v, NULL, 0) == 0 && v.raw == (raw & mask_bits(bits))) return;
    }
    snprintf(buf, len, "%.17g", eng);
}
