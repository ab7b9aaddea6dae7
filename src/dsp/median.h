/* src/dsp/median.h - the median of n doubles, internal to the library (the demodulator's
 * limit on |U|^2 a block; tests/test_demod.c checks it against a sort).
 *
 * Why a module of its own: the selection is on the doubles' bit patterns when they allow it
 * (every value >= +0 and not NaN), the quickselect otherwise, and both must give the same
 * value; the test reaches it here. */
#ifndef ULK_MEDIAN_H
#define ULK_MEDIAN_H

/* The (n/2)-th smallest (0-based) of a[0..n), n >= 1, using tmp[0..n) as scratch; a is left
 * unchanged. Exactly the value a sort would put at n/2 (for NaN-free input). */
double ulk_median_copy(const double *a, double *tmp, int n);

#endif
