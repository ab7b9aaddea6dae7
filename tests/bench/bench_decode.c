/* tests/bench/bench_decode.c - figures of the blind decoder on the demo profile.
 *
 * Prints: Monte Carlo word error rate against E_b/N_0 beside the ideal coherent curve of
 * docs/spec/subbit.md section 5 (p = Q(sqrt(2 (E_b/N_0) d / n)), WER = 1 - (1 - p)^W), the
 * implementation loss in dB at WER 1e-2, acquisition failures, false acceptances (a word
 * whose check passes but which was not sent) including noise-only captures, and the
 * decoding throughput at 192 kHz as a multiple of real time (one core).
 *
 * Captures come from the analytic generator of tests/sim_capture.h: each holds a preamble,
 * `--per` random valid words with the profile's gaps, a random start (noise-only lead-in of
 * 0..60 ms) and a random clock error, uniform in +-200 ppm (--ppm).
 *
 * Columns: WER and the ideal WER; missed words split into "bits" (found at its time with
 * wrong bits), "shift" (found one or more groups off its start) and "absent"; "acqf"
 * captures where not one word was recovered; "f.acc" words reported whose check passes
 * but that were not sent (false acceptances; words the demodulator marks ambiguous are
 * rejected by the dictionary stage and counted apart); "x.rej" other words reported (check
 * fails); "spur" the words reported, of any status, that overlap no word sent (idle, the
 * lead-in or noise read as a word; they count in x.rej or f.acc too).
 *
 * Usage: bench_decode [--words N] [--per N] [--ppm X] [--seed S] [--from DB] [--to DB]
 *                     [--step DB] [--noise-s SECONDS] [--speed-s SECONDS] [--dict FILE]
 *                     [--set demo|n7|square] [--rate HZ] [--ppm-fixed X] [--lead-s SECONDS]
 *                     [--invert 1] [--speed-rate HZ]
 *                     [--fa2-words N (second profile's false-acceptance count; 0 skips)] [--verbose 1]
 * --set picks a built-in pattern set instead of --dict: "n7" is n = 7, Z 1110010, O 0001101,
 * I 1010101, 62.5 bit/s, sine subcarrier 4 R_s (1750 Hz), W = 66 with CRC-16; "square" is
 * n = 4, 0011/1100/0110, 500 bit/s, square subcarrier 6 kHz, W = 34 with CRC-8. --rate sets the
 * sample rate of the WER sweep (default 48 kHz; "low" = the lowest accepted, 2 (f_sc + R_s)),
 * --ppm-fixed gives every capture that clock error (instead of uniform in +-ppm), --lead-s adds
 * that much noise before each capture's signal (on top of the random 0..60 ms), --invert 1
 * inverts every capture. Throughput is measured at --speed-rate (default 192 kHz) and 48 kHz.
 * Defaults are a quick run (2000 words per point); the figures in docs/decode.md used
 * --words 100000.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../sim_capture.h"
#include "ulk/demod.h"
#include "ulk/dict.h"
#include "ulk/word.h"

static int verbose; /* --verbose: say which words went missing */
static double g_lead_s;   /* --lead-s */
static int g_ppm_fixed;   /* --ppm-fixed given */
static double g_ppm_val;
static int g_invert;      /* --invert */

static double qfunc(double x) { return 0.5 * erfc(x / sqrt(2.0)); }

static double theory_wer(const ulk_link *l, double ebn0_db)
{
    int d = 0;
    for (int i = 0; i < l->n_subbits; i++) d += l->zero[i] != l->one[i];
    double p = qfunc(sqrt(2 * pow(10, ebn0_db / 10) * d / l->n_subbits));
    return 1 - pow(1 - p, l->word_bits);
}

/* E_b/N_0 (dB) where the ideal curve reaches wer (bisection; the curve is monotone). */
static double theory_at(const ulk_link *l, double wer)
{
    double lo = -5, hi = 30;
    for (int i = 0; i < 100; i++) {
        double m = 0.5 * (lo + hi);
        if (theory_wer(l, m) > wer) lo = m; else hi = m;
    }
    return 0.5 * (lo + hi);
}

static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return ts.tv_sec + ts.tv_nsec * 1e-9;
}

typedef struct {
    long sent, ok, missing, false_acc, rejected_extra, acq_fail, captures, ambiguous;
    long wrong_bits, misplaced, absent;
    long spurious; /* words reported (any status) that overlap no word sent: idle or noise read as a word */
} tally;

static void random_valid_words(sim_rng *r, const ulk_link *l, ulk_word *w, int n)
{
    uint8_t args[64];
    for (int i = 0; i < n; i++) {
        uint32_t sys = (uint32_t)(sim_next(r) >> 40) & ((1u << l->system_bits) - 1);
        uint32_t op = (uint32_t)(sim_next(r) >> 40) & ((1u << l->opcode_bits) - 1);
        for (int b = 0; b < l->argument_bits; b++) args[b] = (uint8_t)(sim_next(r) >> 63);
        ulk_word_build(l, sys, op, args, &w[i]);
    }
}

static int same(const ulk_word *a, const ulk_word *b)
{
    return a->n_bits == b->n_bits && !memcmp(a->bits, b->bits, (size_t)a->n_bits);
}

/* One capture: returns words decoded into the tally. */
static void run_one(const ulk_link *l, double fs, double ebn0, int per, double ppm_max, sim_rng *r,
                    tally *t, int noise_only)
{
    ulk_word w[64];
    size_t starts[64];
    random_valid_words(r, l, w, per);
    size_t L = 0;
    uint8_t *sb = noise_only ? malloc(1) : sim_subbits(l, w, (size_t)per, &L, starts);
    double ppm = (2 * sim_uniform(r) - 1) * ppm_max;
    if (g_ppm_fixed) ppm = g_ppm_val;
    sim_cfg c = {.fs_hz = fs, .ppm = ppm, .delay_s = (noise_only ? 0 : g_lead_s) + 0.06 * sim_uniform(r),
                 .tail_s = noise_only ? 0.5 : 0.02, .ebn0_db = ebn0, .invert = g_invert, .seed = sim_next(r)};
    size_t ns;
    float *x = sim_capture(l, sb, L, &c, &ns);
    ulk_demod *d;
    if (ulk_demod_create(l, fs, NULL, &d, NULL)) { fprintf(stderr, "demod create failed\n"); exit(2); }
    ulk_demod_push(d, x, ns);
    ulk_demod_finish(d);
    double rs = ulk_ratio_to_double(l->bit_rate) * l->n_subbits;
    size_t nw = ulk_demod_n_words(d);
    int got_any = 0;
    char *used = calloc(nw + 1, 1);
    if (!noise_only) {
        for (int i = 0; i < per; i++) {
            double ts = c.delay_s + (double)starts[i] / rs / (1 + c.ppm * 1e-6);
            int ok = 0;
            for (size_t k = 0; k < nw; k++) {
                const ulk_demod_word *g = ulk_demod_word_at(d, k);
                if (!used[k] && fabs(g->start_s - ts) < 0.5 / rs && same(&g->word, &w[i])) { used[k] = 1; ok = 1; break; }
            }
            t->sent++;
            if (ok) { t->ok++; got_any = 1; } else {
                t->missing++;
                /* why: a word at its time with wrong bits, one at a shifted start, or none */
                double off = 1e9;
                for (size_t k = 0; k < nw; k++) {
                    const ulk_demod_word *g = ulk_demod_word_at(d, k);
                    double o = (g->start_s - ts) * rs / l->n_subbits;
                    if (fabs(o) < fabs(off)) off = o;
                }
                if (fabs(off) < 0.1) t->wrong_bits++;
                else if (fabs(off) < l->gap + 0.5) t->misplaced++;
                else {
                    t->absent++;
                    if (verbose) fprintf(stderr, "absent: word %d of %d (start %.4f s, lead-in %.4f s, %+.0f ppm)\n", i + 1, per, ts,
                                         c.delay_s, c.ppm);
                }
            }
        }
        if (!got_any) t->acq_fail++;
    }
    for (size_t k = 0; k < nw; k++) {
        if (used[k]) continue;
        const ulk_demod_word *g = ulk_demod_word_at(d, k);
        {
            double near = 1e9;
            for (int i = 0; i < per && !noise_only; i++) {
                double ts = c.delay_s + (double)starts[i] / rs / (1 + c.ppm * 1e-6);
                if (fabs(g->start_s - ts) < near) near = fabs(g->start_s - ts);
            }
            if (near * rs >= (double)l->word_bits * l->n_subbits) t->spurious++;
        }
        if (g->ambiguous) t->ambiguous++; /* rejected by the dictionary stage ("alignment") */
        else if (ulk_word_check_ok(l, &g->word)) {
            t->false_acc++;
            if (verbose) {
                double off = 1e9;
                for (int i = 0; i < per && !noise_only; i++) {
                    double ts = c.delay_s + (double)starts[i] / rs / (1 + c.ppm * 1e-6), o = (g->start_s - ts) * rs;
                    if (fabs(o) < fabs(off)) off = o;
                }
                fprintf(stderr, "false acceptance at %.4f s, %+.2f sub-bits from the nearest word sent, margin %.2f\n",
                        g->start_s, off, g->margin);
            }
        }
        else t->rejected_extra++;
    }
    t->captures++;
    free(used);
    ulk_demod_destroy(d);
    free(x);
    free(sb);
}

int main(int argc, char **argv)
{
    long words = 2000;
    int per = 20;
    double ppm = 200, from = 5, to = 10, step = 0.5, noise_s = 60, speed_s = 20;
    long fa2_words = 2000;
    unsigned long long seed = 1;
    const char *dict_path = ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml";
    const char *set = NULL, *rate_s = "48000";
    double speed_rate = 192000;
    for (int i = 1; i < argc; i += 2) { /* options come in pairs: --name value */
        const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (!v) { fprintf(stderr, "bench_decode: %s needs a value\n", a); return 2; }
        if (!strcmp(a, "--words")) words = atol(v);
        else if (!strcmp(a, "--fa2-words")) fa2_words = atol(v);
        else if (!strcmp(a, "--per")) per = atoi(v);
        else if (!strcmp(a, "--ppm")) ppm = atof(v);
        else if (!strcmp(a, "--seed")) seed = strtoull(v, NULL, 0);
        else if (!strcmp(a, "--from")) from = atof(v);
        else if (!strcmp(a, "--to")) to = atof(v);
        else if (!strcmp(a, "--step")) step = atof(v);
        else if (!strcmp(a, "--noise-s")) noise_s = atof(v);
        else if (!strcmp(a, "--speed-s")) speed_s = atof(v);
        else if (!strcmp(a, "--dict")) dict_path = v;
        else if (!strcmp(a, "--set")) set = v;
        else if (!strcmp(a, "--rate")) rate_s = v;
        else if (!strcmp(a, "--ppm-fixed")) { g_ppm_fixed = 1; g_ppm_val = atof(v); }
        else if (!strcmp(a, "--lead-s")) g_lead_s = atof(v);
        else if (!strcmp(a, "--invert")) g_invert = atoi(v);
        else if (!strcmp(a, "--speed-rate")) speed_rate = atof(v);
        else if (!strcmp(a, "--verbose")) { verbose = atoi(v); }
        else { fprintf(stderr, "bench_decode: unknown option %s\n", a); return 2; }
    }
    if (per < 1 || per > 64 || words < 1 || step <= 0) { fprintf(stderr, "bench_decode: bad option value\n"); return 2; }
    ulk_dict *dict = NULL;
    ulk_diag *dg = ulk_diag_create();
    if (ulk_dict_load(dict_path, &dict, dg) < 0) {
        ulk_diag_print(dg, stderr);
        return 2;
    }
    ulk_diag_destroy(dg);
    ulk_link setl;
    const ulk_link *l = &dict->link;
    if (set) {
        if (!strcmp(set, "n7"))
            sim_link(&setl, "62.5", "1110010", "0001101", "1010101", "1750", ULK_WAVE_SINE, ULK_LINE_NRZL, 32, ULK_CHECK_CRC16);
        else if (!strcmp(set, "square"))
            sim_link(&setl, "500", "0011", "1100", "0110", "6000", ULK_WAVE_SQUARE, ULK_LINE_NRZL, 16, ULK_CHECK_CRC8);
        else if (!strcmp(set, "demo"))
            setl = dict->link;
        else { fprintf(stderr, "bench_decode: unknown set %s (demo, n7, square)\n", set); return 2; }
        l = &setl;
    }
    double fs = !strcmp(rate_s, "low") ? 2 * (ulk_ratio_to_double(l->fsc) + ulk_ratio_to_double(l->bit_rate) * l->n_subbits)
                                       : atof(rate_s);
    int dzo = 0;
    for (int i = 0; i < l->n_subbits; i++) dzo += l->zero[i] != l->one[i];
    printf("bench_decode: dictionary %s, n = %d, d = %d, W = %d, R_b = %g bit/s, f_sc = %g Hz, %s, %s\n",
           dict_path, l->n_subbits, dzo, l->word_bits, ulk_ratio_to_double(l->bit_rate),
           ulk_ratio_to_double(l->fsc), ulk_waveform_name(l->waveform), ulk_line_code_name(l->line_code));
    if (g_ppm_fixed)
        printf("words per point %ld, %d words per capture, clock error %+g ppm, lead-in %g s + 0..60 ms, fs %g Hz%s, seed %llu\n\n",
               words, per, g_ppm_val, g_lead_s, fs, g_invert ? ", inverted" : "", seed);
    else
        printf("words per point %ld, %d words per capture, clock error uniform +-%g ppm, lead-in %g s + 0..60 ms, fs %g Hz%s, seed %llu\n\n",
               words, per, ppm, g_lead_s, fs, g_invert ? ", inverted" : "", seed);
    printf("%8s %11s %11s %8s %6s %6s %6s %6s %6s %6s %6s\n", "Eb/N0 dB", "WER", "ideal WER", "words", "bits", "shift", "absent",
           "acqf", "f.acc", "x.rej", "spur");

    sim_rng r;
    sim_seed(&r, seed);
    double pts_eb[128], pts_wer[128];
    int npts = 0;
    tally all = {0};
    for (double eb = from; eb <= to + 1e-9 && npts < 128; eb += step) {
        tally t = {0};
        while (t.sent < words) run_one(l, fs, eb, per, ppm, &r, &t, 0);
        double wer = (double)t.missing / (double)t.sent;
        printf("%8.2f %11.3e %11.3e %8ld %6ld %6ld %6ld %6ld %6ld %6ld %6ld\n", eb, wer, theory_wer(l, eb), t.sent,
               t.wrong_bits, t.misplaced, t.absent, t.acq_fail, t.false_acc, t.rejected_extra, t.spurious);
        fflush(stdout);
        pts_eb[npts] = eb;
        pts_wer[npts] = wer;
        npts++;
        all.acq_fail += t.acq_fail;
        all.false_acc += t.false_acc;
        all.captures += t.captures;
        all.sent += t.sent;
    }
    /* Loss at WER 1e-2: interpolate log10(WER) linearly in dB between the bracketing points. */
    double target = 1e-2, meas = NAN;
    for (int i = 0; i + 1 < npts; i++) {
        if (pts_wer[i] >= target && pts_wer[i + 1] < target && pts_wer[i + 1] > 0) {
            double a = log10(pts_wer[i]), b = log10(pts_wer[i + 1]);
            meas = pts_eb[i] + (log10(target) - a) / (b - a) * (pts_eb[i + 1] - pts_eb[i]);
        } else if (pts_wer[i] >= target && pts_wer[i + 1] == 0 && isnan(meas)) {
            meas = pts_eb[i + 1]; /* upper bound only */
        }
    }
    double ideal = theory_at(l, target);
    printf("\nideal E_b/N_0 at WER 1e-2: %.2f dB\n", ideal);
    if (isnan(meas)) printf("measured: WER 1e-2 not bracketed by the sweep (widen --from/--to)\n");
    else printf("measured E_b/N_0 at WER 1e-2: %.2f dB -> implementation loss %.2f dB\n", meas, meas - ideal);
    printf("acquisition failures (captures with no word recovered): %ld of %ld captures\n", all.acq_fail, all.captures);
    printf("false acceptances with signal (check passed, word not sent): %ld over %ld words sent\n", all.false_acc, all.sent);

    /* Noise-only captures. */
    tally nt = {0};
    int nc = (int)ceil(noise_s / 0.5);
    for (int i = 0; i < nc; i++) run_one(l, fs, 0, per, ppm, &r, &nt, 1);
    printf("noise only: %d captures, %.0f s: %ld words reported, %ld false acceptances\n", nc, nc * 0.5,
           nt.false_acc + nt.rejected_extra, nt.false_acc);

    /* Second profile, for false acceptances only: n = 2, nrz-m, Z = 01, O = 10, I = 00 (the
     * review's dictionary: a one-sub-bit slip complements every bit and an even-length word
     * keeps its parity), 62.5 bit/s, square subcarrier k = 3, W = 6 with odd parity, waits of
     * 140 idle patterns (2.24 s) between words, fs 4 kHz. Words marked ambiguous are rejected
     * by the dictionary stage and are not false acceptances. */
    if (fa2_words > 0) {
        ulk_link l2;
        sim_link(&l2, "62.5", "01", "10", "00", "375", ULK_WAVE_SQUARE, ULK_LINE_NRZM, 0, ULK_CHECK_PARITY_ODD);
        l2.vehicle_bits = 0;
        l2.vehicle_value = 0;
        l2.system_bits = 2;
        l2.opcode_bits = 3;
        l2.argument_bits = 0;
        l2.word_bits = 6;
        l2.amplitude = 0.75;
        l2.preamble = 20;
        l2.gap = 140;
        l2.postamble = 5;
        printf("\nsecond profile (n = 2 nrz-m 01/10, idle 00, W = 6 parity-odd, waits of 2.24 s), %ld words per point:\n",
               fa2_words);
        printf("%8s %11s %8s %6s %6s %6s\n", "Eb/N0 dB", "WER", "words", "amb", "f.acc", "x.rej");
        const double ebs[] = {8, 11, 14};
        for (int k = 0; k < 3; k++) {
            tally t2 = {0};
            while (t2.sent < fa2_words) run_one(&l2, 4000, ebs[k], 4, 20, &r, &t2, 0);
            printf("%8.2f %11.3e %8ld %6ld %6ld %6ld\n", ebs[k], (double)t2.missing / (double)t2.sent, t2.sent,
                   t2.ambiguous, t2.false_acc, t2.rejected_extra);
            fflush(stdout);
        }
    }

    /* Throughput at --speed-rate and at 48 kHz: a long capture, decode time only. */
    for (int sr = 0; sr < 2; sr++) {
        const double fs2 = sr ? 48000 : speed_rate;
        int nwords = 0;
        double rb = ulk_ratio_to_double(l->bit_rate);
        double word_s = (l->word_bits + l->gap) / rb;
        nwords = (int)(speed_s / word_s);
        if (nwords > 64) nwords = 64;
        ulk_word w[64];
        random_valid_words(&r, l, w, nwords);
        size_t L, ns;
        uint8_t *sb = sim_subbits(l, w, (size_t)nwords, &L, NULL);
        sim_cfg c = {.fs_hz = fs2, .ppm = 150, .delay_s = 0.1, .tail_s = 0.1, .ebn0_db = 10, .seed = 5};
        float *x = sim_capture(l, sb, L, &c, &ns);
        /* repeat the capture to reach speed_s seconds of samples */
        double dur = (double)ns / fs2;
        int reps = (int)ceil(speed_s / dur);
        ulk_demod *d;
        ulk_demod_create(l, fs2, NULL, &d, NULL);
        double t0 = cpu_s();
        for (int k = 0; k < reps; k++)
            for (size_t o = 0; o < ns; o += 4096) ulk_demod_push(d, x + o, ns - o < 4096 ? ns - o : 4096);
        ulk_demod_finish(d);
        double t1 = cpu_s();
        printf("throughput at %g kHz: %.1f s of samples decoded in %.2f s CPU = %.0f x real time (%zu words found)\n",
               fs2 / 1000, reps * dur, t1 - t0, reps * dur / (t1 - t0), ulk_demod_n_words(d));
        ulk_demod_destroy(d);
        free(x);
        free(sb);
    }
    ulk_dict_destroy(dict);
    return 0;
}
