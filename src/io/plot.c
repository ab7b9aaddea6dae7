/* src/plot.c - the picture of a decode (PNG or SVG by the extension, through src/picture.h):
 * soft sub-bit values against time, a histogram of them, and each word's margin. Soft values
 * are thinned to at most ULK_PLOT_MAX_POINTS. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "picture.h"
#include "ulk/plot.h"
#include "util.h"

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
/* Palette series (src/picture.h) of the three kinds of mark; accepted and rejected words also
 * differ in shape (dot, cross), so colour is never the only cue. */
enum { SERIES_SOFT = 4, SERIES_ACCEPTED = 2, SERIES_REJECTED = 0 };

/* A frame with a title, y ticks at 1-2-5 steps of [y0v, y1v] (ny at most), and x ticks
 * over [t0, t1]. */
static void frame(cairo_t *cr, double x, double y, double w, double h, const char *title, int ny, double y0v,
                  double y1v, double t0, double t1, int xlabels)
{
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, x + 0.5, y + 0.5, w, h);
    cairo_stroke(cr);
    cairo_set_font_size(cr, 13);
    ulk_pic_text(cr, x, y - 6, title, 0);
    cairo_set_font_size(cr, 11);
    char buf[32];
    double t[32], step;
    int n = ny ? ulk_pic_ticks(y0v, y1v, ny, t, 32, &step) : 0;
    for (int i = 0; i < n; i++) {
        double yy = y + h - (t[i] - y0v) / (y1v - y0v) * h;
        ulk_pic_tick_label(t[i], step, buf, sizeof buf);
        ulk_pic_text(cr, x - 6, yy + 4, buf, 1);
        cairo_set_source_rgb(cr, 0.86, 0.86, 0.86);
        cairo_move_to(cr, x, yy + 0.5);
        cairo_line_to(cr, x + w, yy + 0.5);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
    }
    if (!xlabels) return;
    n = ulk_pic_ticks(t0, t1, 10, t, 32, &step);
    for (int i = 0; i < n; i++) {
        double xx = x + (t[i] - t0) / (t1 - t0) * w;
        ulk_pic_tick_label(t[i], step, buf, sizeof buf);
        ulk_pic_text(cr, xx, y + h + 14, buf, 0.5);
    }
}

static void draw(cairo_t *cr, const ulk_plot *p, const char *title, double H)
{
    cairo_set_font_size(cr, 15);
    ulk_pic_text(cr, 20, 24, title ? title : "ulk decode", 0);

    double t0 = 0, t1 = 1;
    if (p->ns) { t0 = p->s[0].t; t1 = p->s[p->ns - 1].t; }
    if (p->nw) {
        if (!p->ns || p->w[0].t < t0) t0 = p->w[0].t;
        if (p->w[p->nw - 1].t > t1) t1 = p->w[p->nw - 1].t;
    }
    if (!(t1 > t0)) t1 = t0 + 1;

    /* panel 1: soft sub-bit values against time */
    const double px = 70, py = 60, pw = 760, ph = 360;
    frame(cr, px, py, pw, ph, "soft sub-bit values (units of the estimated amplitude)", 6, -2.5, 2.5, t0, t1, 1);
    ulk_pic_series(cr, SERIES_SOFT, p->ns > 50000 ? 0.35 : 0.8);
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
    frame(cr, hx, py, hw, ph, "histogram", 0, -2.5, 2.5, 0, 1, 0);
    int hmax = 1;
    for (int b = 0; b < 100; b++) if (hist[b] > hmax) hmax = hist[b];
    ulk_pic_series(cr, SERIES_SOFT, 1);
    for (int b = 0; b < 100; b++) {
        double yy = py + ph - (b + 1) / 100.0 * ph, len = (double)hist[b] / hmax * hw;
        cairo_rectangle(cr, hx, yy, len, ph / 100.0);
    }
    cairo_fill(cr);

    /* panel 3: word margins */
    const double my = 480, mh = 180;
    char mtitle[128];
    size_t nacc = 0;
    for (size_t i = 0; i < p->nw; i++) nacc += p->w[i].accepted != 0;
    snprintf(mtitle, sizeof mtitle, "word margins (1 = noiseless, 0 = a tie): %zu accepted, %zu rejected", nacc,
             p->nw - nacc);
    frame(cr, px, my, pw, mh, mtitle, 4, 0, 1.2, t0, t1, 1);
    for (size_t i = 0; i < p->nw; i++) {
        double m = p->w[i].margin;
        if (m > 1.2) m = 1.2;
        if (m < 0) m = 0;
        double xx = px + (p->w[i].t - t0) / (t1 - t0) * pw, yy = my + mh - m / 1.2 * mh;
        ulk_pic_series(cr, p->w[i].accepted ? SERIES_ACCEPTED : SERIES_REJECTED, 1);
        cairo_set_line_width(cr, 1);
        cairo_move_to(cr, xx + 0.5, my + mh);
        cairo_line_to(cr, xx + 0.5, yy);
        cairo_stroke(cr);
        if (p->w[i].accepted) {
            cairo_arc(cr, xx, yy, 3, 0, 2 * M_PI);
            cairo_fill(cr);
        } else {
            cairo_set_line_width(cr, 1.8);
            cairo_move_to(cr, xx - 3.5, yy - 3.5);
            cairo_line_to(cr, xx + 3.5, yy + 3.5);
            cairo_move_to(cr, xx - 3.5, yy + 3.5);
            cairo_line_to(cr, xx + 3.5, yy - 3.5);
            cairo_stroke(cr);
        }
    }
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_font_size(cr, 12);
    ulk_pic_text(cr, px + pw / 2, my + mh + 32, "time in the capture (s)", 0.5);
    /* legend: only what is drawn */
    cairo_set_font_size(cr, 11);
    double lx = px, ly = H - 14;
    if (nacc) lx = ulk_pic_legend(cr, lx, ly, SERIES_ACCEPTED, 1, "accepted word (dot)");
    if (p->nw > nacc) ulk_pic_legend(cr, lx, ly, SERIES_REJECTED, 1, "rejected word (cross)");
}
#endif

int ulk_plot_write(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag)
{
    if (!p || !path) return ulk_fail(diag, ULK_EINVAL, "plot: nothing to draw");
    int rc = ulk_picture_check(path, diag);
    if (rc) return rc;
#ifndef ULK_HAVE_CAIRO
    (void)title;
    return ULK_EFORMAT;
#else
    const double W = 1100, H = 740;
    ulk_picture pic;
    if ((rc = ulk_picture_open(&pic, path, W, H, diag))) return rc;
    draw(pic.cr, p, title, H);
    return ulk_picture_finish(&pic, diag);
#endif
}

int ulk_plot_write_png(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag)
{
    return ulk_plot_write(p, path, title, diag);
}
