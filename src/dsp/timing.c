/* src/timing.c - the timing table of docs/spec/subbit.md section 6: one CSV row per sub-bit
 * for hardware encoders and for checking a recording by eye.
 *
 * Why exact: first_sample = ceil(j f_s / R_s) must agree with the modulator sample for
 * sample, so it comes from the same quotient/remainder walk; start_s = j / R_s is printed
 * as an exact decimal whenever it is one, so a reader can compare it with a rational
 * computation without a tolerance.
 */
#include <errno.h>
#include <inttypes.h>
#include <stdio.h>
#include <string.h>
#include <sys/stat.h>

#include "exact.h"
#include "ulk/mod.h"
#include "ulk/subbit.h"
#include "util.h"

#define TIMING_CHUNK 4096

/* Formats j / R_s (R_s = rn / rd) into buf. dec_digits > 0: rn divides 10^dec_digits and
 * scale = 10^dec_digits / rn, so j*rd*scale / 10^dec_digits is exact. */
typedef struct {
    uint64_t rn, rd;
    int dec_digits;            /* 0 when the decimal path is not used */
    unsigned __int128 scale, p10;
} start_fmt;

static void start_fmt_init(start_fmt *f, ulk_ratio rs)
{
    memset(f, 0, sizeof *f);
    f->rn = (uint64_t)rs.num;
    f->rd = (uint64_t)rs.den;
    uint64_t x = f->rn;
    int k2 = 0, k5 = 0;
    while (x % 2 == 0) { x /= 2; k2++; }
    while (x % 5 == 0) { x /= 5; k5++; }
    int digits = k2 > k5 ? k2 : k5;
    if (x != 1 || digits > 18) return;
    unsigned __int128 p10 = 1;
    for (int i = 0; i < digits; i++) p10 *= 10;
    f->p10 = p10;
    f->scale = p10 / f->rn;
    f->dec_digits = digits ? digits : -1; /* -1: whole numbers, no fraction */
}

/* Decimal digits of v at p; returns the end. (printf dominated the table's time.) */
static char *put_u64(char *p, uint64_t v)
{
    char tmp[20];
    int n = 0;
    do { tmp[n++] = (char)('0' + v % 10); v /= 10; } while (v);
    while (n) *p++ = tmp[--n];
    return p;
}

static char *put_i64(char *p, int64_t v)
{
    if (v < 0) { *p++ = '-'; return put_u64(p, (uint64_t)0 - (uint64_t)v); }
    return put_u64(p, (uint64_t)v);
}

/* j / R_s at p (at most 64 bytes); returns the end. */
static char *start_fmt_value(const start_fmt *f, uint64_t j, char *p)
{
    unsigned __int128 v = (unsigned __int128)j * f->rd; /* < 2^126 */
    if (f->dec_digits != 0 && v <= ~(unsigned __int128)0 / f->scale && v * f->scale / f->p10 <= UINT64_MAX) {
        v *= f->scale;
        if (f->dec_digits < 0) return put_u64(p, (uint64_t)v);
        uint64_t ip = (uint64_t)(v / f->p10), fp = (uint64_t)(v % f->p10);
        p = put_u64(p, ip);
        if (fp == 0) return p;
        int d = f->dec_digits;
        while (fp % 10 == 0) { fp /= 10; d--; }
        *p++ = '.';
        char *q = p + d; /* d digits, zero-padded on the left */
        for (char *r = q; r > p;) { *--r = (char)('0' + fp % 10); fp /= 10; }
        return q;
    }
    /* not a short decimal: the double nearest to the exact j rd / rn (one rounding, the same
     * on every machine), in 17 significant digits */
    mpq_t q;
    mpq_init(q);
    mpz_set_ui(mpq_numref(q), (unsigned long)j);
    mpz_mul_ui(mpq_numref(q), mpq_numref(q), (unsigned long)f->rd);
    mpz_set_ui(mpq_denref(q), (unsigned long)f->rn);
    mpq_canonicalize(q);
    double x = ulk_q_to_double(q);
    mpq_clear(q);
    return p + snprintf(p, 64, "%.17g", x);
}

int ulk_timing_write_fp(const ulk_upload *u, ulk_ratio fs, FILE *fp, const char *name, ulk_diag *diag)
{
    if (!name) name = "timing table";
    if (!u || !fp) return ulk_fail(diag, ULK_EINVAL, "%s: missing upload or output", name);
    if (fs.num <= 0 || fs.den <= 0) return ulk_fail(diag, ULK_EINVAL, "%s: sample rate must be > 0", name);
    const ulk_link *l = &u->link;
    if (l->n_subbits < 1 || l->bit_rate.num <= 0)
        return ulk_fail(diag, ULK_EINVAL, "%s: the upload's link parameters are not valid", name);
    ulk_ratio rs = ulk_link_subbit_rate(l);
    /* first_sample(j) = ceil(j b / a) with a / b = R_s / f_s reduced: walk j b = q a + r */
    uint64_t a, b;
    {
        unsigned __int128 n = (unsigned __int128)rs.num * (uint64_t)fs.den;
        unsigned __int128 d = (unsigned __int128)rs.den * (uint64_t)fs.num;
        unsigned __int128 x = n, y = d;
        while (y) { unsigned __int128 t = x % y; x = y; y = t; }
        n /= x;
        d /= x;
        if (n >= ((unsigned __int128)1 << 62) || d >= ((unsigned __int128)1 << 62))
            return ulk_fail(diag, ULK_ELIMIT, "%s: sample and sub-bit rates are too fine for exact arithmetic", name);
        a = (uint64_t)n;
        b = (uint64_t)d;
    }
    const uint64_t bq = b / a, br = b % a;
    start_fmt sf;
    start_fmt_init(&sf, rs);

    ulk_stream *st = ulk_stream_create(u);
    uint8_t *sb = ulk_malloc(TIMING_CHUNK);
    ulk_subbit_info *info = ulk_malloc(TIMING_CHUNK * sizeof *info);
    if (!st || !sb || !info) {
        ulk_stream_destroy(st); ulk_free(sb); ulk_free(info);
        return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", name);
    }
    const int nrzm = l->line_code == ULK_LINE_NRZM;
    int dprev = 1; /* nrz-m: d_{-1} = +1 */
    uint64_t j = 0, q = 0, r = 0;
    int rc = 0;
    if (fputs("index,start_s,first_sample,word,bit,bit_value,subbit,level,phase_deg\n", fp) < 0) rc = ULK_EIO;
    size_t got;
    /* rows are formatted into out[] and written in large pieces */
    char out[65536 + 256];
    size_t used = 0;
    while (rc == 0 && (got = ulk_stream_read(st, sb, info, TIMING_CHUNK)) > 0) {
        for (size_t k = 0; k < got; k++, j++) {
            int level;
            if (nrzm) {
                if (sb[k]) dprev = -dprev;
                level = dprev;
            } else {
                level = sb[k] ? 1 : -1;
            }
            uint64_t first = q + (r != 0);
            char *p = out + used; /* a row is at most 20+1+64+1+20+1+10+1+11+1+2+1+1+1+2+1+3+1 bytes */
            p = put_u64(p, j);
            *p++ = ',';
            p = start_fmt_value(&sf, j, p);
            *p++ = ',';
            p = put_u64(p, first);
            *p++ = ',';
            p = put_u64(p, info[k].word);
            *p++ = ',';
            p = put_i64(p, info[k].bit);
            *p++ = ',';
            p = put_i64(p, info[k].bit_value);
            *p++ = ',';
            *p++ = sb[k] ? '1' : '0';
            *p++ = ',';
            if (level > 0) { memcpy(p, "1,0\n", 4); p += 4; }
            else { memcpy(p, "-1,180\n", 7); p += 7; }
            used = (size_t)(p - out);
            if (used > 65536) {
                if (fwrite(out, 1, used, fp) != used) { rc = ULK_EIO; break; }
                used = 0;
            }
            q += bq;
            r += br;
            if (r >= a) { r -= a; q++; }
        }
    }
    if (rc == 0 && used && fwrite(out, 1, used, fp) != used) rc = ULK_EIO;
    ulk_stream_destroy(st);
    ulk_free(sb);
    ulk_free(info);
    if (rc == 0 && ferror(fp)) rc = ULK_EIO;
    if (rc < 0) return ulk_fail(diag, rc, "%s: write failed: %s", name, strerror(errno));
    return 0;
}

int ulk_timing_write(const ulk_upload *u, ulk_ratio fs, const char *path, ulk_diag *diag)
{
    if (!path) return ulk_fail(diag, ULK_EINVAL, "timing table: no output path");
    /* "-", a device or a pipe (e.g. /dev/stdout): written directly, since renaming a
     * temporary over it would replace the device itself */
    struct stat st;
    if (!strcmp(path, "-") || (stat(path, &st) == 0 && !S_ISREG(st.st_mode))) {
        int is_std = !strcmp(path, "-");
        if (!is_std && S_ISDIR(st.st_mode)) return ulk_fail(diag, ULK_EIO, "%s: is a folder, not a file", path);
        FILE *fp = is_std ? stdout : fopen(path, "w");
        if (!fp) return ulk_fail(diag, ULK_EIO, "%s: cannot open for writing: %s", path, strerror(errno));
        int rc = ulk_timing_write_fp(u, fs, fp, is_std ? "standard output" : path, diag);
        errno = 0;
        int bad = is_std ? fflush(fp) != 0 : fclose(fp) != 0;
        if (rc == 0 && bad) rc = ulk_fail(diag, ULK_EIO, "%s: write failed: %s", path, strerror(errno ? errno : EIO));
        return rc;
    }
    ulk_afile f;
    int rc = ulk_afile_open(&f, path, diag);
    if (rc < 0) return rc;
    rc = ulk_timing_write_fp(u, fs, f.fp, path, diag);
    if (rc < 0) { ulk_afile_abort(&f); return rc; }
    return ulk_afile_commit(&f, diag);
}
