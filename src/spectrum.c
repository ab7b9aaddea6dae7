/* src/spectrum.c - Welch-averaged power spectrum (FFTW3, single precision) and its plot
 * (cairo). Contracts in include/ulk/spectrum.h.
 *
 * Sums are kept in double: an hour-long capture averages millions of segments, and float
 * accumulators would stop growing long before that.
 */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "ulk/spectrum.h"
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

#ifdef ULK_HAVE_CAIRO
#define PW 1100.0
#define PH 520.0

static cairo_status_t write_fp(void *closure, const unsigned char *data, unsigned int len)
{
    return fwrite(data, 1, len, (FILE *)closure) == len ? CAIRO_STATUS_SUCCESS : CAIRO_STATUS_WRITE_ERROR;
}

static void text(cairo_t *cr, double x, double y, const char *s, double align)
{
    cairo_text_extents_t e;
    cairo_text_extents(cr, s, &e);
    cairo_move_to(cr, x - align * e.width, y);
    cairo_show_text(cr, s);
}

static const double mark_rgb[6][3] = {{0.85, 0.33, 0.10}, {0.00, 0.45, 0.74}, {0.47, 0.67, 0.19},
                                      {0.49, 0.18, 0.56}, {0.93, 0.69, 0.13}, {0.30, 0.75, 0.93}};

static void draw(cairo_t *cr, const double *f, const double *p, size_t n, const ulk_spectrum_mark *mk, int nm,
                 const char *title)
{
    const double x0 = 70, y0 = 40, w = PW - 100, h = PH - 110;
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_paint(cr);
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, 11);
    double pmax = 0;
    for (size_t k = 0; k < n; k++)
        if (p[k] > pmax) pmax = p[k];
    double top = pmax > 0 ? ceil(10 * log10(pmax) / 10) * 10 : 0, bot = top - 90;
    double fmin = f[0], fmax = f[n - 1];
    if (fmax <= fmin) fmax = fmin + 1;
    double kscale = fmax - fmin > 20000 ? 1000 : 1;
#define XF(v) (x0 + ((v) - fmin) / (fmax - fmin) * w)
#define YD(v) (y0 + (top - (v)) / (top - bot) * h)
    /* marks under the trace */
    for (int i = 0; i < nm; i++) {
        /* one colour per label, so both sides of a channel match */
        int ci = i % 6;
        for (int j = 0; j < i; j++)
            if (mk[j].label && mk[i].label && !strcmp(mk[j].label, mk[i].label)) { ci = j % 6; break; }
        const double *c = mark_rgb[ci];
        double a = XF(fmax < mk[i].f_lo_hz ? fmax : fmin > mk[i].f_lo_hz ? fmin : mk[i].f_lo_hz);
        double b = XF(fmax < mk[i].f_hi_hz ? fmax : fmin > mk[i].f_hi_hz ? fmin : mk[i].f_hi_hz);
        if (b > a) {
            cairo_set_source_rgba(cr, c[0], c[1], c[2], 0.12);
            cairo_rectangle(cr, a, y0, b - a, h);
            cairo_fill(cr);
        }
        if (mk[i].f_hz >= fmin && mk[i].f_hz <= fmax) {
            cairo_set_source_rgb(cr, c[0], c[1], c[2]);
            cairo_set_line_width(cr, 1);
            double x = XF(mk[i].f_hz);
            cairo_move_to(cr, x, y0);
            cairo_line_to(cr, x, y0 + h);
            cairo_stroke(cr);
            if (mk[i].label) text(cr, x + 3, y0 + 12 + 13 * (i % 4), mk[i].label, 0);
        }
    }
    /* grid and axes */
    char buf[64];
    cairo_set_line_width(cr, 0.5);
    for (double v = bot; v <= top + 1e-9; v += 10) {
        cairo_set_source_rgb(cr, 0.85, 0.85, 0.85);
        cairo_move_to(cr, x0, YD(v));
        cairo_line_to(cr, x0 + w, YD(v));
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        snprintf(buf, sizeof buf, "%.0f", v);
        text(cr, x0 - 6, YD(v) + 4, buf, 1);
    }
    double span = (fmax - fmin) / kscale, step = pow(10, floor(log10(span / 2)));
    if (span / step > 10) step *= 2;
    if (span / step > 10) step *= 2.5;
    for (double v = ceil(fmin / kscale / step) * step; v <= fmax / kscale + 1e-9; v += step) {
        double x = XF(v * kscale);
        cairo_set_source_rgb(cr, 0.85, 0.85, 0.85);
        cairo_move_to(cr, x, y0);
        cairo_line_to(cr, x, y0 + h);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        snprintf(buf, sizeof buf, "%g", fabs(v) < 1e-9 * step ? 0.0 : v);
        text(cr, x, y0 + h + 15, buf, 0.5);
    }
    text(cr, x0 + w / 2, y0 + h + 32, kscale > 1 ? "frequency (kHz)" : "frequency (Hz)", 0.5);
    cairo_save(cr);
    cairo_translate(cr, 22, y0 + h / 2);
    cairo_rotate(cr, -M_PI / 2);
    text(cr, 0, 0, "power per bin (dB, line power)", 0.5);
    cairo_restore(cr);
    cairo_set_font_size(cr, 13);
    if (title) text(cr, x0, 24, title, 0);
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
#undef XF
#undef YD
}
#endif

int ulk_spectrum_plot(const double *f_hz, const double *power, size_t n, const ulk_spectrum_mark *marks, int n_marks,
                      const char *title, const char *path, ulk_diag *diag)
{
    if (!f_hz || !power || !path || n < 2 || (n_marks > 0 && !marks))
        return ulk_fail(diag, ULK_EINVAL, "spectrum plot: nothing to draw");
    size_t len = strlen(path);
    int svg = len > 4 && !strcmp(path + len - 4, ".svg");
    int png = len > 4 && !strcmp(path + len - 4, ".png");
    if (!svg && !png) return ulk_fail(diag, ULK_EINVAL, "%s: the plot file must end in .png or .svg", path);
#ifndef ULK_HAVE_CAIRO
    (void)title;
    return ulk_fail(diag, ULK_EFORMAT, "%s: this build has no cairo, so it cannot plot", path);
#else
#ifndef CAIRO_HAS_SVG_SURFACE
    if (svg) return ulk_fail(diag, ULK_EFORMAT, "%s: this cairo has no SVG surface; use .png", path);
#endif
    ulk_afile af;
    int rc = ulk_afile_open(&af, path, diag);
    if (rc) return rc;
    cairo_surface_t *s;
#ifdef CAIRO_HAS_SVG_SURFACE
    if (svg) s = cairo_svg_surface_create_for_stream(write_fp, af.fp, PW, PH);
    else
#endif
        s = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)PW, (int)PH);
    if (cairo_surface_status(s) != CAIRO_STATUS_SUCCESS) {
        cairo_surface_destroy(s);
        ulk_afile_abort(&af);
        return ulk_fail(diag, ULK_ENOMEM, "%s: cannot create the drawing surface", path);
    }
    cairo_t *cr = cairo_create(s);
    draw(cr, f_hz, power, n, marks, n_marks > 0 ? n_marks : 0, title);
    cairo_status_t st = cairo_status(cr);
    cairo_destroy(cr);
    if (png && st == CAIRO_STATUS_SUCCESS) st = cairo_surface_write_to_png_stream(s, write_fp, af.fp);
    cairo_surface_finish(s);
    if (st == CAIRO_STATUS_SUCCESS) st = cairo_surface_status(s);
    cairo_surface_destroy(s);
    cairo_debug_reset_static_data(); /* font caches: keeps leak checkers quiet */
    if (st != CAIRO_STATUS_SUCCESS) {
        ulk_afile_abort(&af);
        return ulk_fail(diag, ULK_EIO, "%s: drawing failed: %s; no output written", path, cairo_status_to_string(st));
    }
    return ulk_afile_commit(&af, diag);
#endif
}
