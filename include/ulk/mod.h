/* ulk/mod.h - the modulator (docs/spec/subbit.md section 4) and the timing table (section 6).
 *
 * Why exact: a sample that falls exactly on a sub-bit start must belong to the new sub-bit,
 * and one exactly on a square-wave edge must take the new half, on every machine. So the
 * sub-bit index j = floor(i * R_s / f_s), the square half and the phase of every tone are
 * computed in integer arithmetic on the sample index i, from the exact rational rates. Only
 * the sine itself and the final scaling are floating point; the sine comes from a table
 * (short phase periods) or from a block rotation re-anchored at the exact phase (long ones),
 * never from a per-sample sin().
 *
 * Usage:
 *     ulk_mod_config cfg = {.upload = u, .fs = fs};
 *     ulk_mod *m;
 *     if (ulk_mod_create(&cfg, &m, diag) < 0) ... // reason in diag
 *     float buf[4096];
 *     long n;
 *     while ((n = ulk_mod_run(m, buf, 4096)) > 0) consume(buf, n);
 *     ulk_mod_destroy(m);
 */
#ifndef ULK_MOD_H
#define ULK_MOD_H

#include <stddef.h>
#include <stdint.h>
#include <stdio.h>

#include "ulk/error.h"
#include "ulk/link.h"
#include "ulk/sampleio.h"
#include "ulk/upload.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    const ulk_upload *upload;  /* must outlive the modulator */
    ulk_ratio fs;              /* sample rate f_s in Hz, exact (ulk_ratio_parse of the --rate text) */
    ulk_sample_format format;  /* output format the samples are meant for: ULK_FMT_S16 refuses
                                * a link whose peak A + A_p exceeds full scale (it would clip) */
} ulk_mod_config;

typedef struct ulk_mod ulk_mod;

/* Creates a modulator for cfg. Returns 0 and *out, or:
 *   ULK_EINVAL  cfg, upload or out NULL, or a rate not > 0;
 *   ULK_ELIMIT  f_s below 2 x (f_sc + R_s) or below 2 x f_p (the message names the lowest
 *               acceptable rate), above ULK_MOD_MAX_RATE_HZ, s16 output that would clip, or
 *               rates whose exact ratios do not fit 62-bit integers;
 *   ULK_ENOMEM.
 * The reason is recorded in diag (may be NULL). A square subcarrier sampled below
 * 2 x (3 f_sc + R_s), where its harmonics fold back below Nyquist, is accepted with a warning
 * in diag. Free with ulk_mod_destroy(). */
int ulk_mod_create(const ulk_mod_config *cfg, ulk_mod **out, ulk_diag *diag);

/* Produces up to max samples s_i (float, full scale 1.0) into out, in order from i = 0.
 * Returns the count written (0 at the end, after ulk_mod_n_samples() samples), or ULK_EINVAL
 * when m or out is NULL. Memory stays flat whatever the upload's length. */
long ulk_mod_run(ulk_mod *m, float *out, size_t max);

/* Total sample count ceil(L * f_s / R_s) for a stream of L sub-bits. */
uint64_t ulk_mod_n_samples(const ulk_mod *m);
/* Samples produced so far. */
uint64_t ulk_mod_position(const ulk_mod *m);
/* Frees m; NULL does nothing. */
void ulk_mod_destroy(ulk_mod *m);

/* The highest sample rate the modulator accepts: 1 GHz. Far above any converter this output
 * feeds, it keeps a mistyped rate (1e12) from starting a write of hundreds of gigabytes. */
#define ULK_MOD_MAX_RATE_HZ 1000000000

/* Checks f_s against the link (the rule of ulk_mod_create): at least 2 x (f_sc + R_s) (the
 * data signal's main lobe below Nyquist) and 2 x f_p, at most ULK_MOD_MAX_RATE_HZ. Returns 0 or ULK_ELIMIT with a message naming the
 * lowest (or highest) acceptable rate. When lowest is not NULL it receives the lowest. */
int ulk_mod_check_rate(const ulk_link *l, ulk_ratio fs, ulk_ratio *lowest, ulk_diag *diag);

/* The largest |s_i| the link can produce: A + A_p (A without a pilot). */
double ulk_mod_peak(const ulk_link *l);

/* First sample index of sub-bit j: ceil(j * f_s / R_s), exact. Returns 0 or ULK_ELIMIT when
 * the rates' ratio does not fit 62-bit integers (or the result 64 bits). */
int ulk_mod_first_sample(const ulk_link *l, ulk_ratio fs, uint64_t j, uint64_t *out);

/* ---- timing table (section 6) ----
 * CSV, header `index,start_s,first_sample,word,bit,bit_value,subbit,level,phase_deg`, one row
 * per sub-bit. start_s = j / R_s is printed as an exact decimal when it is one (R_s whose
 * reduced numerator has no prime factor other than 2 and 5, e.g. 62.5 or 4000) and with
 * %.17g otherwise; first_sample = ceil(j * f_s / R_s) exactly; level +1/-1 after the line
 * code; phase_deg 0 for level +1, 180 for -1. fs may be any positive rate (no sample-rate
 * check: no samples are made). */

/* Writes the table to fp (not closed). Returns 0, ULK_EINVAL (NULL argument or rate),
 * ULK_ELIMIT (rates too fine for exact arithmetic), ULK_ENOMEM or ULK_EIO (write error). */
int ulk_timing_write_fp(const ulk_upload *u, ulk_ratio fs, FILE *fp, const char *name, ulk_diag *diag);
/* Writes the table to path atomically (temporary file renamed on success; nothing is left
 * behind on failure). "-" is standard output; a device or pipe is written directly. Same
 * returns as ulk_timing_write_fp. */
int ulk_timing_write(const ulk_upload *u, ulk_ratio fs, const char *path, ulk_diag *diag);

#ifdef __cplusplus
}
#endif
#endif
