/* tests/bench/bench_mod.c - modulator throughput: float32 samples into memory on one core,
 * and the ratio to a vectorised numpy reference of the same waveform measured in the same run.
 *
 *     build-xxx/bench_mod [--samples N] [--no-ref]
 *
 * Prints figures; it is not a test (no time limits). For each link set-up it builds an upload
 * of random words in C (the demo's link: 1000 bit/s, 5 sub-bits per bit, 66-bit words), runs
 * the modulator over at least N samples (default 1e8) into one reused 64 Ki-sample buffer,
 * and prints MS/s per CPU-second (wall-clock in brackets). Then it writes the sub-bit stream
 * to a temporary file and runs `/usr/bin/python3 tests/bench/bench_mod_ref.py` on it, which
 * generates the same samples with numpy (exact integer phases, vectorised, in chunks),
 * checks its first samples against the C output, and prints its own MS/s; the ratio (per
 * CPU-second) is printed here.
 */
#include <inttypes.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "ulk/mod.h"
#include "ulk/subbit.h"
#include "ulk/upload.h"

#ifndef ULK_SOURCE_DIR
#define ULK_SOURCE_DIR "."
#endif

#define BUF 65536

typedef struct {
    const char *name, *fs, *fsc, *fp;
    double amp, ap;
    ulk_waveform wave;
    ulk_line_code line;
} setup;

static const setup SETUPS[] = {
    {"sine, 48 kHz (table)", "48000", "10000", NULL, 0.9, 0, ULK_WAVE_SINE, ULK_LINE_NRZL},
    {"sine + pilot, nrz-m, 48 kHz", "48000", "10000", "2500", 0.7, 0.3, ULK_WAVE_SINE, ULK_LINE_NRZM},
    {"square, 44.1 kHz", "44100", "10000", NULL, 0.9, 0, ULK_WAVE_SQUARE, ULK_LINE_NRZL},
    {"sine + pilot, 48000.001 Hz (rotation)", "48000.001", "10000", "2500", 0.7, 0.3, ULK_WAVE_SINE, ULK_LINE_NRZL},
};

static double now_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_MONOTONIC, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

/* CPU time of this process: the figure that does not depend on what else the machine runs. */
static double cpu_s(void)
{
    struct timespec ts;
    clock_gettime(CLOCK_PROCESS_CPUTIME_ID, &ts);
    return (double)ts.tv_sec + 1e-9 * (double)ts.tv_nsec;
}

static ulk_ratio ratio(const char *t)
{
    ulk_ratio r = {0, 1};
    if (ulk_ratio_parse(t, &r)) { fprintf(stderr, "bad rate %s\n", t); exit(2); }
    return r;
}

/* An upload of n_words random 66-bit words on the demo's link. */
static ulk_upload *make_upload(const setup *s, size_t n_words, uint64_t seed)
{
    ulk_upload *u = calloc(1, sizeof *u);
    ulk_link *l = &u->link;
    l->bit_rate = ratio("1000");
    l->n_subbits = 5;
    memcpy(l->zero, (uint8_t[]){0, 0, 1, 1, 1}, 5);
    memcpy(l->one, (uint8_t[]){1, 1, 0, 0, 0}, 5);
    memcpy(l->idle, (uint8_t[]){0, 1, 0, 1, 0}, 5);
    l->line_code = s->line;
    l->fsc = ratio(s->fsc);
    l->waveform = s->wave;
    l->amplitude = s->amp;
    if (s->fp) { l->has_pilot = 1; l->fp = ratio(s->fp); l->pilot_amplitude = s->ap; }
    l->word_bits = 66;
    u->cmds = calloc(n_words, sizeof *u->cmds);
    u->n_cmds = n_words;
    u->idles_after = 8;
    for (size_t k = 0; k < n_words; k++) {
        u->cmds[k].idles_before = k ? 8 : 32;
        u->cmds[k].word.n_bits = 66;
        for (int b = 0; b < 66; b++) {
            seed = seed * 6364136223846793005ull + 1442695040888963407ull; /* LCG (Knuth's MMIX constants) */
            u->cmds[k].word.bits[b] = (uint8_t)(seed >> 63);
        }
    }
    return u;
}

int main(int argc, char **argv)
{
    uint64_t want = 100000000;
    int with_ref = 1;
    for (int i = 1; i < argc; i++) {
        if (!strcmp(argv[i], "--samples") && i + 1 < argc) want = (uint64_t)strtod(argv[++i], NULL);
        else if (!strcmp(argv[i], "--no-ref")) with_ref = 0;
        else { fprintf(stderr, "usage: bench_mod [--samples N] [--no-ref]\n"); return 2; }
    }
    float *buf = aligned_alloc(64, BUF * sizeof(float));
    printf("bench_mod: float32 samples into a reused %d-sample buffer, one core\n", BUF);
    printf("MS/s per CPU-second (wall-clock MS/s in brackets; they differ when the cores are shared)\n");
    printf("%-40s %11s %17s %17s %7s %8s\n", "set-up", "samples", "ulk MS/s", "numpy MS/s", "ratio", "check");
    for (size_t k = 0; k < sizeof SETUPS / sizeof SETUPS[0]; k++) {
        const setup *s = &SETUPS[k];
        ulk_ratio fs = ratio(s->fs);
        /* one word with its gap is (66 + 8) * 5 sub-bits of f_s / 5000 samples each */
        double per_word = 74.0 * 5.0 * ulk_ratio_to_double(fs) / 5000.0;
        size_t n_words = (size_t)ceil((double)want / per_word) + 1;
        ulk_upload *u = make_upload(s, n_words, 12345 + k);
        ulk_mod_config cfg = {.upload = u, .fs = fs, .format = ULK_FMT_F32};
        ulk_mod *m = NULL;
        ulk_diag *d = ulk_diag_create();
        if (ulk_mod_create(&cfg, &m, d)) { ulk_diag_print(d, stderr); return 1; }
        ulk_diag_destroy(d);
        uint64_t n = ulk_mod_n_samples(m), done = 0;
        double sum = 0;
        /* keep the first samples for the reference's check */
        char head_path[] = "/tmp/ulk-bench-head-XXXXXX";
        int hfd = mkstemp(head_path);
        FILE *head = fdopen(hfd, "wb");
        double t0 = now_s(), c0 = cpu_s();
        long got;
        int first = 1;
        while ((got = ulk_mod_run(m, buf, BUF)) > 0) {
            done += (uint64_t)got;
            sum += buf[got - 1]; /* the work cannot be dropped */
            if (first) {
                double tp = now_s(), cp = cpu_s();
                fwrite(buf, sizeof(float), (size_t)got, head);
                t0 += now_s() - tp; /* not timed */
                c0 += cpu_s() - cp;
                first = 0;
            }
        }
        double dt = now_s() - t0, dc = cpu_s() - c0;
        fclose(head);
        ulk_mod_destroy(m);
        double ms = (double)done / dt / 1e6, ms_cpu = (double)done / dc / 1e6;

        double ref_ms = 0, ref_ms_cpu = 0;
        char check[32] = "-";
        if (with_ref) {
            char sb_path[] = "/tmp/ulk-bench-subbits-XXXXXX";
            int fd = mkstemp(sb_path);
            FILE *fp = fdopen(fd, "wb");
            ulk_stream *st = ulk_stream_create(u);
            uint8_t sbuf[65536];
            size_t r;
            while ((r = ulk_stream_read(st, sbuf, NULL, sizeof sbuf)) > 0) fwrite(sbuf, 1, r, fp);
            ulk_stream_destroy(st);
            fclose(fp);
            char pilot[128] = "", cmd[2048];
            if (s->fp) snprintf(pilot, sizeof pilot, " --fp %s --ap %.17g", s->fp, s->ap);
            snprintf(cmd, sizeof cmd,
                     "/usr/bin/python3 %s/tests/bench/bench_mod_ref.py --subbits %s --head %s --rs 5000 --fs %s "
                     "--fsc %s --wave %s --amp %.17g --line %s%s",
                     ULK_SOURCE_DIR, sb_path, head_path, s->fs, s->fsc, ulk_waveform_name(s->wave), s->amp,
                     ulk_line_code_name(s->line), pilot);
            FILE *p = popen(cmd, "r");
            char line[512];
            double maxdiff = -1;
            while (p && fgets(line, sizeof line, p)) {
                double a, b, c;
                if (sscanf(line, "ref_msps %lf cpu_msps %lf maxdiff %lf", &a, &c, &b) == 3) {
                    ref_ms = a;
                    ref_ms_cpu = c;
                    maxdiff = b;
                }
            }
            if (p) pclose(p);
            unlink(sb_path);
            if (maxdiff >= 0) snprintf(check, sizeof check, "%.1e", maxdiff);
        }
        unlink(head_path);
        char a[32], b[32], c[16];
        snprintf(a, sizeof a, "%.1f (%.1f)", ms_cpu, ms);
        if (ref_ms > 0) {
            snprintf(b, sizeof b, "%.1f (%.1f)", ref_ms_cpu, ref_ms);
            snprintf(c, sizeof c, "%.1fx", ms_cpu / ref_ms_cpu);
        } else {
            snprintf(b, sizeof b, "-");
            snprintf(c, sizeof c, "-");
        }
        printf("%-40s %11" PRIu64 " %17s %17s %7s %8s\n", s->name, done, a, b, c, check);
        fflush(stdout);
        if (done != n || sum != sum) return 1;
        free(u->cmds);
        free(u);
    }
    printf("check: max |ulk - numpy| over the first %d samples\n", BUF);
    free(buf);
    return 0;
}
