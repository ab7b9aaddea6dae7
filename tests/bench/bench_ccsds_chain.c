/* tests/bench/bench_ccsds_chain.c - the ccsds-tc chain end to end: the demo list compiled,
 * turned into captures with noise (and a clock error), decoded blind by the shared front end
 * and the CLTU decoder; CLTU acceptance against the profile's ideal reference
 * (the profile's ideal reference, docs/ccsds-tc.md: each channel bit wrong with
 * p = Q(sqrt(2 E_c/N_0)), or for nrz-m each level, flipping two bits; a CLTU is
 * accepted when its start sequence has at most start_errors errors and every codeblock at
 * most one (sec) or none (ted)), and the implementation loss in dB read off where the two
 * curves give the same acceptance. Prints figures; asserts nothing.
 *
 * Usage: bench_ccsds_chain [captures per point, default 20] [--nrzm-square] [--fs HZ] [--ppm X]
 *                          [--lead S] [--from DB --to DB --step DB]
 *   --nrzm-square  the demo with 1000 bit/s, nrz-m and an 8 kHz square subcarrier; the reference
 *                  then counts nrz-m's error pairs (tests/ideal_rx.h)
 * Defaults: the demo as it is, 48 kHz, +80 ppm, 0.05 s lead-in, 3 .. 7 dB in steps of 1.
 */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "../ideal_rx.h"
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


static int g_nrzm;

/* Mean ideal acceptance over the upload's CLTUs at Ec/N0 (dB): tests/ideal_rx.h (independent
 * bit errors for nrz-l; nrz-m's level errors flip bit pairs). */
static double reference(const ulk_upload *u, double ecn0_db)
{
    const ulk_ccsds_tc *tc = &u->link.tc.frame;
    double s = 0;
    for (size_t i = 0; i < u->n_cmds; i++)
        s += ideal_cltu_accept(ecn0_db, (int)((u->cmds[i].n_cltu - 10) / 8), tc->start_errors,
                               tc->correction == ULK_BCH_SEC, g_nrzm);
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

/* The text with one occurrence of find replaced (find must be there). */
static char *replace1(char *t, const char *find, const char *repl)
{
    char *p = strstr(t, find);
    if (!p) { fprintf(stderr, "bench_ccsds_chain: demo dictionary changed (%s)\n", find); exit(2); }
    size_t n = strlen(t), lf = strlen(find), lr = strlen(repl);
    char *o = malloc(n - lf + lr + 1);
    memcpy(o, t, (size_t)(p - t));
    memcpy(o + (p - t), repl, lr);
    strcpy(o + (p - t) + lr, p + lf);
    free(t);
    return o;
}

int main(int argc, char **argv)
{
    int trials = 20, variant = 0;
    double fs = 48000, ppm = 80, lead = 0.05, from = 3, to = 7, step = 1;
    for (int i = 1; i < argc; i++) {
        const char *a = argv[i], *v = i + 1 < argc ? argv[i + 1] : NULL;
        if (!strcmp(a, "--nrzm-square")) variant = 1;
        else if (!strcmp(a, "--fs") && v) fs = atof(argv[++i]);
        else if (!strcmp(a, "--ppm") && v) ppm = atof(argv[++i]);
        else if (!strcmp(a, "--lead") && v) lead = atof(argv[++i]);
        else if (!strcmp(a, "--from") && v) from = atof(argv[++i]);
        else if (!strcmp(a, "--to") && v) to = atof(argv[++i]);
        else if (!strcmp(a, "--step") && v) step = atof(argv[++i]);
        else if (a[0] != '-') trials = atoi(a);
        else { fprintf(stderr, "bench_ccsds_chain: unknown option %s\n", a); return 2; }
    }
    if (trials < 1 || !(step > 0) || !(fs > 0)) { fprintf(stderr, "bench_ccsds_chain: bad option value\n"); return 2; }
    ulk_diag *dg = ulk_diag_create();
    ulk_dict *d = NULL;
    ulk_cmdlist *l = NULL;
    ulk_upload *u = NULL;
    FILE *df = fopen(ULK_SOURCE_DIR "/dictionaries/demo-ccsds.yaml", "rb");
    char *txt = calloc(1, 1 << 20);
    size_t tl = df ? fread(txt, 1, (1 << 20) - 1, df) : 0;
    if (df) fclose(df);
    txt[tl] = 0;
    if (variant) {
        txt = replace1(txt, "bit_rate: 2000", "bit_rate: 1000");
        txt = replace1(txt, "line_code: nrz-l", "line_code: nrz-m");
        txt = replace1(txt, "frequency: 16000", "frequency: 8000");
        txt = replace1(txt, "waveform: sine", "waveform: square");
    }
    if (ulk_dict_load_mem("demo-ccsds.yaml", txt, strlen(txt), 0, &d, dg) ||
        ulk_cmdlist_load(ULK_SOURCE_DIR "/dictionaries/demo-ccsds.cmd", &l, dg) || ulk_compile(d, l, &u, dg)) {
        ulk_diag_print(dg, stderr);
        return 1;
    }
    ulk_stream *st = ulk_stream_create(u);
    size_t L = (size_t)ulk_stream_length(st);
    uint8_t *b = malloc(L);
    ulk_stream_read(st, b, NULL, L);
    ulk_stream_destroy(st);
    free(txt);
    g_nrzm = d->link.line_code == ULK_LINE_NRZM;
    printf("ccsds-tc chain: demo list%s, %zu CLTUs per capture, %d captures per point, fs %.0f Hz, %+.0f ppm, "
           "lead-in %g s\n", variant ? " (1000 bit/s, nrz-m, 8 kHz square)" : "", u->n_cmds, trials, fs, ppm, lead);
    printf("%8s %10s %10s %8s %8s %8s %10s %8s\n", "Ec/N0dB", "measured", "reference", "lost", "rej.ent", "wrong",
           "loss dB", "x real");
    double pts[64];
    size_t npts = 0;
    for (double e = from; e <= to + 1e-9 && npts < 64; e += step) pts[npts++] = e;
    for (size_t k = 0; k < npts; k++) {
        tally t = {0, 0, 0, u};
        double cpu = 0, sig = 0;
        for (int i = 0; i < trials; i++) {
            sim_cfg c = {.fs_hz = fs, .ppm = ppm, .delay_s = lead, .tail_s = 0.02, .ebn0_db = pts[k],
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
        printf("%8.1f %10.4f %10.4f %8zu %8zu %8zu %10.2f %8.0f\n", pts[k], meas, ref,
               (size_t)trials * u->n_cmds - t.accepted, t.rejected, t.wrong, loss, sig / cpu);
    }
    free(b);
    ulk_upload_destroy(u);
    ulk_cmdlist_destroy(l);
    ulk_dict_destroy(d);
    ulk_diag_destroy(dg);
    return 0;
}
