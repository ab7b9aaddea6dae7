/* src/plot.c - PNG of a decode (cairo): soft sub-bit values against time, a histogram of
 * them, and each word's margin. Soft values are thinned to at most ULK_PLOT_MAX_POINTS. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "ulk/plot.h"
#include "util.h"
#ifdef ULK_HAVE_CAIRO
#include <cairo.h>
#endif

typedef struct {
    double t;
    float v;
} soft_pt;

typedef struct {
    double t, margin;
    int accepted;
} word_pt;

struct ulk_plot {
    soft_pt *s;
    size_t ns, stride, skip;
    word_pt *w;
    size_t nw, capw;
    int oom;
};

ulk_plot *ulk_plot_create(void)
{
    ulk_plot *p = ulk_calloc(1, sizeof *p);
    if (!p) return NULL;
    p->s = ulk_malloc(ULK_PLOT_MAX_POINTS * sizeof *p->s);
    if (!p->s) { ulk_free(p); return NULL; }
    p->stride = 1;
    return p;
}

void ulk_plot_soft(ulk_plot *p, double t, float v)
{
    if (!p) return;
    if (p->skip) { p->skip--; return; }
    p->skip = p->stride - 1;
    if (p->ns == ULK_PLOT_MAX_POINTS) {
        /* keep every other point and halve the rate from now on */
        for (size_t i = 0; i < p->ns / 2; i++) p->s[i] = p->s[2 * i];
        p->ns /= 2;
        p->stride *= 2;
        p->skip = p->stride - 1;
    }
    p->s[p->ns].t = t;
    p->s[p->ns].v = v;
    p->ns++;
}

void ulk_plot_word(ulk_plot *p, double t, double margin, int accepted)
{
    if (!p) return;
    if (p->nw == p->capw) {
        size_t nc = p->capw ? 2 * p->capw : 64;
        word_pt *nw = ulk_realloc(p->w, nc * sizeof *nw);
        if (!nw) { p->oom = 1; return; }
        p->w = nw;
        p->capw = nc;
    }
    p->w[p->nw].t = t;
    p->w[p->nw].margin = margin;
    p->w[p->nw].accepted = accepted;
    p->nw++;
}

void ulk_plot_destroy(ulk_plot *p)
{
    if (!p) return;
    ulk_free(p->s);
    ulk_free(p->w);
    ulk_free(p);
}

#ifdef ULK_HAVE_CAIRO
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

/* A frame with a title, y ticks at the given values, and x ticks over [t0, t1]. */
static void frame(cairo_t *cr, double x, double y, double w, double h, const char *title, const double *yt, int nyt,
                  double y0, double y1, double t0, double t1, int xlabels)
{
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, x + 0.5, y + 0.5, w, h);
    cairo_stroke(cr);
    cairo_set_font_size(cr, 13);
    text(cr, x, y - 6, title, 0);
    cairo_set_font_size(cr, 11);
    char buf[32];
    for (int i = 0; i < nyt; i++) {
        double yy = y + h - (yt[i] - y0) / (y1 - y0) * h;
        snprintf(buf, sizeof buf, "%g", yt[i]);
        text(cr, x - 6, yy + 4, buf, 1);
        cairo_set_source_rgba(cr, 0, 0, 0, 0.15);
        cairo_move_to(cr, x, yy + 0.5);
        cairo_line_to(cr, x + w, yy + 0.5);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
    }
    if (!xlabels) return;
    double span = t1 - t0, step = pow(10, floor(log10(span > 0 ? span : 1)));
    if (span / step < 3) step /= 5;
    else if (span / step < 6) step /= 2;
    for (double t = ceil(t0 / step) * step; t <= t1 + 1e-12; t += step) {
        double xx = x + (t - t0) / (t1 - t0) * w;
        snprintf(buf, sizeof buf, "%g", fabs(t) < step * 1e-6 ? 0.0 : t);
        text(cr, xx, y + h + 14, buf, 0.5);
    }
}
#endif

int ulk_plot_write_png(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag)
{
    if (!p || !path) return ulk_fail(diag, ULK_EINVAL, "plot: nothing to draw");
#ifndef ULK_HAVE_CAIRO
    (void)title;
    return ulk_fail(diag, ULK_EINVAL, "%s: this build has no plotting (cairo was not found)", path);
#else
    const int W = 1100, H = 720;
    cairo_surface_t *sf = cairo_image_surface_create(CAIRO_FORMAT_RGB24, W, H);
    cairo_t *cr = cairo_create(sf);
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_paint(cr);
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, 15);
    cairo_set_source_rgb(cr, 0, 0, 0);
    text(cr, 20, 24, title ? title : "ulk decode", 0);

    double t0 = 0, t1 = 1;
    if (p->ns) { t0 = p->s[0].t; t1 = p->s[p->ns - 1].t; }
    if (p->nw) {
        if (!p->ns || p->w[0].t < t0) t0 = p->w[0].t;
        if (p->w[p->nw - 1].t > t1) t1 = p->w[p->nw - 1].t;
    }
    if (!(t1 > t0)) t1 = t0 + 1;

    /* panel 1: soft sub-bit values against time */
    const double px = 70, py = 60, pw = 760, ph = 360;
    const double yt[] = {-2, -1, 0, 1, 2};
    frame(cr, px, py, pw, ph, "soft sub-bit values (units of the estimated amplitude)", yt, 5, -2.5, 2.5, t0, t1, 1);
    cairo_set_source_rgba(cr, 0.1, 0.3, 0.8, p->ns > 50000 ? 0.35 : 0.8);
    int hist[100] = {0};
    for (size_t i = 0; i < p->ns; i++) {
        double v = p->s[i].v;
        if (isfinite(v)) {
            int b = (int)floor((v + 2.5) / 5.0 * 100);
            if (b >= 0 && b < 100) hist[b]++;
        }
        if (v > 2.5) v = 2.5;
        if (v < -2.5) v = -2.5;
        if (!isfinite(v)) continue;
        double xx = px + (p->s[i].t - t0) / (t1 - t0) * pw, yy = py + ph - (v + 2.5) / 5.0 * ph;
        cairo_rectangle(cr, xx - 0.75, yy - 0.75, 1.5, 1.5);
    }
    cairo_fill(cr);

    /* panel 2: histogram of the soft values (the eye opening of the whole capture) */
    const double hx = 880, hw = 190;
    frame(cr, hx, py, hw, ph, "histogram", yt, 0, -2.5, 2.5, 0, 1, 0);
    int hmax = 1;
    for (int b = 0; b < 100; b++) if (hist[b] > hmax) hmax = hist[b];
    cairo_set_source_rgb(cr, 0.1, 0.3, 0.8);
    for (int b = 0; b < 100; b++) {
        double yy = py + ph - (b + 1) / 100.0 * ph, len = (double)hist[b] / hmax * hw;
        cairo_rectangle(cr, hx, yy, len, ph / 100.0);
    }
    cairo_fill(cr);

    /* panel 3: word margins */
    const double my = 480, mh = 180;
    const double mt[] = {0, 0.5, 1};
    char mtitle[128];
    size_t nacc = 0;
    for (size_t i = 0; i < p->nw; i++) nacc += p->w[i].accepted != 0;
    snprintf(mtitle, sizeof mtitle, "word margins (1 = noiseless, 0 = a tie): %zu accepted (green), %zu rejected (red)",
             nacc, p->nw - nacc);
    frame(cr, px, my, pw, mh, mtitle, mt, 3, 0, 1.2, t0, t1, 1);
    for (size_t i = 0; i < p->nw; i++) {
        double m = p->w[i].margin;
        if (m > 1.2) m = 1.2;
        if (m < 0) m = 0;
        double xx = px + (p->w[i].t - t0) / (t1 - t0) * pw, yy = my + mh - m / 1.2 * mh;
        if (p->w[i].accepted) cairo_set_source_rgb(cr, 0.1, 0.6, 0.1);
        else cairo_set_source_rgb(cr, 0.85, 0.1, 0.1);
        cairo_move_to(cr, xx + 0.5, my + mh);
        cairo_line_to(cr, xx + 0.5, yy);
        cairo_stroke(cr);
        cairo_arc(cr, xx, yy, 3, 0, 2 * M_PI);
        cairo_fill(cr);
    }
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_font_size(cr, 12);
    text(cr, px + pw / 2, H - 16, "time in the capture (s)", 0.5);

    cairo_destroy(cr);
    int rc = 0;
    if (cairo_surface_status(sf) != CAIRO_STATUS_SUCCESS) {
        rc = ulk_fail(diag, ULK_EIO, "%s: drawing failed: %s", path, cairo_status_to_string(cairo_surface_status(sf)));
    } else {
        ulk_afile f;
        rc = ulk_afile_open(&f, path, diag);
        if (rc == 0) {
            cairo_status_t st = cairo_surface_write_to_png_stream(sf, write_fp, f.fp);
            if (st != CAIRO_STATUS_SUCCESS) {
                ulk_afile_abort(&f);
                rc = ulk_fail(diag, ULK_EIO, "%s: cannot write the PNG: %s", path, cairo_status_to_string(st));
            } else {
                rc = ulk_afile_commit(&f, diag);
            }
        }
    }
    cairo_surface_destroy(sf);
    return rc;
#endif
}
