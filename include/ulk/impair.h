/* ulk/impair.h - a channel simulator for receiver tests: clock error, delay, level, DC
 * offset, inversion and white Gaussian noise at a stated E_b/N_0, applied to samples in
 * chunks (memory stays flat), seeded and deterministic.
 *
 * Noise follows docs/spec/subbit.md section 5: per-sample variance sigma^2 with
 * E_b/N_0 = P_d f_s / (2 sigma^2 R_b), P_d being the data power as it leaves the simulator
 * (the given P_d times amplitude^2).
 *
 * Clock error by resampling: output sample m takes the input at position m (1 + ppm 1e-6),
 * so the signal's clock runs ppm fast against the output's sample clock (what ulk decode
 * reports as rate_error_ppm). Interpolation is a 32-tap Blackman-windowed sinc with 512
 * fractional phases, linearly interpolated between phases (measured -93 dB error on a tone
 * at 0.23 f_s; chosen over cubic interpolation, whose error near 0.25 f_s is about -40 dB
 * (from memory) and would add its own noise floor at high E_b/N_0).
 */
#ifndef ULK_IMPAIR_H
#define ULK_IMPAIR_H

#include <stddef.h>
#include <stdint.h>
#include "ulk/error.h"

#ifdef __cplusplus
extern "C" {
#endif

typedef struct {
    double fs_hz;       /* sample rate (input and output) */
    int add_noise;      /* 0: no noise (then ebn0_db, pd and bit_rate are unused) */
    double ebn0_db;
    double pd;          /* data power of the input, full scale 1.0 (sine: A^2/2, square: A^2) */
    double bit_rate;    /* R_b, bit/s */
    uint64_t seed;
    double ppm;         /* clock error, |ppm| <= 10000 */
    double delay_s;     /* noise-only samples before the signal */
    double amplitude;   /* gain on the signal; 0 means 1 */
    double dc;          /* added to every output sample */
    int invert;         /* multiply the signal by -1 */
} ulk_impair_config;

typedef struct ulk_impair ulk_impair;
/* Receives output samples. Returns 0 to go on, a negative status to stop (it is passed back). */
typedef int (*ulk_impair_sink)(const float *x, size_t n, void *user);

/* Returns 0 and *out, ULK_EINVAL with the reason in diag for a bad configuration, ULK_ENOMEM.
 * Free with ulk_impair_destroy. */
int ulk_impair_create(const ulk_impair_config *cfg, ulk_impair_sink sink, void *user, ulk_impair **out,
                      ulk_diag *diag);
/* Feeds n input samples; output goes to the sink as it is ready. Returns 0 or the first
 * negative status (sticky). */
int ulk_impair_push(ulk_impair *p, const float *x, size_t n);
/* Ends the input: the rest of the output (ceil(n_in / (1 + ppm 1e-6)) signal samples after
 * the delay) goes to the sink. Returns 0 or the sticky status. */
int ulk_impair_finish(ulk_impair *p);
/* Noise standard deviation per sample (0 without noise). */
double ulk_impair_sigma(const ulk_impair *p);
void ulk_impair_destroy(ulk_impair *p);

#ifdef __cplusplus
}
#endif
#endif
