/* src/rx_spectrum.c - the spectrum of a capture file (include/ulk/rx.h, ulk_rx_spectrum_file):
 * the sample readers feed the Welch estimator (src/spectrum.c); the strongest line and the
 * dictionary's channels are added for the report. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/carrier.h"
#include "ulk/link.h"
#include "ulk/profile.h"
#include "ulk/rx.h"
#include "util.h"

#define CHUNK 65536

static void add_mark(ulk_spectrum_mark *m, int *n, double f, double half, const char *label)
{
    if (*n >= ULK_RX_MAX_MARKS) return;
    m[*n].f_hz = f;
    m[*n].f_lo_hz = f - half;
    m[*n].f_hi_hz = f + half;
    m[*n].label = label;
    (*n)++;
}

/* The dictionary's channels as marks: at +f for a real capture, at f_o +- f for a complex one. */
static int build_marks(const ulk_dict *d, int is_complex, ulk_spectrum_mark *m)
{
    int n = 0;
    const ulk_link *l = &d->link;
    const ulk_carrier *c = ulk_dict_carrier(d);
    double fo = c && is_complex ? ulk_ratio_to_double(c->offset_hz) : 0.0;
    double rs = ulk_ratio_to_double(ulk_profile_of(l)->symbol_rate(l));
    double fsc = ulk_ratio_to_double(l->fsc);
    if (c && is_complex) add_mark(m, &n, fo, 0, "carrier");
    add_mark(m, &n, fo + fsc, rs, "data");
    if (is_complex) add_mark(m, &n, fo - fsc, rs, "data");
    if (l->has_pilot) {
        double fp = ulk_ratio_to_double(l->fp);
        add_mark(m, &n, fo + fp, 0, "pilot");
        if (is_complex) add_mark(m, &n, fo - fp, 0, "pilot");
    }
    if (c && c->has_voice) {
        double fv = ulk_ratio_to_double(c->voice_fv_hz);
        double hv = ulk_ratio_to_double(c->voice_dev_hz) + ulk_ratio_to_double(c->voice_tone_hz);
        add_mark(m, &n, fo + fv, hv, "voice");
        if (is_complex) add_mark(m, &n, fo - fv, hv, "voice");
    }
    if (c && c->has_ranging) add_mark(m, &n, fo, ulk_ratio_to_double(c->chip_rate), "ranging");
    return n;
}

/* The strongest line, refined by a parabola through the dB values of its neighbours. */
static void find_peak(ulk_rx_spectrum *s)
{
    const double *f = s->f_hz, *p = s->power;
    size_t nb = s->n_bins, kmax = 0;
    for (size_t k = 1; k < nb; k++)
        if (p[k] > p[kmax]) kmax = k;
    s->peak_bin_hz = f[kmax];
    s->peak_hz = f[kmax];
    s->peak_db = p[kmax] > 0 ? 10 * log10(p[kmax]) : -HUGE_VAL;
    if (kmax > 0 && kmax + 1 < nb && p[kmax - 1] > 0 && p[kmax + 1] > 0 && p[kmax] > 0) {
        double a = 10 * log10(p[kmax - 1]), b = s->peak_db, c = 10 * log10(p[kmax + 1]);
        double den = a - 2 * b + c;
        if (den < 0) s->peak_hz += 0.5 * (a - c) / den * (f[kmax + 1] - f[kmax]);
    }
}

/* Feeds every sample to w; NaN or infinite values would spread over every bin: counted and
 * taken as 0. */
static int feed_all(ulk_reader *ri, ulk_reader *rq, ulk_welch *w, const char *path, ulk_rx_spectrum *s,
                    ulk_diag *diag)
{
    float *bi = ulk_malloc(CHUNK * sizeof *bi), *bq = ulk_malloc(CHUNK * sizeof *bq);
    int rc = bi && bq ? 0 : ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    while (rc == 0) {
        long gi = ulk_reader_read(ri, bi, CHUNK);
        if (gi < 0) { rc = ulk_fail(diag, (int)gi, "%s", ulk_reader_error(ri)); break; }
        if (gi == 0) break;
        if (rq) {
            long gq = ulk_reader_read(rq, bq, (size_t)gi);
            if (gq != gi) {
                rc = ulk_fail(diag, ULK_EFORMAT, "%s: I and Q differ in length%s%s", path, gq < 0 ? ": " : "",
                              gq < 0 ? ulk_reader_error(rq) : "");
                break;
            }
        }
        for (long k = 0; k < gi; k++) {
            if (!isfinite(bi[k])) { bi[k] = 0; s->n_nonfinite++; }
            if (rq && !isfinite(bq[k])) { bq[k] = 0; s->n_nonfinite++; }
        }
        ulk_welch_feed(w, bi, rq ? bq : NULL, (size_t)gi);
        s->n_samples += (uint64_t)gi;
    }
    ulk_free(bi);
    ulk_free(bq);
    return rc;
}

/* The segment length: nfft as given, or 8192 halved to fit a short capture. */
static int pick_nfft(int64_t len, size_t nfft, const char *path, size_t *out, ulk_diag *diag)
{
    size_t n = nfft ? nfft : 8192;
    if (len >= 0 && (uint64_t)len < n) {
        if (nfft || len < 16)
            return ulk_fail(diag, ULK_ELIMIT, "%s: %lld samples are fewer than one segment of %zu", path, (long long)len,
                            nfft ? nfft : (size_t)16);
        while (n > (uint64_t)len) n /= 2;
    }
    *out = n;
    return 0;
}

/* Copies the estimator's bins into s (which then owns them). */
static int take_result(ulk_welch *w, const char *path, ulk_rx_spectrum *s, ulk_diag *diag)
{
    const double *f, *p;
    if (ulk_welch_result(w, &f, &p, &s->n_bins, &s->n_segments) < 0)
        return ulk_fail(diag, ULK_ELIMIT, "%s: %llu samples are fewer than one segment of %zu", path,
                        (unsigned long long)s->n_samples, s->nfft);
    s->f_hz = ulk_malloc(s->n_bins * sizeof *s->f_hz);
    s->power = ulk_malloc(s->n_bins * sizeof *s->power);
    if (!s->f_hz || !s->power) return ulk_fail(diag, ULK_ENOMEM, "%s: out of memory", path);
    memcpy(s->f_hz, f, s->n_bins * sizeof *f);
    memcpy(s->power, p, s->n_bins * sizeof *p);
    return 0;
}

int ulk_rx_spectrum_file(const char *path, const ulk_sample_info *hint, size_t nfft, const ulk_dict *dict,
                         ulk_rx_spectrum *out, ulk_diag *diag)
{
    memset(out, 0, sizeof *out);
    ulk_reader *ri = NULL, *rq = NULL;
    ulk_welch *w = NULL;
    int rc = ulk_reader_open(path, hint, 0, &ri, diag);
    const ulk_sample_info *info = rc < 0 ? NULL : ulk_reader_info(ri);
    if (info && info->channels > 2)
        rc = ulk_fail(diag, ULK_EINVAL, "%s: has %d channels; a capture is real (1) or complex I/Q (2)", path,
                      info->channels);
    if (rc >= 0) {
        out->complex_ = info->channels == 2;
        out->fs_hz = info->fs_hz;
        if (out->complex_) rc = ulk_reader_open(path, hint, 1, &rq, diag);
    }
    if (rc >= 0) rc = pick_nfft(ulk_reader_length(ri), nfft, path, &out->nfft, diag);
    if (rc >= 0) rc = ulk_welch_create(out->nfft, out->complex_, out->fs_hz, &w, diag);
    if (rc >= 0) rc = feed_all(ri, rq, w, path, out, diag);
    if (rc >= 0) rc = take_result(w, path, out, diag);
    if (rc >= 0) {
        find_peak(out);
        out->n_marks = dict ? build_marks(dict, out->complex_, out->marks) : 0;
    }
    ulk_welch_destroy(w);
    ulk_reader_close(ri);
    ulk_reader_close(rq);
    if (rc < 0) ulk_rx_spectrum_free(out);
    return rc < 0 ? rc : 0;
}

void ulk_rx_spectrum_free(ulk_rx_spectrum *s)
{
    if (!s) return;
    ulk_free(s->f_hz);
    ulk_free(s->power);
    s->f_hz = s->power = NULL;
    s->n_bins = 0;
}
