/* src/exact.c - exact rationals from number text, one correct rounding to binary, and
 * calibrations as integer polynomials (src/exact.h). */
#include "exact.h"

#include <ctype.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/error.h"

/* mpz_set_si / mpz_get_ui carry 64-bit raws: the LP64 targets built (x86-64, aarch64 Linux). */
_Static_assert(sizeof(long) == 8, "exact.c needs a 64-bit long");

int ulk_q_set_text(mpq_t q, const char *text, long max_exp10, int clamp, int *neg)
{
    mpq_set_ui(q, 0, 1);
    if (neg) *neg = 0;
    if (!text) return ULK_EPARSE;
    const char *p = text;
    int minus = 0;
    if (*p == '+' || *p == '-') { minus = *p == '-'; p++; }
    if (neg) *neg = minus;
    if (p[0] == '0' && p[1] && strchr("xXoObB", p[1])) {
        int base = (p[1] == 'x' || p[1] == 'X') ? 16 : (p[1] == 'o' || p[1] == 'O') ? 8 : 2;
        p += 2;
        if (!*p) return ULK_EPARSE;
        for (const char *s = p; *s; s++) {
            int d = isdigit((unsigned char)*s) ? *s - '0'
                    : isxdigit((unsigned char)*s) ? tolower((unsigned char)*s) - 'a' + 10 : 99;
            if (d >= base) return ULK_EPARSE;
        }
        if (mpz_set_str(mpq_numref(q), p, base) != 0) return ULK_EPARSE;
        if (minus) mpq_neg(q, q);
        return 0;
    }
    /* decimal: the significant digits as one integer M, and q = M * 10^e */
    size_t ni = 0, nf = 0;
    const char *ip = p, *fp = NULL;
    while (isdigit((unsigned char)p[ni])) ni++;
    p += ni;
    if (*p == '.') {
        fp = p + 1;
        while (isdigit((unsigned char)fp[nf])) nf++;
        p = fp + nf;
    }
    if (ni + nf == 0) return ULK_EPARSE;
    long e = 0;
    if (*p == 'e' || *p == 'E') {
        const char *s = p + 1;
        int eneg = 0;
        if (*s == '+' || *s == '-') { eneg = *s == '-'; s++; }
        if (!isdigit((unsigned char)*s)) return ULK_EPARSE;
        for (; isdigit((unsigned char)*s); s++)
            if (e < 100000000L) e = e * 10 + (*s - '0');
        if (eneg) e = -e;
        p = s;
    }
    if (*p) return ULK_EPARSE;
    /* digit i of the integer and fraction parts written together, without the point */
#define DIG(i) ((i) < ni ? ip[(i)] : fp[(i) - ni])
    size_t nd = ni + nf, lead = 0;
    long exp10 = e - (long)nf;
    while (lead < nd && DIG(lead) == '0') lead++;
    while (nd > lead && DIG(nd - 1) == '0') { nd--; exp10++; }
    if (lead == nd) return 0; /* zero */
    long top = exp10 + (long)(nd - lead); /* 10^(top-1) <= |q| < 10^top */
    if (exp10 < -max_exp10 || top > max_exp10) {
        if (!clamp) return ULK_ELIMIT;
        if (top < 0 && exp10 < -max_exp10) exp10 = -max_exp10 - (long)(nd - lead); /* tiny: keep its digits */
        else if (top > max_exp10) exp10 = max_exp10 - (long)(nd - lead);
        /* digits below 10^-max_exp10 of a value above it are kept as they are: a value text
         * is at most a few thousand characters */
    }
    /* M digit by digit, 18 at a time (no allocation besides GMP's own) */
    mpz_ptr m = mpq_numref(q);
    mpz_set_ui(m, 0);
    for (size_t i = lead; i < nd;) {
        unsigned long chunk = 0, pw = 1;
        for (int j = 0; j < 18 && i < nd; j++, i++) { chunk = chunk * 10 + (unsigned long)(DIG(i) - '0'); pw *= 10; }
        mpz_mul_ui(m, m, pw);
        mpz_add_ui(m, m, chunk);
    }
#undef DIG
    mpz_t t;
    mpz_init(t);
    mpz_ui_pow_ui(t, 10, (unsigned long)labs(exp10));
    if (exp10 >= 0) mpz_mul(mpq_numref(q), mpq_numref(q), t);
    else mpz_set(mpq_denref(q), t);
    mpz_clear(t);
    mpq_canonicalize(q);
    if (minus) mpq_neg(q, q);
    return 0;
}

void ulk_q_set_double_short(mpq_t q, double v)
{
    char buf[40];
    if (!isfinite(v)) { mpq_set_ui(q, 0, 1); return; }
    for (int p = 1; p <= 17; p++) {
        snprintf(buf, sizeof buf, "%.*g", p, v);
        if (strtod(buf, NULL) == v) break;
    }
    if (ulk_q_set_text(q, buf, 400, 0, NULL) != 0) mpq_set_d(q, v); /* not reached: %g text */
}

/* Scratch integers kept per thread: the compiler rounds many values, and GMP would otherwise
 * allocate and free them each time. */
static _Thread_local mpz_t g_rb[4];
static _Thread_local int g_rb_init;

double ulk_q_round_binary(const mpq_t q, int p, int emin, int emax, int *overflow)
{
    if (overflow) *overflow = 0;
    int sg = mpq_sgn(q);
    if (sg == 0) return 0.0;
    if (!g_rb_init) {
        for (int i = 0; i < 4; i++) mpz_init(g_rb[i]);
        g_rb_init = 1;
    }
    mpz_ptr n = g_rb[0], d = g_rb[1], Q = g_rb[2], R = g_rb[3];
    mpz_abs(n, mpq_numref(q));
    mpz_set(d, mpq_denref(q));
    /* e = floor(log2 |q|): sizes give it within one */
    long e = (long)mpz_sizeinbase(n, 2) - (long)mpz_sizeinbase(d, 2);
    if (e >= 0) mpz_mul_2exp(Q, d, (mp_bitcnt_t)e), mpz_set(R, n);
    else mpz_mul_2exp(R, n, (mp_bitcnt_t)-e), mpz_set(Q, d);
    if (mpz_cmp(R, Q) < 0) e--; /* |q| < 2^e */
    long u = (e < emin ? emin : e) - (p - 1); /* exponent of the last significand bit */
    if (u >= 0) mpz_mul_2exp(d, d, (mp_bitcnt_t)u);
    else mpz_mul_2exp(n, n, (mp_bitcnt_t)-u);
    mpz_tdiv_qr(Q, R, n, d);
    mpz_mul_2exp(R, R, 1);
    int c = mpz_cmp(R, d);
    if (c > 0 || (c == 0 && mpz_odd_p(Q))) mpz_add_ui(Q, Q, 1); /* nearest, ties to even */
    double v;
    if ((long)mpz_sizeinbase(Q, 2) - 1 + u > emax) {
        if (overflow) *overflow = 1;
        v = HUGE_VAL;
    } else {
        v = ldexp(mpz_get_d(Q), (int)u); /* Q < 2^54 and the result is representable: exact */
    }
    return sg < 0 ? -v : v;
}

double ulk_q_to_double(const mpq_t q) { return ulk_q_round_binary(q, 53, -1022, 1023, NULL); }

void ulk_z_set_i128(mpz_t z, __int128 v)
{
    if (v >= INT64_MIN && v <= INT64_MAX) { mpz_set_si(z, (long)v); return; } /* long is 64 bits (LP64) */
    int neg = v < 0;
    unsigned __int128 u = neg ? (unsigned __int128)(-(v + 1)) + 1 : (unsigned __int128)v;
    mpz_set_ui(z, (unsigned long)(uint64_t)(u >> 64));
    mpz_mul_2exp(z, z, 64);
    mpz_t lo;
    mpz_init(lo);
    mpz_set_ui(lo, (unsigned long)(uint64_t)u); /* unsigned long is 64 bits on the LP64 targets built */
    mpz_add(z, z, lo);
    mpz_clear(lo);
    if (neg) mpz_neg(z, z);
}

int ulk_z_get_i128(const mpz_t z, __int128 *v)
{
    if (mpz_sizeinbase(z, 2) > 126) return -1;
    mpz_t a, lo;
    mpz_init(a);
    mpz_init(lo);
    mpz_abs(a, z);
    mpz_tdiv_r_2exp(lo, a, 64);
    mpz_tdiv_q_2exp(a, a, 64);
    unsigned __int128 u = ((unsigned __int128)mpz_get_ui(a) << 64) | (unsigned __int128)mpz_get_ui(lo);
    mpz_clear(a);
    mpz_clear(lo);
    *v = mpz_sgn(z) < 0 ? -(__int128)u : (__int128)u;
    return 0;
}

/* The exact value of one dictionary number: its text, else the double as a person wrote it. */
static int q_of(mpq_t q, const char *text, double v)
{
    if (text) return ulk_q_set_text(q, text, ULK_EXACT_MAX_EXP10, 0, NULL);
    ulk_q_set_double_short(q, v);
    return 0;
}

int ulk_calq_init(ulk_calq *k, const ulk_arg *a)
{
    k->n = 0;
    for (int i = 0; i < 16; i++) mpz_init(k->c[i]);
    mpz_init_set_ui(k->den, 1);
    int n = a->cal == ULK_CAL_LINEAR ? 2 : a->n_poly;
    if (n < 1 || n > 16 || (a->cal == ULK_CAL_POLY && !a->poly)) return ULK_EPARSE;
    mpq_t c[16];
    int rc = 0;
    for (int i = 0; i < n; i++) {
        mpq_init(c[i]);
        if (rc) continue;
        if (a->cal == ULK_CAL_LINEAR)
            rc = i == 0 ? q_of(c[i], a->cal_offset_text, a->cal_offset) : q_of(c[i], a->cal_scale_text, a->cal_scale);
        else
            rc = q_of(c[i], a->poly_text ? a->poly_text[i] : NULL, a->poly[i]);
        if (!rc) mpz_lcm(k->den, k->den, mpq_denref(c[i]));
    }
    if (!rc) {
        for (int i = 0; i < n; i++) {
            mpz_divexact(k->c[i], k->den, mpq_denref(c[i]));
            mpz_mul(k->c[i], k->c[i], mpq_numref(c[i]));
        }
        k->n = n;
    }
    for (int i = 0; i < n; i++) mpq_clear(c[i]);
    return rc;
}

/* ---- the per-thread cache of calibrations */

#define CALQ_CACHE 8
#define CALQ_KEY_TEXT 64 /* texts longer than this are not cached (built each time) */

typedef struct {
    int used;
    const ulk_arg *arg;
    ulk_cal_kind cal;
    int n;
    double v[16];
    char t[16][CALQ_KEY_TEXT]; /* "" for a NULL text */
    ulk_calq k;
} calq_entry;

static _Thread_local calq_entry g_calq[CALQ_CACHE];
static _Thread_local int g_calq_next;
static _Thread_local ulk_calq g_calq_uncached;
static _Thread_local int g_calq_uncached_init;

/* the calibration's k-th number: text (NULL when none) and double */
static void cal_num(const ulk_arg *a, int i, const char **t, double *v)
{
    if (a->cal == ULK_CAL_LINEAR) {
        *t = i == 0 ? a->cal_offset_text : a->cal_scale_text;
        *v = i == 0 ? a->cal_offset : a->cal_scale;
    } else {
        *t = a->poly_text ? a->poly_text[i] : NULL;
        *v = a->poly ? a->poly[i] : 0.0;
    }
}

static int calq_entry_matches(const calq_entry *e, const ulk_arg *a, int n)
{
    if (!e->used || e->arg != a || e->cal != a->cal || e->n != n) return 0;
    for (int i = 0; i < n; i++) {
        const char *t;
        double v;
        cal_num(a, i, &t, &v);
        if (memcmp(&v, &e->v[i], sizeof v) != 0 || strcmp(t ? t : "", e->t[i]) != 0) return 0;
    }
    return 1;
}

const ulk_calq *ulk_calq_get(const ulk_arg *a)
{
    int n = a->cal == ULK_CAL_LINEAR ? 2 : a->n_poly;
    if (n < 1 || n > 16 || (a->cal == ULK_CAL_POLY && !a->poly)) return NULL;
    int cacheable = 1;
    for (int i = 0; i < n; i++) {
        const char *t;
        double v;
        cal_num(a, i, &t, &v);
        if (t && strlen(t) >= CALQ_KEY_TEXT) cacheable = 0;
    }
    if (!cacheable) {
        if (g_calq_uncached_init) ulk_calq_clear(&g_calq_uncached);
        g_calq_uncached_init = 1;
        return ulk_calq_init(&g_calq_uncached, a) == 0 ? &g_calq_uncached : NULL;
    }
    for (int j = 0; j < CALQ_CACHE; j++)
        if (calq_entry_matches(&g_calq[j], a, n)) return &g_calq[j].k;
    calq_entry *e = &g_calq[g_calq_next];
    g_calq_next = (g_calq_next + 1) % CALQ_CACHE;
    if (e->used) ulk_calq_clear(&e->k);
    e->used = 0;
    if (ulk_calq_init(&e->k, a) != 0) {
        ulk_calq_clear(&e->k);
        return NULL;
    }
    e->used = 1;
    e->arg = a;
    e->cal = a->cal;
    e->n = n;
    for (int i = 0; i < n; i++) {
        const char *t;
        cal_num(a, i, &t, &e->v[i]);
        snprintf(e->t[i], CALQ_KEY_TEXT, "%s", t ? t : "");
    }
    return &e->k;
}

void ulk_calq_clear(ulk_calq *k)
{
    for (int i = 0; i < 16; i++) mpz_clear(k->c[i]);
    mpz_clear(k->den);
}

void ulk_calq_num(const ulk_calq *k, mpz_t out, const mpz_t r)
{
    mpz_t acc;
    mpz_init_set_ui(acc, 0);
    for (int i = k->n - 1; i >= 0; i--) {
        mpz_mul(acc, acc, r);
        mpz_add(acc, acc, k->c[i]);
    }
    mpz_swap(out, acc);
    mpz_clear(acc);
}

void ulk_calq_value(const ulk_calq *k, mpq_t out, __int128 r)
{
    mpz_t z;
    mpz_init(z);
    ulk_z_set_i128(z, r);
    ulk_calq_num(k, mpq_numref(out), z);
    mpz_set(mpq_denref(out), k->den);
    mpq_canonicalize(out);
    mpz_clear(z);
}

int ulk_arg_range_q(const ulk_arg *a, mpq_t lo, mpq_t hi)
{
    int rc = q_of(lo, a->range_min_text, a->range_min);
    if (!rc) rc = q_of(hi, a->range_max_text, a->range_max);
    return rc;
}

/* ---- the per-thread cache of range bounds */

typedef struct {
    int used;
    const ulk_arg *arg;
    double v[2];
    char t[2][CALQ_KEY_TEXT];
    mpq_t lo, hi;
} range_entry;

static _Thread_local range_entry g_range[CALQ_CACHE];
static _Thread_local int g_range_next;
static _Thread_local mpq_t g_range_uncached[2];
static _Thread_local int g_range_uncached_init;

int ulk_arg_range_get(const ulk_arg *a, mpq_srcptr *lo, mpq_srcptr *hi)
{
    const char *t[2] = {a->range_min_text, a->range_max_text};
    double v[2] = {a->range_min, a->range_max};
    if ((t[0] && strlen(t[0]) >= CALQ_KEY_TEXT) || (t[1] && strlen(t[1]) >= CALQ_KEY_TEXT)) {
        if (!g_range_uncached_init) { mpq_init(g_range_uncached[0]); mpq_init(g_range_uncached[1]); }
        g_range_uncached_init = 1;
        *lo = g_range_uncached[0];
        *hi = g_range_uncached[1];
        return ulk_arg_range_q(a, g_range_uncached[0], g_range_uncached[1]);
    }
    for (int j = 0; j < CALQ_CACHE; j++) {
        range_entry *e = &g_range[j];
        if (e->used && e->arg == a && !memcmp(e->v, v, sizeof v) && !strcmp(e->t[0], t[0] ? t[0] : "") &&
            !strcmp(e->t[1], t[1] ? t[1] : "")) {
            *lo = e->lo;
            *hi = e->hi;
            return 0;
        }
    }
    range_entry *e = &g_range[g_range_next];
    g_range_next = (g_range_next + 1) % CALQ_CACHE;
    if (!e->used) { mpq_init(e->lo); mpq_init(e->hi); }
    e->used = 0;
    int rc = ulk_arg_range_q(a, e->lo, e->hi);
    e->used = 1; /* the mpq are initialised from here on */
    e->arg = rc == 0 ? a : NULL;
    memcpy(e->v, v, sizeof v);
    for (int i = 0; i < 2; i++) snprintf(e->t[i], CALQ_KEY_TEXT, "%s", t[i] ? t[i] : "");
    *lo = e->lo;
    *hi = e->hi;
    return rc;
}
