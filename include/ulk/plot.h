/* ulk/plot.h - a PNG picture of a decode: soft sub-bit values over time and each word's
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
/* Draws the plot into a PNG at path (atomically). Returns 0, ULK_EIO with the reason in diag,
 * ULK_EINVAL when the library was built without cairo. */
int ulk_plot_write_png(const ulk_plot *p, const char *path, const char *title, ulk_diag *diag);
/* Frees p; NULL does nothing. */
void ulk_plot_destroy(ulk_plot *p);

#ifdef __cplusplus
}
#endif
#endif
