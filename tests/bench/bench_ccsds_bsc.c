/* tests/bench/bench_ccsds_bsc.c - CLTU acceptance on a binary symmetric channel against the
 * ideal reference of docs/spec/ccsds-tc.md section 4, and decoder throughput.
 *
 * Each channel bit of (acquisition, CLTU, idle) is flipped with probability p. The ideal
 * reference accepts a CLTU when its start sequence has at most start_errors errors and every
 * codeblock at most one error among its 63 coded bits (sec) or none (ted); the filler bit
 * and the tail do not count. Prints measured and reference acceptance, and how many
 * accepted CLTUs carried wrong data (undetected errors).
 *
 * Usage: bench_ccsds_bsc [trials]   (default 20000 per row; keep it short on shared cores)
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "ulk/ccsds.h"

static uint64_t g_rng = 0x9E3779B97F4A7C15ull;
static double uniform(void)
{
    g_rng ^= g_rng << 13;
    g_rng ^= g_rng >> 7;
    g_rng ^= g_rng << 17;
    return (double)(g_rng >> 11) * (1.0 / 9007199254740992.0);
}

static double binom_le(int n, int k, double p)
{
    double s = 0, c = 1;
    for (int e = 0; e <= k; e++) {
        s += c * pow(p, e) * pow(1 - p, n - e);
        c = c * (n - e) / (e + 1);
    }
    return s;
}

int main(int argc, char **argv)
{
    long trials = argc > 1 ? atol(argv[1]) : 20000;
    static uint8_t cltu[ULK_CLTU_MAX_OCTETS], bits[8 * (ULK_CLTU_MAX_OCTETS + 40)], rx[sizeof bits];
    static ulk_cltu_result res;
    uint8_t arg_bits[8 * 19];
    for (int i = 0; i < (int)sizeof arg_bits; i++) arg_bits[i] = (uint8_t)(i * 7 % 3 == 0);
    ulk_tc_command cmd = {.apid = 0x155, .seq_count = 9, .frame_seq = 0, .opcode = 0x21,
                          .arg_bits = arg_bits, .n_arg_bits = sizeof arg_bits};
    const double ps[] = {1e-3, 3e-3, 1e-2, 2e-2, 4e-2};
    printf("data field 20 octets, frame 33 octets, 5 codeblocks, %ld trials per row\n", trials);
    printf("%-4s %-3s %-8s %-10s %-10s %-8s %s\n", "mode", "s", "p", "measured", "reference",
           "ratio", "undetected");
    for (int mode = 0; mode < 2; mode++)
        for (int se = 0; se < 2; se++)
            for (size_t pi = 0; pi < sizeof ps / sizeof ps[0]; pi++) {
                ulk_ccsds_tc tc;
                ulk_ccsds_tc_default(&tc);
                tc.correction = (ulk_bch_mode)mode;
                tc.start_errors = se;
                size_t n_cltu;
                if (ulk_ccsds_command_cltu(&tc, &cmd, cltu, sizeof cltu, &n_cltu) < 0) return 1;
                size_t n = 0;
                ulk_cltu_idle_bits(bits, 128);
                n = 128;
                ulk_octets_to_bits(cltu, n_cltu, bits + n);
                n += 8 * n_cltu;
                ulk_cltu_idle_bits(bits + n, 64);
                n += 64;
                int n_cb = (int)(n_cltu - 10) / 8;
                double p = ps[pi];
                long acc = 0, wrong = 0;
                for (long t = 0; t < trials; t++) {
                    for (size_t i = 0; i < n; i++) rx[i] = (uint8_t)(bits[i] ^ (uniform() < p));
                    ulk_cltu_decode(&tc, rx, n, 0, &res);
                    if (res.verdict == ULK_CLTU_ACCEPTED) {
                        acc++;
                        if (res.n_data != 20 || res.data[0] != 0x21 || res.packet_hdr.apid != 0x155) wrong++;
                    }
                }
                double ref = binom_le(16, se, p) * pow(binom_le(63, mode == 0 ? 1 : 0, p), n_cb);
                double meas = (double)acc / (double)trials;
                printf("%-4s %-3d %-8.0e %-10.5f %-10.5f %-8.4f %ld\n", mode ? "ted" : "sec", se, p,
                       meas, ref, meas / ref, wrong);
            }
    /* Throughput of the decoder on clean streams. */
    ulk_ccsds_tc tc;
    ulk_ccsds_tc_default(&tc);
    size_t n_cltu;
    ulk_ccsds_command_cltu(&tc, &cmd, cltu, sizeof cltu, &n_cltu);
    ulk_octets_to_bits(cltu, n_cltu, bits);
    clock_t c0 = clock();
    long reps = trials * 5;
    for (long i = 0; i < reps; i++) ulk_cltu_decode(&tc, bits, 8 * n_cltu, 0, &res);
    double s = (double)(clock() - c0) / CLOCKS_PER_SEC;
    printf("decode: %.0f CLTUs/s, %.2f Mbit/s of channel bits\n", reps / s,
           reps * 8.0 * (double)n_cltu / s / 1e6);
    return 0;
}
