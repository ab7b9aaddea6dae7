/* src/carrier_plot.c - the planner's picture: line powers per mode, and margins as one index
 * varies, with the index as written and the solved index marked. Drawn through the one
 * picture surface (src/picture.h: format by extension, our palette and dash patterns, 1-2-5
 * ticks). Kept out of carrier.c so the planner builds without cairo. */
#include <math.h>
#include <stdio.h>
#include <string.h>

#include "picture.h"
#include "ulk/carrier.h"
#include "util.h"

#ifdef ULK_HAVE_CAIRO

#define W 1000.0
#define H 480.0
#define DB_MIN -40.0
#define N_LINES 6 /* carrier, data, voice, ranging, pilot, intermodulation: series 0..5 */

static const char *const line_names[N_LINES] = {"carrier", "data", "voice", "ranging", "pilot", "intermodulation"};

static double clampdb(double f)
{
    double d = f > 0 ? 10 * log10(f) : DB_MIN;
    return d < DB_MIN ? DB_MIN : d;
}

/* A panel: light grid at 1-2-5 ticks of [vmin, vmax], labels, border and title. */
static void frame(cairo_t *cr, double x0, double y0, double w, double h, double vmin, double vmax, const char *title)
{
    double t[32], step;
    int n = ulk_pic_ticks(vmin, vmax, 9, t, 32, &step);
    char b[32];
    cairo_set_line_width(cr, 0.5);
    for (int i = 0; i < n; i++) {
        double y = y0 + h - (t[i] - vmin) / (vmax - vmin) * h;
        cairo_set_source_rgb(cr, 0.86, 0.86, 0.86);
        cairo_move_to(cr, x0, y);
        cairo_line_to(cr, x0 + w, y);
        cairo_stroke(cr);
        cairo_set_source_rgb(cr, 0, 0, 0);
        ulk_pic_tick_label(t[i], step, b, sizeof b);
        ulk_pic_text(cr, x0 - 4, y + 4, b, 1.0);
    }
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1);
    cairo_rectangle(cr, x0, y0, w, h);
    cairo_stroke(cr);
    ulk_pic_text(cr, x0, y0 - 8, title, 0);
}

/* Line fraction k of a plan (the order of line_names). */
static double line_of(const ulk_carrier_plan *p, int k)
{
    double v[N_LINES] = {p->carrier, p->useful[0], p->useful[1], p->useful[2], p->pilot, p->intermod};
    return v[k];
}

static void bars(cairo_t *cr, const ulk_carrier *c, double x0, double y0, double w, double h)
{
    frame(cr, x0, y0, w, h, DB_MIN, 0, "line power P/P_T, dB (indices as written)");
    double gw = w / (c->n_modes ? c->n_modes : 1), bw = (gw - 16) / N_LINES;
    int drawn[N_LINES] = {0};
    for (int i = 0; i < c->n_modes; i++) {
        const ulk_carrier_mode *mo = &c->modes[i];
        ulk_carrier_plan p;
        ulk_carrier_plan_indices(c, mo, mo->m_rad, NAN, &p);
        for (int k = 0; k < N_LINES; k++) {
            double f = line_of(&p, k);
            if (!(f > 0)) continue; /* a line the mode does not have: no bar, no legend */
            drawn[k] = 1;
            double y = y0 + h - (clampdb(f) - DB_MIN) / -DB_MIN * h;
            ulk_pic_series(cr, k, 1);
            cairo_rectangle(cr, x0 + i * gw + 8 + k * bw, y, bw - 1, y0 + h - y);
            cairo_fill(cr);
        }
        cairo_set_source_rgb(cr, 0, 0, 0);
        ulk_pic_text(cr, x0 + i * gw + gw / 2, y0 + h + 16, mo->name, 0.5);
    }
    double lx = x0, ly = y0 + h + 40;
    for (int k = 0; k < N_LINES; k++)
        if (drawn[k]) {
            if (lx > x0 + w - 90) { lx = x0; ly += 16; }
            lx = ulk_pic_legend(cr, lx, ly, k, 1, line_names[k]);
        }
}

/* A vertical marker at index m (rad) with its name at the top. */
static void index_mark(cairo_t *cr, double x1, double y0, double w1, double h, double lo, double hi, double m,
                       const char *name, int k)
{
    if (!(hi > lo) || m < lo || m > hi) return;
    double x = x1 + w1 * (m - lo) / (hi - lo);
    cairo_save(cr);
    cairo_set_source_rgb(cr, 0, 0, 0);
    cairo_set_line_width(cr, 1.2);
    double dash[2] = {k ? 2.0 : 6.0, 3.0};
    cairo_set_dash(cr, dash, 2, 0);
    cairo_move_to(cr, x, y0);
    cairo_line_to(cr, x, y0 + h);
    cairo_stroke(cr);
    cairo_restore(cr);
    char b[64];
    snprintf(b, sizeof b, "%s %.2f", name, m);
    cairo_text_extents_t e;
    cairo_text_extents(cr, b, &e);
    int left = x + 3 + e.x_advance > x1 + w1; /* near the right edge: the label goes left of the line */
    ulk_pic_text(cr, left ? x - 3 : x + 3, y0 + 12 + 13 * k, b, left ? 1 : 0);
}

static void sweep(cairo_t *cr, const ulk_carrier *c, int mi, int sweep_ch, double pt, double x1, double y0, double w1,
                  double h)
{
    const ulk_carrier_mode *mo = &c->modes[mi];
    double lo = c->bound_lo[sweep_ch], hi = c->bound_hi[sweep_ch];
    int have_budget = !isnan(pt);
    const int NPT = 200;
    /* the curve values first: the axis is chosen from them */
    static double v[N_LINES][201];
    int has[N_LINES];
    for (int k = 0; k < N_LINES; k++) has[k] = 1;
    double mn = HUGE_VAL, mx = -HUGE_VAL;
    for (int j = 0; j <= NPT; j++) {
        double m[ULK_CH_N];
        memcpy(m, mo->m_rad, sizeof m);
        m[sweep_ch] = lo + (hi - lo) * j / NPT;
        ulk_carrier_plan p;
        ulk_carrier_plan_indices(c, mo, m, pt, &p);
        for (int k = 0; k < N_LINES; k++) {
            int h_ok;
            double val;
            if (have_budget) {
                h_ok = k < 4 && (k == 0 ? p.has_loop_margin : p.has_margin[k - 1]);
                val = k == 0 ? p.loop_margin_db : k < 4 ? p.margin_db[k - 1] : NAN;
            } else {
                h_ok = k == 0 || k == 5 || (k >= 1 && k <= 3 && mo->on[k - 1]) || (k == 4 && p.pilot > 0);
                val = clampdb(line_of(&p, k));
            }
            if (!h_ok) has[k] = 0;
            v[k][j] = val;
            if (h_ok && isfinite(val)) {
                if (val < mn) mn = val;
                if (val > mx) mx = val;
            }
        }
    }
    double vmin = DB_MIN, vmax = 0;
    if (have_budget) {
        if (mn > mx) { mn = -10; mx = 10; }
        if (mn < -40) mn = -40;
        vmin = fmin(0, floor(mn / 5) * 5);
        vmax = fmax(vmin + 5, ceil(mx / 5) * 5);
    }
    char title[160];
    snprintf(title, sizeof title, "mode %s: %s against the %s index (rad)", mo->name,
             have_budget ? "margin, dB" : "line power P/P_T, dB", ulk_channel_name((ulk_channel)sweep_ch));
    frame(cr, x1, y0, w1, h, vmin, vmax, title);
    double t[32], step;
    int nt = ulk_pic_ticks(lo, hi, 8, t, 32, &step);
    char b[32];
    for (int i = 0; i < nt; i++) {
        double x = x1 + w1 * (t[i] - lo) / (hi - lo);
        ulk_pic_tick_label(t[i], step, b, sizeof b);
        cairo_set_source_rgb(cr, 0, 0, 0);
        ulk_pic_text(cr, x, y0 + h + 16, b, 0.5);
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
    cairo_set_line_width(cr, 2);
    for (int k = 0; k < N_LINES; k++) {
        if (!has[k]) continue;
        ulk_pic_series(cr, k, 1);
        ulk_pic_dash(cr, k);
        for (int j = 0; j <= NPT; j++) {
            double val = v[k][j] < vmin || !isfinite(v[k][j]) ? vmin : v[k][j];
            double x = x1 + w1 * j / NPT, y = y0 + h - (val - vmin) / (vmax - vmin) * h;
            if (j == 0) cairo_move_to(cr, x, y);
            else cairo_line_to(cr, x, y);
        }
        cairo_stroke(cr);
    }
    cairo_set_dash(cr, NULL, 0, 0);
    cairo_restore(cr);
    /* the index as written, and the solved one when there is a budget to solve for */
    index_mark(cr, x1, y0, w1, h, lo, hi, mo->m_rad[sweep_ch], "as written", 0);
    if (have_budget) {
        double ms[ULK_CH_N];
        ulk_carrier_plan ps;
        if (ulk_carrier_solve(c, mo, pt, ms, &ps) == 0) index_mark(cr, x1, y0, w1, h, lo, hi, ms[sweep_ch], "solved", 1);
    }
    /* legend: only the curves drawn */
    static const char *const margin_names[4] = {"carrier loop", "data", "voice", "ranging"};
    double lx = x1, ly = y0 + h + 40;
    for (int k = 0; k < N_LINES; k++)
        if (has[k]) {
            if (lx > x1 + w1 - 110) { lx = x1; ly += 16; }
            lx = ulk_pic_legend(cr, lx, ly, k, 0, have_budget ? margin_names[k] : line_names[k]);
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
    int rc = ulk_picture_check(path, diag);
    if (rc) return rc;
#ifndef ULK_HAVE_CAIRO
    (void)pt;
    return ULK_EFORMAT;
#else
    ulk_picture pic;
    if ((rc = ulk_picture_open(&pic, path, W, H, diag))) return rc;
    bars(pic.cr, c, 60, 40, 400, 340);
    sweep(pic.cr, c, mi, sweep_ch, pt, 560, 40, 400, 340);
    return ulk_picture_finish(&pic, diag);
#endif
}
