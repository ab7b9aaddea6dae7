/* tests/bench/bench_ccsds_chain.c - the ccsds-tc chain end to end: the demo list compiled,
 * turned into captures with noise (and a clock error), decoded blind by the shared front end
 * and the CLTU decoder; CLTU acceptance against the profile's ideal reference
 * (ccsds-tc-profile.md s.4: each channel bit wrong with p = Q(sqrt(2 E_c/N_0)); a CLTU is
 * accepted when its start sequence has at most start_errors errors and every codeblock at
 * most one (sec) or none (ted)), and the implementation loss in dB read off where the two
 * curves give the same acceptance. Prints figures; asserts nothing.
 *
 * Usage: bench_ccsds_chain [captures per point, default 20]
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../sim_capture.h"
#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/subbit.h"
#include "ulk/tc_decode.h"
#include "ulk/upload.h"

typedef struct {
    size_t accepted, rejected, wrong;
    const ulk_upload *u;
} tally;

static void on_unit(const ulk_tc_unit *x, void *user)
{
    tally *t = user;
    if (x->status != ULK_TC_ACCEPTED) { t->rejected++; return; }
    /* an accepted CLTU must be one that was sent, with its arguments */
    int found = 0;
    for (size_t i = 0; i < t->u->n_cmds && !found; i++) {
        const ulk_upload_cmd *c = &t->u->cmds[i];
        if (c->system_addr != x->apid || c->seq_count != x->seq_count || c->frame_seq != x->frame_seq) continue;
        found = strcmp(c->mnemonic, x->cmd->mnemonic) == 0;
        for (int k = 0; found && k < c->n_args; k++) found = c->args[k].raw == x->args[k].raw;
    }
    if (found) t->accepted++;
    else t->wrong++;
}

static double qfunc(double x) { return 0.5 * erfc(x / sqrt(2)); }

/* Mean ideal acceptance over the upload's CLTUs at Ec/N0 (dB). */
static double reference(const ulk_upload *u, double ecn0_db)
{
    const ulk_ccsds_tc *tc = &u->link.tc.frame;
    double p = qfunc(sqrt(2 * pow(10, ecn0_db / 10)));
    double ps = pow(1 - p, 16) + (tc->start_errors ? 16 * p * pow(1 - p, 15) : 0);
    double pc = pow(1 - p, 63) + (tc->correction == ULK_BCH_SEC ? 63 * p * pow(1 - p, 62) : 0);
    double s = 0;
    for (size_t i = 0; i < u->n_cmds; i++) s += ps * pow(pc, (double)((u->cmds[i].n_cltu - 10) / 8));
    return s / (double)u->n_cmds;
}

/* The Ec/N0 at which the reference gives acceptance a (bisection; the curve rises). */
static double reference_inverse(const ulk_upload *u, double a)
{
    double lo = -5, hi = 20;
    for (int i = 0; i < 60; i++) {
        double m = (lo + hi) / 2;
        if (reference(u, m) < a) lo = m;
        else hi = m;
    }
    return (lo + hi) / 2;
}

int main(int argc, char **argv)
{
    int trials = argc > 1 ? atoi(argv[1]) : 20;
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    ulk_cmdlist *l = NULL;
    ulk_upload *u = NULL;
    if (ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-ccsds.yaml", &d, dg) ||
        ulk_cmdlist_load(ULK_SOURCE_DIR "/dictionaries/demo-ccsds.cmd", &l, dg) || ulk_compile(d, l, &u, dg)) {
        ulk_diag_print(dg, stderr);
        return 1;
    }
    ulk_stream *st = ulk_stream_create(u);
    size_t L = (size_t)ulk_stream_length(st);
    uint8_t *b = malloc(L);
    ulk_stream_read(st, b, NULL, L);
    ulk_stream_destroy(st);
    const double fs = 48000;
    printf("ccsds-tc chain: demo list, %zu CLTUs per capture, %d captures per point, fs %.0f Hz, +80 ppm\n",
           u->n_cmds, trials, fs);
    printf("%8s %10s %10s %8s %10s %8s\n", "Ec/N0dB", "measured", "reference", "wrong", "loss dB", "x real");
    const double pts[] = {3.0, 4.0, 5.0, 6.0, 7.0};
    for (size_t k = 0; k < sizeof pts / sizeof pts[0]; k++) {
        tally t = {0, 0, 0, u};
        double cpu = 0, sig = 0;
        for (int i = 0; i < trials; i++) {
            sim_cfg c = {.fs_hz = fs, .ppm = 80, .delay_s = 0.05, .tail_s = 0.02, .ebn0_db = pts[k],
                         .invert = i & 1, .seed = 1000 * k + (uint64_t)i + 1};
            size_t ns;
            float *x = sim_capture(&d->link, b, L, &c, &ns);
            clock_t c0 = clock();
            ulk_tc_decode_samples(d, x, ns, fs, on_unit, &t, NULL, dg);
            cpu += (double)(clock() - c0) / CLOCKS_PER_SEC;
            sig += (double)ns / fs;
            free(x);
        }
        double meas = (double)t.accepted / (double)(trials * (int)u->n_cmds);
        double ref = reference(u, pts[k]);
        double loss = meas > 0 && meas < 1 ? pts[k] - reference_inverse(u, meas) : NAN;
        printf("%8.1f %10.4f %10.4f %8zu %10.2f %8.0f\n", pts[k], meas, ref, t.wrong, loss, sig / cpu);
    }
    free(b);
    ulk_upload_destroy(u);
    ulk_cmdlist_destroy(l);
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
    return 0;
}
