/* tests/ideal_rx.h - the ideal receivers the decoder is measured against (header-only test
 * code, shared by tests/bench/bench_envelope.c and tests/test_ccsds_pipeline.c).
 *
 * Ideal = coherent detection with perfect timing, carrier phase, level and word/CLTU sync; the
 * only errors are those of white Gaussian noise on the matched filter.
 *
 * Symbol errors: binary antipodal signalling on a coherent matched filter errs with
 * q = Q(sqrt(2 E/N_0)) (Proakis, Digital Communications, 4th ed., section 5.2, binary antipodal
 * signals; from memory). Q(x) = erfc(x / sqrt 2) / 2.
 *
 * Sub-bit words: a bit is decided by correlating n soft sub-bits with Z and O, which differ in
 * d sub-bits; the decision distance is that of antipodal signals with energy E_b d / n, so
 * p = Q(sqrt(2 (E_b/N_0) d / n)) and a W-bit word is right with (1 - p)^W (docs/decode.md).
 *
 * CCSDS CLTUs: accepted when the start sequence has at most start_errors bit errors and each
 * codeblock at most one (SEC) or none (TED) among its 63 code bits (the filler bit is outside
 * the code). With nrz-l the channel bits err independently with q. With nrz-m the ideal
 * receiver decides the levels coherently and then the bits differentially, b_i = l_i xor
 * l_{i-1}: one level error flips two neighbouring bits, so bit errors come in pairs (their
 * marginal rate is 2 q (1 - q), as for any differentially decoded coherent BPSK: Proakis, same
 * section, from memory). A pair inside a codeblock is a double error, which SEC does not
 * correct; the pairs are counted exactly below by a small dynamic programme over the level
 * errors, not by treating bit errors as independent.
 */
#ifndef ULK_IDEAL_RX_H
#define ULK_IDEAL_RX_H

#include <math.h>
#include <string.h>

static inline double ideal_q(double x) { return 0.5 * erfc(x / sqrt(2.0)); }

/* Word error rate of the ideal sub-bit receiver. */
static inline double ideal_subbit_wer(double ebn0_db, int d, int n, int W)
{
    double p = ideal_q(sqrt(2 * pow(10, ebn0_db / 10) * d / n));
    return 1 - pow(1 - p, W);
}

/* Probability that one CLTU of n_cb codeblocks is accepted by the ideal receiver at E_c/N_0
 * (dB); start_errors 0/1, cb_errors 1 (SEC) or 0 (TED), nrzm 0/1. The level before the start
 * sequence (acquisition or idle) is decided with the same q. */
static inline double ideal_cltu_accept(double ecn0_db, int n_cb, int start_errors, int cb_errors, int nrzm)
{
    const double q = ideal_q(sqrt(2 * pow(10, ecn0_db / 10)));
    /* pr[e][c]: probability of (the last level wrong = e, c bit errors so far in this segment) */
    double pr[2][3], nx[2][3];
    memset(pr, 0, sizeof pr);
    pr[0][0] = 1 - q;
    pr[1][0] = q;
    int nseg = 1 + n_cb;
    for (int s = 0; s < nseg; s++) {
        int len = s == 0 ? 16 : 64, lim = s == 0 ? start_errors : cb_errors;
        for (int i = 0; i < len; i++) {
            int counted = s == 0 || i < 63;
            memset(nx, 0, sizeof nx);
            for (int e = 0; e < 2; e++)
                for (int c = 0; c <= lim; c++) {
                    if (pr[e][c] == 0) continue;
                    for (int e2 = 0; e2 < 2; e2++) {
                        double pe = e2 ? q : 1 - q;
                        int b = nrzm ? (e ^ e2) : e2;
                        int c2 = c + (counted ? b : 0);
                        if (c2 > lim) continue;
                        nx[e2][c2] += pr[e][c] * pe;
                    }
                }
            memcpy(pr, nx, sizeof pr);
        }
        for (int e = 0; e < 2; e++) {
            double t = 0;
            for (int c = 0; c < 3; c++) t += pr[e][c];
            for (int c = 0; c < 3; c++) pr[e][c] = 0;
            pr[e][0] = t;
        }
    }
    return pr[0][0] + pr[1][0];
}

/* E/N_0 (dB) at which a decreasing error curve f(x, arg) reaches target (bisection). */
static inline double ideal_solve(double (*f)(double, const void *), const void *arg, double target)
{
    double lo = -5, hi = 30;
    for (int i = 0; i < 80; i++) {
        double m = 0.5 * (lo + hi);
        if (f(m, arg) > target) lo = m;
        else hi = m;
    }
    return 0.5 * (lo + hi);
}

#endif
