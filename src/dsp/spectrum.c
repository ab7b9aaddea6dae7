/* src/spectrum.c - Welch-averaged power spectrum (FFTW3, single precision) and its plot
 * (cairo). Contracts in include/ulk/spectrum.h.
 *
 * Sums are kept in double: an hour-long capture averages millions of segments, and float
 * accumulators would stop growing long before that.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "ulk/spectrum.h"
#include "picture.h"
#include "util.h"

#ifdef ULK_HAVE_FFTW
#include <fftw3.h>
#endif
#ifdef ULK_HAVE_CAIRO
#include <cairo.h>
#ifdef CAIRO_HAS_SVG_SURFACE
#include <cairo-svg.h>
#endif
#endif

#ifndef M_PI
#define M_PI 3.14159265358979323846
#endif

struct ulk_welch {
    size_t nfft, fill;
    int is_complex;
    double fs_hz;
    float *win;          /* Hann window */
    double win_sum;
    float *bi, *bq;      /* the current segment, nfft samples (bq unused when real) */
    double *acc;         /* sum over segments of |X_k|^2, nfft bins in FFT order */
    uint64_t n_seg;
    double *f_out, *p_out;
#ifdef ULK_HAVE_FFTW
    fftwf_complex *in, *out;
    fftwf_plan plan;
#endif
};

void ulk_welch_destroy(ulk_welch *w)
{
    if (!w) return;
#ifdef ULK_HAVE_FFTW
    if (w->plan) fftwf_destroy_plan(w->plan);
    fftwf_free(w->in);
    fftwf_free(w->out);
#endif
    ulk_free(w->win);
    ulk_free(w->bi);
    ulk_free(w->bq);
    ulk_free(w->acc);
    ulk_free(w->f_out);
    ulk_free(w->p_out);
    ulk_free(w);
}

int ulk_welch_create(size_t nfft, int is_complex, double fs_hz, ulk_welch **out, ulk_diag *diag)
{
    if (out) *out = NULL;
    if (!out) return ULK_EINVAL;
    if (nfft < 16 || nfft > ((size_t)1 << 22) || (nfft & (nfft - 1)))
        return ulk_fail(diag, ULK_EINVAL, "spectrum: segment length %zu is not a power of two from 16 to 4194304",
                        nfft);
    if (!(fs_hz > 0) || !isfinite(fs_hz))
        return ulk_fail(diag, ULK_EINVAL, "spectrum: the sample rate must be a positive number");
#ifndef ULK_HAVE_FFTW
    (void)is_complex;
    return ulk_fail(diag, ULK_EFORMAT, "spectrum: this build has no FFTW3, so it cannot compute spectra");
#else
    ulk_welch *w = ulk_calloc(1, sizeof *w);
    if (!w) return ulk_fail(diag, ULK_ENOMEM, "spectrum: out of memory");
    w->nfft = nfft;
    w->is_complex = !!is_complex;
    w->fs_hz = fs_hz;
    w->win = ulk_malloc(nfft * sizeof *w->win);
    w->bi = ulk_malloc(nfft * sizeof *w->bi);
    w->bq = ulk_calloc(nfft, sizeof *w->bq);
    w->acc = ulk_calloc(nfft, sizeof *w->acc);
    w->f_out = ulk_malloc(nfft * sizeof *w->f_out);
    w->p_out = ulk_malloc(nfft * sizeof *w->p_out);
    w->in = fftwf_malloc(nfft * sizeof(fftwf_complex));
    w->out = fftwf_malloc(nfft * sizeof(fftwf_complex));
    if (!w->win || !w->bi || !w->bq || !w->acc || !w->f_out || !w->p_out || !w->in || !w->out) {
        ulk_welch_destroy(w);
        return ulk_fail(diag, ULK_ENOMEM, "spectrum: out of memory");
    }
    /* FFTW_ESTIMATE: no timing runs, so the plan (and the result) does not depend on the
     * machine's load; one plan serves every segment. */
    w->plan = fftwf_plan_dft_1d((int)nfft, w->in, w->out, FFTW_FORWARD, FFTW_ESTIMATE);
    if (!w->plan) {
        ulk_welch_destroy(w);
        return ulk_fail(diag, ULK_ENOMEM, "spectrum: FFTW could not plan a %zu-point transform", nfft);
    }
    /* periodic Hann window (the usual choice for Welch averaging, common practice) */
    double s = 0;
    for (size_t k = 0; k < nfft; k++) {
        w->win[k] = (float)(0.5 - 0.5 * cos(2.0 * M_PI * (double)k / (double)nfft));
        s += w->win[k];
    }
    w->win_sum = s;
    *out = w;
    return 0;
#endif
}

#ifdef ULK_HAVE_FFTW
static void segment(ulk_welch *w)
{
    for (size_t k = 0; k < w->nfft; k++) {
        w->in[k][0] = w->bi[k] * w->win[k];
        w->in[k][1] = w->is_complex ? w->bq[k] * w->win[k] : 0.0f;
    }
    fftwf_execute(w->plan);
    for (size_t k = 0; k < w->nfft; k++) {
        double re = w->out[k][0], im = w->out[k][1];
        w->acc[k] += re * re + im * im;
    }
    w->n_seg++;
}
#endif

int ulk_welch_feed(ulk_welch *w, const float *i, const float *q, size_t n)
{
    if (!w || (!i && n) || (!q != !w->is_complex && n)) return ULK_EINVAL;
#ifdef ULK_HAVE_FFTW
    const size_t half = w->nfft / 2;
    size_t done = 0;
    while (done < n) {
        size_t m = w->nfft - w->fill;
        if (m > n - done) m = n - done;
        memcpy(w->bi + w->fill, i + done, m * sizeof *i);
        if (q) memcpy(w->bq + w->fill, q + done, m * sizeof *q);
        w->fill += m;
        done += m;
        if (w->fill == w->nfft) {
            segment(w);
            /* 50 % overlap: the second half starts the next segment */
            memmove(w->bi, w->bi + half, half * sizeof *w->bi);
            if (q) memmove(w->bq, w->bq + half, half * sizeof *w->bq);
            w->fill = half;
        }
    }
    return 0;
#else
    (void)q;
    return ULK_EFORMAT;
#endif
}

int ulk_welch_result(ulk_welch *w, const double **f_hz, const double **power, size_t *n_bins, uint64_t *n_segments)
{
    if (!w || !f_hz || !power || !n_bins) return ULK_EINVAL;
    if (n_segments) *n_segments = w->n_seg;
    if (w->n_seg == 0) return ULK_ELIMIT;
    const size_t N = w->nfft;
    const double norm = 1.0 / ((double)w->n_seg * w->win_sum * w->win_sum);
    const double df = w->fs_hz / (double)N;
    size_t nb = 0;
    if (w->is_complex) {
        /* FFT order 0 .. N-1 to increasing frequency -N/2 .. N/2 - 1 */
        for (size_t j = 0; j < N; j++) {
            size_t k = (j + N / 2) % N;
            w->f_out[nb] = ((double)j - (double)(N / 2)) * df;
            w->p_out[nb++] = w->acc[k] * norm;
        }
    } else {
        for (size_t k = 0; k <= N / 2; k++) {
            w->f_out[nb] = (double)k * df;
            w->p_out[nb++] = w->acc[k] * norm * (k == 0 || k == N / 2 ? 1.0 : 2.0);
        }
    }
    *f_hz = w->f_out;
    *power = w->p_out;
    *n_bins = nb;
    return 0;
}

/* ---------------------------------------------------------------- plot */

/* The spectrum picture, through the one picture surface (src/picture.h). The axes come from
 * the data: the top is the strongest bin rounded up to 10 dB, the floor 10 dB under the 2nd
 * percentile of the bins (the noise floor, not an empty bin), rounded down to 10 dB, kept 30
 * to 140 dB under the top; ticks at 1-2-5 steps on both axes. */

#ifdef ULK_HAVE_CAIRO
static int cmp_double(const void *a, const void *b)
{
    double x = *(const double *)a, y = *(const double *)b;
    return x < y ? -1 : x > y;
}

/* The value at fraction q of the sorted finite dB values of p (NAN when none or out of
 * memory: the caller then falls back to a fixed 90 dB span). */
static double db_quantile(const double *p, size_t n, double q)
{
    double *v = ulk_malloc(n * sizeof *v);
    if (!v) return NAN;
    size_t m = 0;
    for (size_t k = 0; k < n; k++)
        if (p[k] > 0 && isfinite(p[k])) v[m++] = 10 * log10(p[k]);
    double r = NAN;
    if (m) {
        qsort(v, m, sizeof *v, cmp_double);
        r = v[(size_t)(q * (double)(m - 1))];
    }
    ulk_free(v);
    return r;
}
#endif

#ifdef ULK_HAVE_CAIRO
#define PW 1100.0
#define PH 540.0

/* Series index of a mark: one per label (both sides of a channel match), in order of first
 * appearance. */
static int mark_series(const ulk_spectrum_mark *mk, int i)
{
    int k = 0;
    for (int j = 0; j < i; j++) {
        int first = 1;
        for (int q = 0; q < j; q++)
            if (mk[q].label && mk[j].label && !strcmp(mk[q].label, mk[j].label)) { first = 0; break; }
        if (mk[j].label && mk[i].label && !strcmp(mk[j].label, mk[i].label)) return k;
        k += first;
    }
    return k;
}

/* The channel marks under the trace: a light band for the main lobe, a dashed line at the
 * centre; drawn[k] and names[k] say which series appear (for the legend). */
static void draw_marks(cairo_t *cr, const ulk_spectrum_mark *mk, int nm, double fmin, double fmax, double x0,
                       double y0, double w, double h, int *drawn, const char **names)
{
#define XF(v) (x0 + ((v) - fmin) / (fmax - fmin) * w)
    for (int i = 0; i < nm; i++) {
        int k = mark_series(mk, i) % ULK_PIC_N_SERIES;
        double a = XF(fmax < mk[i].f_lo_hz ? fmax : fmin > mk[i].f_lo_hz ? fmin : mk[i].f_lo_hz);
        double b = XF(fmax < mk[i].f_hi_hz ? fmax : fmin > mk[i].f_hi_hz ? fmin : mk[i].f_hi_hz);
        int in = mk[i].f_hz >= fmin && mk[i].f_hz <= fmax;
        if (b > a) {
            ulk_pic_series(cr, k, 0.14);
            cairo_rectangle(cr, a, y0, b - a, h);
            cairo_fill(cr);
        }
        if (in) {
            ulk_pic_series(cr, k, 1);
            cairo_set_line_width(cr, 1.5);
            ulk_pic_dash(cr, k);
            double x = XF(mk[i].f_hz);
            cairo_move_to(cr, x, y0);
            cairo_line_to(cr, x, y0 + h);
            cairo_stroke(cr);
            cairo_set_dash(cr, NULL, 0, 0);
        }
        if (in || b > a) { drawn[k] = 1; names[k] = mk[i].label; }
    }
#undef XF
}

static void draw(cairo_t *cr, const double *f, const double *p, size_t n, const ulk_spectrum_mark *mk, int nm,
                 const char *title, double floor_db)
{
    const double x0 = 70, y0 = 40, w = PW - 100, h = PH - 130;
    double pmax = 0;
    for (size_t k = 0; k < n; k++)
        if (p[k] > pmax) pmax = p[k];
    double top = pmax > 0 ? ceil(10 * log10(pmax) / 10) * 10 : 0;
    double bot = isfinite(floor_db) ? floor((floor_db - 10) / 10) * 10 : top - 90;
    if (bot > top - 30) bot = top - 30;
    if (bot < top - 140) bot = top - 140;
    double fmin = f[0], fmax = f[n - 1];
    if (fmax <= fmin) fmax = fmin + 1;
    double kscale = fmax - fmin > 20000 ? 1000 : 1;
#define XF(v) (x0 + ((v) - fmin) / (fmax - fmin) * w)
#define YD(v) (y0 + (top - (v)) / (top - bot) * h)
    int drawn[ULK_PIC_N_SERIES] = {0};
    const char *names[ULK_PIC_N_SERIES] = {0};
    draw_marks(cr, mk, nm, fmin, fmax, x0, y0, w, h, drawn, names);
    /* grid and axes, 1-2-5 ticks */
    char buf[64];
    double t[64], step;
    int nt = ulk_pic_ticks(bot, top, 10, t, 64, &step);
    cairo_set_line_width(cr, 0.5);
    for (int i = 0; i < nt; i++) {
        cairo_set_source_rgb(cr, 0.86, 0.86, 0.86);
        cairo_move_to(cr, x0, YD(t[i]));
        cairo_line_to(cr, x0 + w, YD(t[i]));
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        ulk_pic_tick_label(t[i], step, buf, sizeof buf);
        ulk_pic_text(cr, x0 - 6, YD(t[i]) + 4, buf, 1);
    }
    nt = ulk_pic_ticks(fmin / kscale, fmax / kscale, 12, t, 64, &step);
    for (int i = 0; i < nt; i++) {
        double x = XF(t[i] * kscale);
        cairo_set_source_rgb(cr, 0.86, 0.86, 0.86);
        cairo_move_to(cr, x, y0);
        cairo_line_to(cr, x, y0 + h);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        ulk_pic_tick_label(t[i], step, buf, sizeof buf);
        ulk_pic_text(cr, x, y0 + h + 15, buf, 0.5);
    }
    ulk_pic_text(cr, x0 + w / 2, y0 + h + 32, kscale > 1 ? "frequency (kHz)" : "frequency (Hz)", 0.5);
    cairo_save(cr);
    cairo_translate(cr, 22, y0 + h / 2);
    cairo_rotate(cr, -M_PI / 2);
    ulk_pic_text(cr, 0, 0, "power per bin (dB, line power)", 0.5);
    cairo_restore(cr);
    cairo_set_font_size(cr, 13);
    if (title) ulk_pic_text(cr, x0, 24, title, 0);
    cairo_set_font_size(cr, 11);
    /* the trace: per pixel column its largest value, so no line disappears between pixels */
    cairo_save(cr);
    cairo_rectangle(cr, x0, y0, w, h);
    cairo_clip(cr);
    cairo_set_source_rgb(cr, 0.1, 0.1, 0.1);
    cairo_set_line_width(cr, 1);
    int started = 0, col = -1;
    double cmax = -HUGE_VAL;
    for (size_t k = 0; k <= n; k++) {
        int c = k < n ? (int)floor(XF(f[k])) : -2;
        if (c != col && col != -1) {
            double y = YD(cmax > bot - 20 ? cmax : bot - 20);
            if (!started) { cairo_move_to(cr, col, y); started = 1; }
            else cairo_line_to(cr, col, y);
            cmax = -HUGE_VAL;
        }
        if (k == n) break;
        col = c;
        double d = p[k] > 0 ? 10 * log10(p[k]) : bot - 20;
        if (d > cmax) cmax = d;
    }
    cairo_stroke(cr);
    cairo_restore(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_rectangle(cr, x0, y0, w, h);
    cairo_stroke(cr);
    /* legend: only the channels drawn */
    double lx = x0, ly = y0 + h + 56;
    for (int k = 0; k < ULK_PIC_N_SERIES; k++)
        if (drawn[k] && names[k]) lx = ulk_pic_legend(cr, lx, ly, k, 0, names[k]);
#undef XF
#undef YD
}
#endif

int ulk_spectrum_plot(const double *f_hz, const double *power, size_t n, const ulk_spectrum_mark *marks, int n_marks,
                      const char *title, const char *path, ulk_diag *diag)
{
    if (!f_hz || !power || !path || n < 2 || (n_marks > 0 && !marks))
        return ulk_fail(diag, ULK_EINVAL, "spectrum plot: nothing to draw");
    int rc = ulk_picture_check(path, diag);
    if (rc) return rc;
#ifndef ULK_HAVE_CAIRO
    (void)title;
    return ULK_EFORMAT;
#else
    double floor_db = db_quantile(power, n, 0.02);
    ulk_picture pic;
    if ((rc = ulk_picture_open(&pic, path, PW, PH, diag))) return rc;
    draw(pic.cr, f_hz, power, n, marks, n_marks > 0 ? n_marks : 0, title, floor_db);
    return ulk_picture_finish(&pic, diag);
#endif
}
