/* src/picture.c - the one picture surface (src/picture.h): format by extension, atomic write,
 * a palette of our own in OKLCH, dash patterns and 1-2-5 ticks. */
#include "picture.h"

#include <math.h>
#include <stdio.h>
#include <string.h>
#include <strings.h>

#ifdef ULK_HAVE_CAIRO
#ifdef CAIRO_HAS_SVG_SURFACE
#include <cairo-svg.h>
#endif
#endif

ulk_pic_kind ulk_picture_kind(const char *path)
{
    size_t n = path ? strlen(path) : 0;
    if (n > 4 && !strcasecmp(path + n - 4, ".png")) return ULK_PIC_PNG;
    if (n > 4 && !strcasecmp(path + n - 4, ".svg")) return ULK_PIC_SVG;
    return ULK_PIC_NONE;
}

int ulk_picture_check(const char *path, ulk_diag *diag)
{
    ulk_pic_kind k = ulk_picture_kind(path);
    if (k == ULK_PIC_NONE)
        return ulk_fail(diag, ULK_EINVAL, "%s: a picture's name ends in .png or .svg (the extension chooses the format)",
                        path ? path : "(none)");
#ifndef ULK_HAVE_CAIRO
    return ulk_fail(diag, ULK_EFORMAT, "%s: this build has no cairo, so it cannot draw pictures", path);
#else
#ifndef CAIRO_HAS_SVG_SURFACE
    if (k == ULK_PIC_SVG) return ulk_fail(diag, ULK_EFORMAT, "%s: this cairo has no SVG surface; use .png", path);
#endif
    return 0;
#endif
}

/* OKLCH -> sRGB: OKLab to linear sRGB by the inverse matrices of Ottosson, "A perceptual color
 * space for image processing" (2020), then the sRGB transfer function (IEC 61966-2-1). */
static double srgb_encode(double c)
{
    if (c <= 0) return 0;
    if (c >= 1) return 1;
    return c <= 0.0031308 ? 12.92 * c : 1.055 * pow(c, 1 / 2.4) - 0.055;
}

void ulk_pic_rgb(int k, double rgb[3])
{
    static const double L_cycle[3] = {0.75, 0.60, 0.40};
    const double C = 0.12, h0_deg = 25;
    k %= ULK_PIC_N_SERIES;
    if (k < 0) k += ULK_PIC_N_SERIES;
    double h = (h0_deg + 360.0 * k / ULK_PIC_N_SERIES) * M_PI / 180.0;
    double L = L_cycle[k % 3], a = C * cos(h), b = C * sin(h);
    double l_ = L + 0.3963377774 * a + 0.2158037573 * b;
    double m_ = L - 0.1055613458 * a - 0.0638541728 * b;
    double s_ = L - 0.0894841775 * a - 1.2914855480 * b;
    double l = l_ * l_ * l_, m = m_ * m_ * m_, s = s_ * s_ * s_;
    rgb[0] = srgb_encode(+4.0767416621 * l - 3.3077115913 * m + 0.2309699292 * s);
    rgb[1] = srgb_encode(-1.2684380046 * l + 2.6097574011 * m - 0.3413193965 * s);
    rgb[2] = srgb_encode(-0.0041960863 * l - 0.7034186147 * m + 1.7076147010 * s);
}

int ulk_pic_ticks(double lo, double hi, int max_n, double *t, int cap, double *step_out)
{
    if (!(hi > lo) || max_n < 2 || !isfinite(lo) || !isfinite(hi)) {
        if (step_out) *step_out = 1;
        if (cap > 0 && isfinite(lo)) { t[0] = lo; return 1; }
        return 0;
    }
    double span = hi - lo, p = pow(10, floor(log10(span / max_n))), step = p;
    static const double mult[] = {1, 2, 5, 10, 20, 50};
    for (int i = 0; i < 6; i++) {
        step = mult[i] * p;
        if (floor(hi / step + 1e-9) - ceil(lo / step - 1e-9) + 1 <= max_n) break;
    }
    int n = 0;
    for (double i = ceil(lo / step - 1e-9); i <= floor(hi / step + 1e-9) && n < cap; i++) {
        double v = i * step;
        t[n++] = fabs(v) < step * 1e-9 ? 0.0 : v;
    }
    if (step_out) *step_out = step;
    return n;
}

void ulk_pic_tick_label(double v, double step, char *buf, size_t len)
{
    int dec = 0;
    for (double s = step; dec < 9 && fabs(s - floor(s + 0.5)) > 1e-9 * fmax(1, fabs(s)); s *= 10) dec++;
    snprintf(buf, len, "%.*f", dec, fabs(v) < step * 1e-9 ? 0.0 : v);
}

#ifdef ULK_HAVE_CAIRO
static cairo_status_t write_fp(void *closure, const unsigned char *data, unsigned int len)
{
    return fwrite(data, 1, len, (FILE *)closure) == len ? CAIRO_STATUS_SUCCESS : CAIRO_STATUS_WRITE_ERROR;
}

int ulk_picture_open(ulk_picture *p, const char *path, double w, double h, ulk_diag *diag)
{
    memset(p, 0, sizeof *p);
    int rc = ulk_picture_check(path, diag);
    if (rc) return rc;
    p->kind = ulk_picture_kind(path);
    p->w = w;
    p->h = h;
    if ((rc = ulk_afile_open(&p->af, path, diag))) return rc;
#ifdef CAIRO_HAS_SVG_SURFACE
    if (p->kind == ULK_PIC_SVG) p->surface = cairo_svg_surface_create_for_stream(write_fp, p->af.fp, w, h);
    else
#endif
        p->surface = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)w, (int)h);
    if (cairo_surface_status(p->surface) != CAIRO_STATUS_SUCCESS) {
        cairo_surface_destroy(p->surface);
        ulk_afile_abort(&p->af);
        memset(p, 0, sizeof *p);
        return ulk_fail(diag, ULK_ENOMEM, "%s: cannot create the drawing surface", path);
    }
    p->cr = cairo_create(p->surface);
    cairo_set_source_rgb(p->cr, 1, 1, 1);
    cairo_paint(p->cr);
    cairo_select_font_face(p->cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(p->cr, 11);
    cairo_set_source_rgb(p->cr, 0, 0, 0);
    return 0;
}

int ulk_picture_finish(ulk_picture *p, ulk_diag *diag)
{
    cairo_status_t st = cairo_status(p->cr);
    cairo_destroy(p->cr);
    if (p->kind == ULK_PIC_PNG && st == CAIRO_STATUS_SUCCESS)
        st = cairo_surface_write_to_png_stream(p->surface, write_fp, p->af.fp);
    cairo_surface_finish(p->surface);
    if (st == CAIRO_STATUS_SUCCESS) st = cairo_surface_status(p->surface);
    cairo_surface_destroy(p->surface);
    /* cairo keeps font caches for the life of the process; dropping them here keeps leak
     * checkers quiet (safe: no cairo object of ours is alive any more) */
    cairo_debug_reset_static_data();
    int rc;
    if (st != CAIRO_STATUS_SUCCESS) {
        const char *path = p->af.path ? p->af.path : "picture";
        rc = ulk_fail(diag, ULK_EIO, "%s: drawing failed: %s; no output written", path, cairo_status_to_string(st));
        ulk_afile_abort(&p->af);
    } else {
        rc = ulk_afile_commit(&p->af, diag);
    }
    memset(p, 0, sizeof *p);
    return rc;
}

void ulk_pic_series(cairo_t *cr, int k, double alpha)
{
    double c[3];
    ulk_pic_rgb(k, c);
    if (alpha < 1) cairo_set_source_rgba(cr, c[0], c[1], c[2], alpha);
    else cairo_set_source_rgb(cr, c[0], c[1], c[2]);
}

void ulk_pic_dash(cairo_t *cr, int k)
{
    /* solid, long dash, dot, dash-dot, short dash, dash-dot-dot */
    static const double pat[ULK_PIC_N_SERIES][6] = {
        {0}, {8, 4}, {1.5, 3}, {8, 3, 1.5, 3}, {4, 3}, {8, 3, 1.5, 3, 1.5, 3}};
    static const int n[ULK_PIC_N_SERIES] = {0, 2, 2, 4, 2, 6};
    k %= ULK_PIC_N_SERIES;
    if (k < 0) k += ULK_PIC_N_SERIES;
    cairo_set_dash(cr, pat[k], n[k], 0);
}

void ulk_pic_text(cairo_t *cr, double x, double y, const char *s, double align)
{
    cairo_text_extents_t e;
    cairo_text_extents(cr, s, &e);
    cairo_move_to(cr, x - align * e.x_advance, y);
    cairo_show_text(cr, s);
}

double ulk_pic_legend(cairo_t *cr, double x, double y, int k, int box, const char *name)
{
    cairo_save(cr);
    ulk_pic_series(cr, k, 1);
    if (box) {
        cairo_rectangle(cr, x, y - 9, 10, 10);
        cairo_fill(cr);
    } else {
        cairo_set_line_width(cr, 2);
        ulk_pic_dash(cr, k);
        cairo_move_to(cr, x, y - 4);
        cairo_line_to(cr, x + 24, y - 4);
        cairo_stroke(cr);
    }
    cairo_restore(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    double tx = x + (box ? 14 : 28);
    ulk_pic_text(cr, tx, y, name, 0);
    cairo_text_extents_t e;
    cairo_text_extents(cr, name, &e);
    return tx + e.x_advance + 16;
}
#endif
