/* ulk/plot.h - a picture (PNG or SVG) of a decode: soft sub-bit values over time and each word's
 * margin, so an operator can see at a glance how clean a capture was.
 *
 * Memory stays bounded: at most ULK_PLOT_MAX_POINTS soft values are kept (every k-th once
 * the capture is longer), all words are kept.
 */
#ifndef ULK_PLOT_H
#define ULK_PLOT_H

#include "ulk/error.h"

#ifdef __cplusplus
extern "C" {
#endif

#define ULK_PLOT_MAX_POINTS 200000

typedef struct ulk_plot ulk_plot;

/* Returns a new empty plot, or NULL when out of memory. */
ulk_plot *ulk_plot_create(void);
/* Adds a soft sub-bit value (units of the amplitude, about +-1) at time t_s. */
void ulk_plot_soft(ulk_plot *p, double t_s, float soft);
/* Adds a word: start time, soft margin, accepted (1) or rejected (0). */
void ulk_plot_word(ulk_plot *p, double t_s, double margin, int accepted);
/* Draws the plot to path (atomically), as PNG or SVG by its extension (.png, .svg; any other
 * name is refused with ULK_EINVAL before anything is written). Returns 0, ULK_EINVAL,
 * ULK_EFORMAT (built without cairo), ULK_EIO / ULK_ENOMEM with the reason in diag. */
int ulk_plot_write(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag);
/* The same as ulk_plot_write (the name is older than the SVG output). */
int ulk_plot_write_png(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag);
/* Frees p; NULL does nothing. */
void ulk_plot_destroy(ulk_plot *p);

#ifdef __cplusplus
}
#endif
#endif
