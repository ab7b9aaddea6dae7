/* src/argval.c - argument values: the operator's engineering text <-> the raw field
 * (subbit-profile.md section 2).
 *
 * Why exact: the contract decides calibration ties and the half-step refusal on the decimal
 * value *as written*, not on its binary rounding. A value is therefore kept as an exact
 * decimal (canonical digits and exponent) and every comparison against a binary value m
 * (range ends, midpoints between calibrated values) is made exactly: the nearest long double
 * settles it unless it equals m, and only then the value is re-read rounded down and up
 * (strtold honours the rounding mode) to learn on which side of m the decimal lies.
 *
 * Calibrated values f(raw) and their midpoints are computed in long double (64-bit
 * mantissa): exact for linear and low-order polynomial calibrations of raws up to ~2^10
 * with binary-exact coefficients, and otherwise within an ulp of long double, far below a
 * raw step. Polynomials are monotonic (the dictionary validator checks it), so the nearest
 * raw is found by bisection over the raw range and a comparison of the two neighbours.
 */
#include <stdint.h>
#include <ctype.h>
#include <errno.h>
#include <fenv.h>
#include <float.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/dict.h"
#include "util.h"

#define MAX_VALUE_TEXT 1000 /* longest value text taken (bytes) */

typedef __int128 i128;

/* An operator's number, exact. */
typedef struct {
    int neg;
    char canon[MAX_VALUE_TEXT + 48]; /* "[-]D...De[-]N": the exact value, scale applied */
    int is_int;                      /* the value is a whole number */
    int fits;                        /* is_int and -2^63 <= v < 2^64: ival valid */
    i128 ival;
    int based;                       /* written in hex or binary */
    long double xn;                  /* nearest long double */
    int exact_known, exact;          /* lazily: is xn the value exactly? */
    long double xd, xu;              /* rounded down / up (valid when exact_known && !exact) */
    int approx;                      /* a non-decimal scale was applied: xn is all we know */
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

/* i128 -> long double through 64-bit integers where the value fits (every raw value and every
 * accepted integer does): the 128-bit conversion helper is a libgcc routine that some tools
 * (valgrind's x87 emulation) compute wrongly, and there is no need to depend on it. */
static long double i128_ld(i128 v)
{
    if (v >= INT64_MIN && v <= INT64_MAX) return (long double)(int64_t)v;
    if (v > 0 && v <= (i128)UINT64_MAX) return (long double)(uint64_t)v;
    return (long double)v;
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

/* Parses text (whole string) into x; scale multiplies it. 0, or -1 with a reason. */
static int num_parse(const char *text, double scale, num_t *x, char *err, size_t errlen)
{
    memset(x, 0, sizeof *x);
    size_t tl = strlen(text);
    if (tl == 0) { seterr(err, errlen, "empty value"); return -1; }
    if (tl > MAX_VALUE_TEXT) { seterr(err, errlen, "value text is longer than %d characters", MAX_VALUE_TEXT); return -1; }
    const char *p = text;
    if (*p == '+' || *p == '-') { x->neg = *p == '-'; p++; }
    int k10 = scale_pow10(scale);

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
        x->based = 1;
        x->is_int = 1;
        x->ival = x->neg ? -(i128)v : (i128)v;
        if (x->ival < -(((i128)1) << 63)) { seterr(err, errlen, "value %s is beyond 64 bits", text); return -1; }
        x->fits = 1;
        char dec[48];
        i128_to_dec(x->ival, dec);
        snprintf(x->canon, sizeof x->canon, "%se0", dec);
        if (k10 != 0) {
            /* a hex value never carries a unit; a caller-supplied scale still applies */
            if (k10 == 99) { x->approx = 1; x->xn = i128_ld(x->ival) * scale; x->is_int = 0; x->fits = 0; return 0; }
            snprintf(x->canon, sizeof x->canon, "%se%d", dec, k10);
            x->is_int = k10 > 0 || x->ival == 0;
            x->fits = 0;
            if (k10 > 0 && k10 < 20) {
                i128 w = x->ival;
                int ok = 1;
                for (int i = 0; i < k10 && ok; i++) {
                    if (w > ((i128)1 << 100) || w < -((i128)1 << 100)) ok = 0;
                    else w *= 10;
                }
                if (ok && w <= (i128)UINT64_MAX && w >= -(((i128)1) << 63)) { x->ival = w; x->fits = 1; }
            }
        }
        goto finish;
    }

    /* decimal: digits [. digits] [e [+-] digits] */
    const char *ip = p;
    size_t ni = 0, nf = 0;
    while (isdigit((unsigned char)p[ni])) ni++;
    const char *fp = NULL;
    p += ni;
    if (*p == '.') {
        fp = p + 1;
        while (isdigit((unsigned char)fp[nf])) nf++;
        p = fp + nf;
    }
    if (ni + nf == 0) {
        seterr(err, errlen, "'%s' is not a number", text);
        return -1;
    }
    long e = 0;
    if (*p == 'e' || *p == 'E') {
        const char *q = p + 1;
        int eneg = 0;
        if (*q == '+' || *q == '-') { eneg = *q == '-'; q++; }
        if (!isdigit((unsigned char)*q)) { seterr(err, errlen, "'%s' is not a number (bad exponent)", text); return -1; }
        for (; isdigit((unsigned char)*q); q++)
            if (e < 1000000) e = e * 10 + (*q - '0');
        if (eneg) e = -e;
        p = q;
    }
    if (*p) {
        seterr(err, errlen, "'%s' is not a number (unexpected '%c')", text, *p);
        return -1;
    }
    /* significant digits: integer part then fraction, without leading/trailing zeros */
    char digs[MAX_VALUE_TEXT + 2];
    size_t nd = 0;
    for (size_t i = 0; i < ni; i++) digs[nd++] = ip[i];
    for (size_t i = 0; i < nf; i++) digs[nd++] = fp[i];
    long exp10 = e - (long)nf;
    size_t lead = 0;
    while (lead < nd && digs[lead] == '0') lead++;
    size_t end = nd;
    while (end > lead && digs[end - 1] == '0') { end--; exp10++; }
    if (lead == end) { /* zero */
        snprintf(x->canon, sizeof x->canon, "%s0e0", x->neg ? "-" : "");
        x->is_int = 1;
        x->fits = 1;
        x->ival = 0;
        goto finish;
    }
    size_t sig = end - lead;
    if (k10 == 99) {
        x->approx = 1;
    } else {
        exp10 += k10;
    }
    if (exp10 > 100000 || exp10 < -100000) exp10 = exp10 > 0 ? 100000 : -100000;
    snprintf(x->canon, sizeof x->canon, "%s%.*se%ld", x->neg ? "-" : "", (int)sig, digs + lead, exp10);
    x->is_int = exp10 >= 0 && !x->approx;
    if (x->is_int && (long)sig + exp10 <= 20) {
        unsigned __int128 v = 0;
        for (size_t i = lead; i < end; i++) v = v * 10 + (unsigned)(digs[i] - '0');
        for (long i = 0; i < exp10; i++) v *= 10;
        if (v <= (unsigned __int128)UINT64_MAX) {
            x->ival = x->neg ? -(i128)v : (i128)v;
            x->fits = x->ival >= -(((i128)1) << 63);
        }
    }
    if (x->approx) {
        x->xn = strtold(x->canon, NULL) * (long double)scale;
        x->is_int = 0;
        return 0;
    }
finish:
    if (x->fits) {
        x->xn = i128_ld(x->ival); /* exact: 64-bit mantissa */
        if (x->ival == 0 && x->neg) x->xn = -0.0L;
        x->exact_known = x->exact = 1;
    } else {
        x->xn = strtold(x->canon, NULL);
    }
    return 0;
}

/* Sign of (x - m), exact. */
static int num_cmp(num_t *x, long double m)
{
    if (x->xn < m) return -1;
    if (x->xn > m) return 1;
    if (x->approx) return 0;
    if (!x->exact_known) {
        int old = fegetround();
        fesetround(FE_DOWNWARD);
        x->xd = strtold(x->canon, NULL);
        fesetround(FE_UPWARD);
        x->xu = strtold(x->canon, NULL);
        fesetround(old);
        x->exact_known = 1;
        x->exact = x->xd == x->xu;
    }
    if (x->exact) return 0;
    /* the decimal lies strictly between xd and xu, and m is one of them */
    return m == x->xd ? 1 : -1;
}

/* Short text of x for messages: the value as written (with the scale, if any). */
static const char *num_show(const num_t *x, const char *text, char *buf, size_t len)
{
    (void)x;
    snprintf(buf, len, "%s", text);
    return buf;
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
static void fmt_ld(long double v, char *buf, size_t len) { fmt_short((double)v, buf, len); }

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

static long double cal_eval(const ulk_arg *a, i128 r)
{
    long double x = i128_ld(r);
    if (a->cal == ULK_CAL_LINEAR) return (long double)a->cal_offset + (long double)a->cal_scale * x;
    long double acc = 0.0L;
    for (int k = a->n_poly - 1; k >= 0; k--) acc = acc * x + (long double)a->poly[k];
    return acc;
}

static int is_calibrated(const ulk_arg *a)
{
    return (a->type == ULK_ARG_UNSIGNED || a->type == ULK_ARG_SIGNED) &&
           (a->cal == ULK_CAL_LINEAR || (a->cal == ULK_CAL_POLY && a->n_poly > 0 && a->poly));
}

static uint64_t mask_bits(int bits) { return bits >= 64 ? UINT64_MAX : (((uint64_t)1 << bits) - 1); }

/* Nearest raw of a calibrated argument (section 2). 0 or -1 with a reason. */
static int cal_nearest(const ulk_arg *a, num_t *x, const char *text, i128 *out, char *err, size_t errlen)
{
    i128 lo, hi;
    raw_range(a, &lo, &hi);
    long double flo = cal_eval(a, lo), fhi = cal_eval(a, hi);
    /* g = s*f is non-decreasing; compare s*x with g values */
    int s = fhi >= flo ? 1 : -1;
#define G(r) ((long double)s * cal_eval(a, (r)))
#define CMP(m) (s > 0 ? num_cmp(x, (m)) : -num_cmp(x, -(m)))
    /* u = smallest r in [lo, hi] with g(r) >= s*x; hi + 1 when none */
    i128 l = lo, h = hi + 1;
    while (l < h) {
        i128 mid = l + (h - l) / 2;
        if (CMP(G(mid)) <= 0) h = mid;
        else l = mid + 1;
    }
    i128 u = l, pick;
    char b1[64], b2[64];
    if (u == lo) {
        long double gl = G(lo);
        if (CMP(gl) != 0) {
            long double half = (G(lo - 1) + gl) / 2.0L; /* exactly half a step is accepted */
            if (CMP(half) < 0) {
                fmt_ld(s * gl, b1, sizeof b1);
                i128_to_dec(lo, b2);
                seterr(err, errlen,
                       "value %s is more than half a raw step from the nearest calibrated value %s (raw %s)",
                       text, b1, b2);
                return -1;
            }
        }
        pick = lo;
    } else if (u == hi + 1) {
        long double gh = G(hi);
        long double half = (gh + G(hi + 1)) / 2.0L;
        if (CMP(half) > 0) {
            fmt_ld(s * gh, b1, sizeof b1);
            i128_to_dec(hi, b2);
            seterr(err, errlen,
                   "value %s is more than half a raw step from the nearest calibrated value %s (raw %s)",
                   text, b1, b2);
            return -1;
        }
        pick = hi;
    } else {
        /* g(u-1) < s*x <= g(u): the nearer one, the smaller raw (u-1) on a tie */
        long double ga = G(u - 1), gb = G(u);
        long double half = (ga + gb) / 2.0L;
        pick = CMP(half) <= 0 ? u - 1 : u;
    }
    /* a flat stretch (non-strict polynomial): the smallest raw of equal value wins */
    if (pick > lo && G(pick - 1) == G(pick)) {
        long double gp = G(pick);
        i128 l2 = lo, h2 = pick;
        while (l2 < h2) {
            i128 mid = l2 + (h2 - l2) / 2;
            if (G(mid) >= gp) h2 = mid;
            else l2 = mid + 1;
        }
        pick = l2;
    }
#undef G
#undef CMP
    *out = pick;
    return 0;
}

static int range_check(const ulk_arg *a, num_t *x, const char *text, char *err, size_t errlen)
{
    if (!a->has_range) return 0;
    if (num_cmp(x, (long double)a->range_min) < 0 || num_cmp(x, (long double)a->range_max) > 0) {
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
    if (num_parse(text, scale, &x, err, errlen) < 0) return ULK_EPARSE;
    char shown[MAX_VALUE_TEXT + 64];
    if (scale != 1.0) {
        char sb[40];
        fmt_short(scale, sb, sizeof sb);
        snprintf(shown, sizeof shown, "%s (x%s)", text, sb);
    } else {
        num_show(&x, text, shown, sizeof shown);
    }
    if (range_check(a, &x, shown, err, errlen) < 0) return ULK_EPARSE;

    if (a->type == ULK_ARG_FLOAT32) {
        errno = 0;
        float f = x.approx ? (float)x.xn : strtof(x.canon, NULL);
        if (isinf(f)) {
            seterr(err, errlen, "value %s is beyond the largest finite float32 (%g)", shown, (double)FLT_MAX);
            return ULK_EPARSE;
        }
        uint32_t bitsv;
        memcpy(&bitsv, &f, 4);
        out->raw = bitsv;
        out->eng = (double)f;
        return 0;
    }

    if (is_calibrated(a)) {
        i128 r;
        if (cal_nearest(a, &x, shown, &r, err, errlen) < 0) return ULK_EPARSE;
        out->raw = (uint64_t)r & mask_bits(a->bits);
        out->eng = ulk_arg_raw_to_eng(a, out->raw);
        return 0;
    }

    /* plain integer */
    if (!x.is_int) {
        seterr(err, errlen, "value %s is not a whole number (argument '%s' takes integers)", shown,
               a->name ? a->name : "?");
        return ULK_EPARSE;
    }
    i128 lo, hi;
    raw_range(a, &lo, &hi);
    if (!x.fits || x.ival < lo || x.ival > hi) {
        char b1[48], b2[48];
        i128_to_dec(lo, b1);
        i128_to_dec(hi, b2);
        if (!x.fits)
            seterr(err, errlen, "value %s is beyond 64 bits", shown);
        else
            seterr(err, errlen, "value %s does not fit in %d %s bits [%s, %s]", shown, a->bits,
                   ulk_arg_type_name(a->type), b1, b2);
        return ULK_EPARSE;
    }
    out->raw = (uint64_t)x.ival & mask_bits(a->bits);
    out->eng = (double)x.ival;
    return 0;
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
        if (a->cal == ULK_CAL_LINEAR) return a->cal_offset + a->cal_scale * (double)r;
        return (double)cal_eval(a, r);
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
