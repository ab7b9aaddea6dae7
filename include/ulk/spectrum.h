/* ulk/spectrum.h - Welch-averaged power spectrum of a real or complex capture, and its plot
 * with a dictionary's channels marked.
 *
 * Why: before decoding a capture an operator wants to see where its power sits -- the
 * residual carrier, the data subcarrier and its lobes, the pilot, the voice subcarrier, the
 * ranging main lobe -- and whether they are where the dictionary says. Welch's method
 * (segments of nfft samples with a Hann window, 50 % overlap, |FFT|^2 averaged) keeps the
 * estimate's variance low with memory of one segment, whatever the capture's length.
 *
 * Scale: each bin is |X_k|^2 / (sum w)^2 averaged over segments, so a tone whose frequency is
 * a bin centre shows its power: a complex tone of amplitude 1 reads 1.0 (0 dB); for a real
 * capture the spectrum is one-sided (bins 1 .. nfft/2 - 1 doubled), so a real sine of
 * amplitude a reads a^2/2.
 *
 * Usage:
 *     ulk_welch *w;
 *     ulk_welch_create(8192, 1, fs_hz, &w, diag);
 *     while (more) ulk_welch_feed(w, i_chunk, q_chunk, n);   // q_chunk NULL when real
 *     const double *f, *p; size_t nb;
 *     ulk_welch_result(w, &f, &p, &nb, NULL);
 *     ulk_welch_destroy(w);
 */
#ifndef ULK_SPECTRUM_H
#define ULK_SPECTRUM_H

#include <stddef.h>
#include <stdint.h>

#include "ulk/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct ulk_welch ulk_welch;

/* Creates an estimator of segment length nfft (a power of two, 16 .. 2^22) for a complex
 * (is_complex 1) or real capture at fs_hz. Returns 0 and *out; ULK_EINVAL (bad nfft or rate,
 * NULL out); ULK_EFORMAT (built without FFTW3); ULK_ENOMEM. Reason in diag (may be NULL).
 * Free with ulk_welch_destroy(). */
int ulk_welch_create(size_t nfft, int is_complex, double fs_hz, ulk_welch **out, ulk_diag *diag);
/* Feeds n samples: i (and q, NULL for a real capture) hold one value per sample. Returns 0,
 * or ULK_EINVAL (NULL w or i, q given to a real estimator or missing for a complex one). */
int ulk_welch_feed(ulk_welch *w, const float *i, const float *q, size_t n);
/* The averaged spectrum so far: *f_hz and *power (owned by w, valid until the next feed or
 * destroy) hold *n_bins values in increasing frequency: -fs/2 .. fs/2 - fs/nfft for a complex
 * capture (nfft bins), 0 .. fs/2 for a real one (nfft/2 + 1 bins). *n_segments (may be NULL)
 * gets the count of segments averaged. Returns 0, ULK_EINVAL (NULL argument), ULK_ELIMIT
 * (fewer than nfft samples fed: no whole segment yet). */
int ulk_welch_result(ulk_welch *w, const double **f_hz, const double **power, size_t *n_bins, uint64_t *n_segments);
/* Frees w; NULL does nothing. */
void ulk_welch_destroy(ulk_welch *w);

/* A marked band of the plot: [f_lo_hz, f_hi_hz] shaded, a line at f_hz, a label. */
typedef struct {
    double f_hz, f_lo_hz, f_hi_hz;
    const char *label;
} ulk_spectrum_mark;

/* Draws the spectrum (dB) to path (.png or .svg, written atomically) with the marks, title
 * above. Returns 0; ULK_EINVAL (NULL, n < 2, other extension); ULK_EFORMAT (built without
 * cairo); ULK_EIO; ULK_ENOMEM. Reason in diag. */
int ulk_spectrum_plot(const double *f_hz, const double *power, size_t n, const ulk_spectrum_mark *marks, int n_marks,
                      const char *title, const char *path, ulk_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
