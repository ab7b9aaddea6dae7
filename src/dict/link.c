/* src/link.c - exact rational rates and link-profile names. */
#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/error.h"
#include "ulk/link.h"

#define RLIM ((int64_t)1 << 62)

static int64_t gcd64(int64_t a, int64_t b)
{
    if (a < 0) a = -a;
    if (b < 0) b = -b;
    while (b) { int64_t t = a % b; a = b; b = t; }
    return a ? a : 1;
}

ulk_ratio ulk_ratio_make(int64_t num, int64_t den)
{
    if (den < 0) { num = -num; den = -den; }
    int64_t g = gcd64(num, den);
    ulk_ratio r = {num / g, den / g};
    return r;
}

double ulk_ratio_to_double(ulk_ratio r) { return (double)r.num / (double)r.den; }

int ulk_ratio_mul_int(ulk_ratio r, int64_t k, ulk_ratio *out)
{
    int64_t g = gcd64(k, r.den);
    __int128 n = (__int128)r.num * (k / g);
    if (n >= RLIM || n <= -RLIM) return ULK_ELIMIT;
    *out = ulk_ratio_make((int64_t)n, r.den / g);
    return 0;
}

int ulk_ratio_div(ulk_ratio a, ulk_ratio b, ulk_ratio *out)
{
    if (b.num == 0) return ULK_EINVAL;
    __int128 n = (__int128)a.num * b.den, d = (__int128)a.den * b.num;
    if (d < 0) { n = -n; d = -d; }
    __int128 x = n < 0 ? -n : n, y = d;
    while (y) { __int128 t = x % y; x = y; y = t; }
    if (x == 0) x = 1;
    n /= x; d /= x;
    if (n >= RLIM || n <= -RLIM || d >= RLIM) return ULK_ELIMIT;
    out->num = (int64_t)n;
    out->den = (int64_t)d;
    return 0;
}

int ulk_ratio_parse(const char *text, ulk_ratio *out)
{
    const char *p = text;
    while (isspace((unsigned char)*p)) p++;
    int neg = 0;
    if (*p == '+' || *p == '-') { neg = *p == '-'; p++; }
    if (p[0] == '0' && (p[1] == 'x' || p[1] == 'X' || p[1] == 'b' || p[1] == 'B')) {
        int base = (p[1] == 'x' || p[1] == 'X') ? 16 : 2;
        p += 2;
        if (!*p) return ULK_EPARSE;
        __int128 v = 0;
        for (; *p && !isspace((unsigned char)*p); p++) {
            int dgt;
            if (*p == '_') continue;
            if (isdigit((unsigned char)*p)) dgt = *p - '0';
            else if (base == 16 && isxdigit((unsigned char)*p)) dgt = tolower((unsigned char)*p) - 'a' + 10;
            else return ULK_EPARSE;
            if (dgt >= base) return ULK_EPARSE;
            v = v * base + dgt;
            if (v >= RLIM) return ULK_ELIMIT;
        }
        while (isspace((unsigned char)*p)) p++;
        if (*p) return ULK_EPARSE;
        *out = ulk_ratio_make(neg ? -(int64_t)v : (int64_t)v, 1);
        return 0;
    }
    __int128 mant = 0;
    int frac_digits = 0, any = 0, seen_dot = 0;
    for (; *p; p++) {
        if (isdigit((unsigned char)*p)) {
            any = 1;
            if (mant >= RLIM) return ULK_ELIMIT;
            mant = mant * 10 + (*p - '0');
            if (seen_dot) frac_digits++;
        } else if (*p == '.' && !seen_dot) {
            seen_dot = 1;
        } else break;
    }
    if (!any) return ULK_EPARSE;
    long e = 0;
    if (*p == 'e' || *p == 'E') {
        char *end;
        e = strtol(p + 1, &end, 10);
        if (end == p + 1) return ULK_EPARSE;
        if (e > 40 || e < -40) return ULK_ELIMIT;
        p = end;
    }
    while (isspace((unsigned char)*p)) p++;
    if (*p) return ULK_EPARSE;
    long exp10 = e - frac_digits;
    __int128 num = mant, den = 1;
    while (exp10 > 0) { num *= 10; exp10--; if (num >= RLIM) return ULK_ELIMIT; }
    while (exp10 < 0) {
        if (num % 10 == 0 && num) num /= 10;
        else { den *= 10; if (den >= RLIM) return ULK_ELIMIT; }
        exp10++;
    }
    __int128 x = num, y = den;
    while (y) { __int128 t = x % y; x = y; y = t; }
    if (x == 0) x = 1;
    num /= x; den /= x;
    if (num >= RLIM || den >= RLIM) return ULK_ELIMIT;
    out->num = neg ? -(int64_t)num : (int64_t)num;
    out->den = (int64_t)den;
    return 0;
}

void ulk_ratio_format(ulk_ratio r, char *buf, int len)
{
    /* A decimal when den = 2^a 5^b, else num/den. */
    int64_t d = r.den;
    int k2 = 0, k5 = 0;
    while (d % 2 == 0) { d /= 2; k2++; }
    while (d % 5 == 0) { d /= 5; k5++; }
    if (d != 1 || k2 > 18 || k5 > 18) { snprintf(buf, (size_t)len, "%lld/%lld", (long long)r.num, (long long)r.den); return; }
    int digits = k2 > k5 ? k2 : k5;
    __int128 scaled = (__int128)r.num;
    for (int i = 0; i < digits; i++) scaled *= 10;
    scaled /= r.den;
    if (digits == 0) { snprintf(buf, (size_t)len, "%lld", (long long)r.num); return; }
    int neg = scaled < 0;
    if (neg) scaled = -scaled;
    __int128 p10 = 1;
    for (int i = 0; i < digits; i++) p10 *= 10;
    long long ip = (long long)(scaled / p10), fp = (long long)(scaled % p10);
    snprintf(buf, (size_t)len, "%s%lld.%0*lld", neg ? "-" : "", ip, digits, fp);
}

int ulk_check_bits(ulk_check_kind k)
{
    switch (k) {
    case ULK_CHECK_PARITY_EVEN:
    case ULK_CHECK_PARITY_ODD: return 1;
    case ULK_CHECK_CRC8: return 8;
    case ULK_CHECK_CRC16: return 16;
    default: return 0;
    }
}

const char *ulk_check_name(ulk_check_kind k)
{
    static const char *n[] = {"none", "parity-even", "parity-odd", "crc8", "crc16"};
    return (unsigned)k < 5 ? n[k] : "?";
}
const char *ulk_line_code_name(ulk_line_code c) { return c == ULK_LINE_NRZM ? "nrz-m" : "nrz-l"; }
const char *ulk_waveform_name(ulk_waveform w) { return w == ULK_WAVE_SQUARE ? "square" : "sine"; }

ulk_ratio ulk_link_subbit_rate(const ulk_link *l)
{
    ulk_ratio r = l->bit_rate;
    ulk_ratio_mul_int(l->bit_rate, l->n_subbits, &r);
    return r;
}
