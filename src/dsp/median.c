/* src/dsp/median.c - the median of a block of values (median.h): the demodulator's limit on
 * |U|^2 (src/dsp/demod.c, blk_detect). */
#include <stdint.h>
#include <string.h>

#include "median.h"

/* The k-th smallest of n values that are all >= +0 and not NaN (else 0 and nothing is written):
 * such doubles order as their bit patterns do, so it is selected on the patterns, 8 bits at a
 * time from the highest bit in which any two differ, keeping only the values whose digit is
 * the k-th's (in place in tmp, which holds the patterns). No data-dependent branch per value:
 * the quickselect below it, whose comparisons with the pivot the processor cannot predict, was
 * 5 % of a 192 kHz complex decode for one median of 768 values a block. The k-th smallest is
 * one value whatever finds it, so the result is the quickselect's, bit for bit. */
static int select_nonneg(const double *a, double *tmp, int n, int k, double *out)
{
    uint64_t or_ = 0, and_ = ~(uint64_t)0, bad = 0;
    for (int i = 0; i < n; i++) {
        uint64_t u;
        memcpy(&u, &a[i], sizeof u);
        bad |= (u >> 63) | (uint64_t)(u > 0x7ff0000000000000u); /* negative, -0, or NaN */
        or_ |= u;
        and_ &= u;
    }
    if (bad || n < 1) return 0;
    memcpy(tmp, a, (size_t)n * sizeof *tmp);
    uint64_t diff = or_ ^ and_;
    int m = n, shift = 56;
    while (shift > 0 && !(diff >> shift)) shift -= 8; /* the top digit in which values differ */
    for (; m > 1 && shift >= 0; shift -= 8) {
        int cnt[256] = {0};
        for (int i = 0; i < m; i++) {
            uint64_t u;
            memcpy(&u, &tmp[i], sizeof u);
            cnt[(u >> shift) & 255]++;
        }
        int b = 0;
        while (k >= cnt[b]) k -= cnt[b++];
        int w = 0;
        for (int i = 0; i < m; i++) {
            uint64_t u;
            memcpy(&u, &tmp[i], sizeof u);
            tmp[w] = tmp[i];
            w += (int)((u >> shift) & 255) == b;
        }
        m = w;
    }
    /* one value left, or several equal in every bit */
    *out = tmp[0];
    return 1;
}

double ulk_median_copy(const double *a, double *tmp, int n)
{
    double med;
    if (select_nonneg(a, tmp, n, n / 2, &med)) return med;
    memcpy(tmp, a, (size_t)n * sizeof *tmp);
    int lo = 0, hi = n - 1, k = n / 2;
    while (lo < hi) {
        double piv = tmp[(lo + hi) / 2];
        int i = lo, j = hi;
        while (i <= j) {
            while (tmp[i] < piv) i++;
            while (tmp[j] > piv) j--;
            if (i <= j) { double t = tmp[i]; tmp[i] = tmp[j]; tmp[j] = t; i++; j--; }
        }
        if (k <= j) hi = j;
        else if (k >= i) lo = i;
        else break;
    }
    return tmp[k];
}
