/* src/carrier_plot.c - the planner's picture (cairo): line powers per mode, and margins as
 * one index varies. Kept out of carrier.c so the planner builds without cairo. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "ulk/carrier.h"
#include "util.h"

#ifdef ULK_HAVE_CAIRO
#include <cairo.h>
#ifdef CAIRO_HAS_SVG_SURFACE
#include <cairo-svg.h>
#endif

#define W 1000.0
#define H 460.0
#define DB_MIN -40.0

static cairo_status_t write_fp(void *closure, const unsigned char *data, unsigned int len)
{
    return fwrite(data, 1, len, (FILE *)closure) == len ? CAIRO_STATUS_SUCCESS : CAIRO_STATUS_WRITE_ERROR;
}

static const double colors[6][3] = {
    {0.20, 0.20, 0.20}, {0.12, 0.47, 0.71}, {1.00, 0.50, 0.05},
    {0.17, 0.63, 0.17}, {0.58, 0.40, 0.74}, {0.84, 0.15, 0.16},
};
static const char *const line_names[6] = {"carrier", "data", "voice", "ranging", "pilot", "intermod"};

static void text(cairo_t *cr, double x, double y, const char *s, double align)
{
    cairo_text_extents_t e;
    cairo_text_extents(cr, s, &e);
    cairo_move_to(cr, x - align * e.width, y);
    cairo_show_text(cr, s);
}

static double clampdb(double f)
{
    double d = f > 0 ? 10 * log10(f) : DB_MIN;
    return d < DB_MIN ? DB_MIN : d;
}

static void frame(cairo_t *cr, double x0, double y0, double w, double h, double vmin, double vmax,
                  double step, const char *ylabel)
{
    cairo_set_source_rgb(cr, 0.85, 0.85, 0.85);
    cairo_set_line_width(cr, 0.5);
    char b[32];
    for (double v = vmin; v <= vmax + 1e-9; v += step) {
        double y = y0 + h - (v - vmin) / (vmax - vmin) * h;
        cairo_move_to(cr, x0, y);
        cairo_line_to(cr, x0 + w, y);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        snprintf(b, sizeof b, "%g", v);
        text(cr, x0 - 4, y + 4, b, 1.0);
        cairo_set_source_rgb(cr, 0.85, 0.85, 0.85);
    }
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, x0, y0, w, h);
    cairo_stroke(cr);
    text(cr, x0, y0 - 8, ylabel, 0);
}

static void draw(cairo_t *cr, const ulk_carrier *c, int mi, int sweep_ch, double pt)
{
    cairo_set_source_rgb(cr, 1, 1, 1);
    cairo_paint(cr);
    cairo_select_font_face(cr, "sans-serif", CAIRO_FONT_SLANT_NORMAL, CAIRO_FONT_WEIGHT_NORMAL);
    cairo_set_font_size(cr, 11);

    /* left: bars, dB relative to P_T */
    double x0 = 60, y0 = 40, w = 400, h = 340;
    frame(cr, x0, y0, w, h, DB_MIN, 0, 5, "line power P/P_T, dB (as written)");
    double gw = w / (c->n_modes ? c->n_modes : 1);
    for (int i = 0; i < c->n_modes; i++) {
        const ulk_carrier_mode *mo = &c->modes[i];
        ulk_carrier_plan p;
        ulk_carrier_plan_indices(c, mo, mo->m_rad, NAN, &p);
        double v[6] = {p.carrier, p.useful[0], p.useful[1], p.useful[2], p.pilot, p.intermod};
        double bw = (gw - 16) / 6;
        for (int k = 0; k < 6; k++) {
            double y = y0 + h - (clampdb(v[k]) - DB_MIN) / -DB_MIN * h;
            cairo_set_source_rgb(cr, colors[k][0], colors[k][1], colors[k][2]);
            cairo_rectangle(cr, x0 + i * gw + 8 + k * bw, y, bw - 1, y0 + h - y);
            cairo_fill(cr);
        }
        cairo_set_source_rgb(cr, 0, 0, 0);
        text(cr, x0 + i * gw + gw / 2, y0 + h + 16, mo->name, 0.5);
    }
    for (int k = 0; k < 6; k++) {
        cairo_set_source_rgb(cr, colors[k][0], colors[k][1], colors[k][2]);
        cairo_rectangle(cr, x0 + k * 68, y0 + h + 30, 10, 10);
        cairo_fill(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        text(cr, x0 + k * 68 + 14, y0 + h + 39, line_names[k], 0);
    }

    /* right: margins (or line powers) against the sweep channel's index */
    const ulk_carrier_mode *mo = &c->modes[mi];
    double lo = c->bound_lo[sweep_ch], hi = c->bound_hi[sweep_ch];
    int have_budget = !isnan(pt);
    double x1 = 560, w1 = 400;
    const int NPT = 200;
    double vmin = DB_MIN, vmax = 0, step = 5;
    if (have_budget) {
        /* range from the curves themselves, rounded out to 5 dB */
        double mn = HUGE_VAL, mx = -HUGE_VAL;
        for (int j = 0; j <= NPT; j++) {
            double m[ULK_CH_N];
            memcpy(m, mo->m_rad, sizeof m);
            m[sweep_ch] = lo + (hi - lo) * j / NPT;
            ulk_carrier_plan p;
            ulk_carrier_plan_indices(c, mo, m, pt, &p);
            double vals[4] = {p.loop_margin_db, p.margin_db[0], p.margin_db[1], p.margin_db[2]};
            int has[4] = {p.has_loop_margin, p.has_margin[0], p.has_margin[1], p.has_margin[2]};
            for (int k = 0; k < 4; k++)
                if (has[k] && isfinite(vals[k])) {
                    if (vals[k] < mn) mn = vals[k];
                    if (vals[k] > mx) mx = vals[k];
                }
        }
        if (mn > mx) { mn = -10; mx = 10; }
        if (mn < -40) mn = -40;
        vmin = floor(mn / 5) * 5;
        vmax = ceil(mx / 5) * 5;
        if (vmax <= vmin) vmax = vmin + 5;
        if (vmin > 0) vmin = 0;
        step = (vmax - vmin) > 60 ? 10 : 5;
    }
    char title[160];
    snprintf(title, sizeof title, "mode %s: %s vs %s index, rad", mo->name,
             have_budget ? "margin dB" : "P/P_T dB", ulk_channel_name((ulk_channel)sweep_ch));
    frame(cr, x1, y0, w1, h, vmin, vmax, step, title);
    char b[32];
    for (int t = 0; t <= 4; t++) {
        double mv = lo + (hi - lo) * t / 4;
        snprintf(b, sizeof b, "%.2f", mv);
        text(cr, x1 + w1 * t / 4, y0 + h + 16, b, 0.5);
    }
    if (have_budget) { /* zero-margin line */
        double y = y0 + h - (0 - vmin) / (vmax - vmin) * h;
        cairo_set_source_rgb(cr, 0, 0, 0);
        cairo_set_line_width(cr, 1.5);
        cairo_move_to(cr, x1, y);
        cairo_line_to(cr, x1 + w1, y);
        cairo_stroke(cr);
    }
    cairo_save(cr);
    cairo_rectangle(cr, x1, y0, w1, h);
    cairo_clip(cr);
    for (int k = 0; k < 6; k++) {
        int started = 0, any = 0;
        cairo_set_source_rgb(cr, colors[k][0], colors[k][1], colors[k][2]);
        cairo_set_line_width(cr, 2);
        for (int j = 0; j <= NPT; j++) {
            double m[ULK_CH_N];
            memcpy(m, mo->m_rad, sizeof m);
            m[sweep_ch] = lo + (hi - lo) * j / NPT;
            ulk_carrier_plan p;
            ulk_carrier_plan_indices(c, mo, m, pt, &p);
            double v;
            int has;
            if (have_budget) {
                if (k >= 4) break;
                has = k == 0 ? p.has_loop_margin : p.has_margin[k - 1];
                v = k == 0 ? p.loop_margin_db : p.margin_db[k - 1];
                if (v < vmin) v = vmin;
            } else {
                double f[6] = {p.carrier, p.useful[0], p.useful[1], p.useful[2], p.pilot, p.intermod};
                has = k == 0 || k == 5 || (k >= 1 && k <= 3 && mo->on[k - 1]) || (k == 4 && p.pilot > 0);
                v = clampdb(f[k]);
            }
            if (!has) break;
            any = 1;
            double x = x1 + w1 * j / NPT, y = y0 + h - (v - vmin) / (vmax - vmin) * h;
            if (!started) { cairo_move_to(cr, x, y); started = 1; }
            else cairo_line_to(cr, x, y);
        }
        if (any) cairo_stroke(cr);
        else cairo_new_path(cr);
    }
    /* the index as written */
    double xm = x1 + w1 * (mo->m_rad[sweep_ch] - lo) / (hi - lo);
    cairo_set_source_rgb(cr, 0.4, 0.4, 0.4);
    cairo_set_line_width(cr, 1);
    double dash = 4;
    cairo_set_dash(cr, &dash, 1, 0);
    cairo_move_to(cr, xm, y0);
    cairo_line_to(cr, xm, y0 + h);
    cairo_stroke(cr);
    cairo_restore(cr);
    if (have_budget) {
        const char *nm[4] = {"carrier loop", "data", "voice", "ranging"};
        for (int k = 0; k < 4; k++) {
            cairo_set_source_rgb(cr, colors[k][0], colors[k][1], colors[k][2]);
            cairo_rectangle(cr, x1 + k * 90, y0 + h + 30, 10, 10);
            cairo_fill(cr);
            cairo_set_source_rgb(cr, 0, 0, 0);
            text(cr, x1 + k * 90 + 14, y0 + h + 39, nm[k], 0);
        }
    }
}
#endif

int ulk_carrier_plot(const ulk_carrier *c, int mi, int sweep_ch, double pt, const char *path, ulk_diag *diag)
{
    if (!c || !path || mi < 0 || mi >= c->n_modes)
        return ulk_fail(diag, ULK_EINVAL, "plot: no such mode");
    const ulk_carrier_mode *mo = &c->modes[mi];
    if (sweep_ch < 0)
        for (int ch = ULK_CH_N - 1; ch >= 0; ch--)
            if (mo->on[ch]) sweep_ch = ch;
    if (sweep_ch < 0 || sweep_ch >= ULK_CH_N || !mo->on[sweep_ch])
        return ulk_fail(diag, ULK_EINVAL, "plot: channel %s is not on in mode %s",
                        sweep_ch >= 0 && sweep_ch < ULK_CH_N ? ulk_channel_name((ulk_channel)sweep_ch) : "?",
                        mo->name);
    size_t n = strlen(path);
    int svg = n > 4 && !strcmp(path + n - 4, ".svg");
    int png = n > 4 && !strcmp(path + n - 4, ".png");
    if (!svg && !png) return ulk_fail(diag, ULK_EINVAL, "%s: the plot file must end in .svg or .png", path);
#ifndef ULK_HAVE_CAIRO
    (void)pt;
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
    if (svg) s = cairo_svg_surface_create_for_stream(write_fp, af.fp, W, H);
    else
#endif
        s = cairo_image_surface_create(CAIRO_FORMAT_RGB24, (int)W, (int)H);
    if (cairo_surface_status(s) != CAIRO_STATUS_SUCCESS) {
        cairo_surface_destroy(s);
        ulk_afile_abort(&af);
        return ulk_fail(diag, ULK_ENOMEM, "%s: cannot create the drawing surface", path);
    }
    cairo_t *cr = cairo_create(s);
    draw(cr, c, mi, sweep_ch, pt);
    cairo_status_t st = cairo_status(cr);
    cairo_destroy(cr);
    if (png && st == CAIRO_STATUS_SUCCESS) st = cairo_surface_write_to_png_stream(s, write_fp, af.fp);
    cairo_surface_finish(s);
    if (st == CAIRO_STATUS_SUCCESS) st = cairo_surface_status(s);
    cairo_surface_destroy(s);
    /* cairo keeps font caches for the life of the process; dropping them here keeps leak
     * checkers quiet (safe: no cairo object of ours is alive any more). */
    cairo_debug_reset_static_data();
    if (st != CAIRO_STATUS_SUCCESS) {
        ulk_afile_abort(&af);
        return ulk_fail(diag, ULK_EIO, "%s: drawing failed: %s; no output written", path, cairo_status_to_string(st));
    }
    return ulk_afile_commit(&af, diag);
#endif
}
