/* tests/bench/bench_compile.c - compiler throughput on the demo dictionary.
 *
 * Generates a 100,000-command list in memory from the demo list's command lines (waits
 * included, values varied), then times parsing, compiling and writing the upload file.
 * Prints commands per second for each step; the target is >= 200,000 commands/s for
 * parse + compile on one core.
 *
 * usage: bench_compile [N_COMMANDS] [REPEATS]
 */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "ulk/cmdlist.h"
#include "ulk/dict.h"
#include "ulk/upload.h"

static double now_s(void)
{
    struct timespec t;
    clock_gettime(CLOCK_MONOTONIC, &t);
    return (double)t.tv_sec + 1e-9 * (double)t.tv_nsec;
}

static const char *const lines[] = {
    "OBC_NOOP",
    "OBC_SET_TIME seconds=%u",
    "OBC_SET_MODE mode=STANDBY",
    "PWR_SWITCH channel=HEATERS state=on",
    "THERM_SETPOINT zone=BATTERY setpoint=21.5degC",
    "PWR_CHARGE voltage=29.4V rate=C_10",
    "COMM_TUNE offset=-2.5kHz",
    "ADCS_SLEW axis=Z rate=-0.75deg/s duration=90s",
    "ADCS_SET_GAIN kp=2.5e-2",
    "PROP_FIRE thruster=T2 pulse=120ms count=4 confirm",
    "CAM_EXPOSURE exposure=12.5ms",
    "OBC_WATCHDOG timeout=45s",
};

int main(int argc, char **argv)
{
    long n = argc > 1 ? atol(argv[1]) : 100000;
    int reps = argc > 2 ? atoi(argv[2]) : 3;
    if (n < 1 || reps < 1) { fprintf(stderr, "usage: bench_compile [N_COMMANDS] [REPEATS]\n"); return 2; }
    ulk_diag *d = ulk_diag_create();
    ulk_dict *dict = NULL;
    if (ulk_dict_load(ULK_SOURCE_DIR "/dictionaries/demo-subbit.yaml", &dict, d) < 0) {
        ulk_diag_print(d, stderr);
        return 1;
    }
    size_t cap = (size_t)n * 64 + 1024, len = 0;
    char *text = malloc(cap);
    const size_t nl = sizeof lines / sizeof lines[0];
    for (long i = 0; i < n; i++) {
        if (i % 1000 == 999) len += (size_t)snprintf(text + len, cap - len, "wait %ldms\n", i % 7 * 10);
        len += (size_t)snprintf(text + len, cap - len, lines[(size_t)i % nl], (unsigned)(i * 2654435761u));
        text[len++] = '\n';
    }
    text[len] = 0;
    printf("list: %ld commands, %zu bytes (demo dictionary %s %s)\n", n, len, dict->name, dict->version);
    double best_parse = 1e30, best_comp = 1e30, best_write = 1e30;
    for (int r = 0; r < reps; r++) {
        ulk_diag_clear(d);
        ulk_cmdlist *l = NULL;
        ulk_upload *u = NULL;
        double t0 = now_s();
        int rc = ulk_cmdlist_parse("bench.cmd", text, len, &l, d);
        double t1 = now_s();
        if (rc == 0) rc = ulk_compile(dict, l, &u, d);
        double t2 = now_s();
        if (rc == 0) rc = ulk_upload_write(u, "bench_compile.upl", d);
        double t3 = now_s();
        if (rc < 0) { ulk_diag_print(d, stderr); return 1; }
        if (t1 - t0 < best_parse) best_parse = t1 - t0;
        if (t2 - t1 < best_comp) best_comp = t2 - t1;
        if (t3 - t2 < best_write) best_write = t3 - t2;
        if (r == reps - 1) printf("upload: %zu words, %llu sub-bits\n", u->n_cmds, (unsigned long long)ulk_upload_n_subbits(u));
        ulk_upload_destroy(u);
        ulk_cmdlist_destroy(l);
    }
    unlink("bench_compile.upl");
    printf("parse            %8.1f ms  %10.0f commands/s\n", best_parse * 1e3, (double)n / best_parse);
    printf("compile          %8.1f ms  %10.0f commands/s\n", best_comp * 1e3, (double)n / best_comp);
    printf("parse + compile  %8.1f ms  %10.0f commands/s  (target >= 200000)\n", (best_parse + best_comp) * 1e3,
           (double)n / (best_parse + best_comp));
    printf("write upload     %8.1f ms  %10.0f commands/s\n", best_write * 1e3, (double)n / best_write);
    printf("(best of %d runs, one thread)\n", reps);
    free(text);
    ulk_dict_destroy(dict);
    ulk_diag_destroy(d);
    return 0;
}
