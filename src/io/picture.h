/* src/picture.h - the one picture surface of the library (internal): every picture (decode,
 * plan, spectrum) is drawn through it, so they share the file handling, the format choice,
 * the palette, the dash patterns and the tick rule.
 *
 * Format: the file name's extension chooses it, case-insensitively: .png (raster) or .svg
 * (vector); any other name is refused before anything is drawn or written. The file is
 * written atomically (util.h): nothing is left behind on failure or interruption.
 *
 * Palette: ULK_PIC_N_SERIES colours of our own, evenly spaced hues in OKLCH (the polar form
 * of Ottosson's OKLab, a perceptual colour space): hue 25 + 60 k degrees, chroma 0.12,
 * lightness cycling 0.75, 0.60, 0.40 so that neighbours also differ in lightness.
 * tests/py/test_picture.py checks them against an independent numpy conversion and checks
 * that every pair stays apart (OKLab distance >= 0.10; 0.119 measured) for normal vision and
 * under simulated protanopia, deuteranopia and tritanopia (Machado, Oliveira and Fernandes
 * 2009, severity 1). Every series also has its own dash pattern, so lines differ without
 * colour at all (in print, for monochromats).
 */
#ifndef ULK_PICTURE_H
#define ULK_PICTURE_H

#include <stddef.h>

#include "ulk/error.h"
#include "util.h"

#ifdef ULK_HAVE_CAIRO
#include <cairo.h>
#endif

#define ULK_PIC_N_SERIES 6

typedef enum { ULK_PIC_NONE = 0, ULK_PIC_PNG, ULK_PIC_SVG } ulk_pic_kind;

/* The format path's extension names, or ULK_PIC_NONE. */
ulk_pic_kind ulk_picture_kind(const char *path);
/* 0 when path names a picture format this build writes; else ULK_EINVAL (or ULK_EFORMAT
 * without cairo / its SVG surface) with a message naming path and the formats. */
int ulk_picture_check(const char *path, ulk_diag *diag);

/* Colour k (mod ULK_PIC_N_SERIES) of the palette as sRGB components in [0, 1]. */
void ulk_pic_rgb(int k, double rgb[3]);

/* Ticks at 1-2-5 steps: at most max_n values t_i = i * step inside [lo, hi] (step = 1, 2 or
 * 5 times a power of ten, the smallest that keeps the count <= max_n). Returns the count
 * (<= cap) and the step in *step. */
int ulk_pic_ticks(double lo, double hi, int max_n, double *t, int cap, double *step);
/* A tick label with the decimals its step needs ("0.25", "10", "-2.5"). */
void ulk_pic_tick_label(double v, double step, char *buf, size_t len);

#ifdef ULK_HAVE_CAIRO
typedef struct {
    ulk_afile af;
    cairo_surface_t *surface;
    cairo_t *cr;            /* draw here: white background and the sans-serif font are set */
    ulk_pic_kind kind;
    double w, h;            /* points (pixels for PNG) */
} ulk_picture;

/* Opens a picture of w x h at path. Returns 0, or a status with the reason in diag. */
int ulk_picture_open(ulk_picture *p, const char *path, double w, double h, ulk_diag *diag);
/* Ends the drawing and writes the file (atomically). Returns 0 or ULK_EIO / ULK_ENOMEM; the
 * picture is closed either way. */
int ulk_picture_finish(ulk_picture *p, ulk_diag *diag);

/* Drawing helpers on p->cr: the palette colour and dash pattern of series k; text at (x, y)
 * aligned by align (0 left, 0.5 centre, 1 right). */
void ulk_pic_series(cairo_t *cr, int k, double alpha);
void ulk_pic_dash(cairo_t *cr, int k);
void ulk_pic_text(cairo_t *cr, double x, double y, const char *s, double align);
/* A legend entry: a short line in series k's colour and dash (or a filled box when box), and
 * its name; returns the x after it. */
double ulk_pic_legend(cairo_t *cr, double x, double y, int k, int box, const char *name);
#endif

#endif
