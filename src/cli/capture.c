/* src/cli/capture.c - the capture options of `ulk decode` and `ulk verify`. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "capture.h"
#include "ulk/sampleio.h"

void cli_capture_init(cli_capture_opts *o)
{
    memset(o, 0, sizeof *o);
    o->f.format = -1;
    o->f.channel = -1;
}

int cli_capture_check(const char *cmd, const cli_capture_opts *o)
{
    if (o->f.format >= 0 && !(o->f.rate_hz > 0)) {
        fprintf(stderr, "ulk %s: --format goes with --rate (a raw capture needs both)\n", cmd);
        return -1;
    }
    return 0;
}

int cli_capture_opt(const char *cmd, int argc, char **argv, int *i, cli_capture_opts *o)
{
    const char *a = argv[*i];
    if (!strcmp(a, "--iq")) { o->f.iq = 1; return 1; }
    int is_rate = !strcmp(a, "--rate"), is_fmt = !strcmp(a, "--format"), is_ch = !strcmp(a, "--channel");
    int is_mode = !strcmp(a, "--mode"), is_off = !strcmp(a, "--max-offset");
    if (!is_rate && !is_fmt && !is_ch && !is_mode && !is_off) return 0;
    if (*i + 1 >= argc) { fprintf(stderr, "ulk %s: %s needs a value\n", cmd, a); return -1; }
    const char *v = argv[++*i];
    char *end;
    if (is_mode) {
        o->r.mode = v;
    } else if (is_off) {
        double x = strtod(v, &end);
        if (!*v || *end || !(x > 0) || !isfinite(x)) {
            fprintf(stderr, "ulk %s: --max-offset '%s' is not a positive frequency in Hz\n", cmd, v);
            return -1;
        }
        o->r.max_offset_hz = x;
    } else if (is_rate) {
        ulk_ratio r;
        if (ulk_ratio_parse(v, &r) < 0 || r.num <= 0) {
            fprintf(stderr, "ulk %s: --rate '%s' is not a positive sample rate in Hz\n", cmd, v);
            return -1;
        }
        o->f.rate_hz = ulk_ratio_to_double(r);
    } else if (is_fmt) {
        if (!strcmp(v, "f32")) o->f.format = ULK_FMT_F32;
        else if (!strcmp(v, "s16")) o->f.format = ULK_FMT_S16;
        else { fprintf(stderr, "ulk %s: --format '%s': expected f32 or s16\n", cmd, v); return -1; }
    } else {
        long ch = strtol(v, &end, 10);
        if (*end || ch < 0 || ch > 255) {
            fprintf(stderr, "ulk %s: --channel '%s': expected a channel number 0..255\n", cmd, v);
            return -1;
        }
        o->f.channel = (int)ch;
    }
    return 1;
}


int cli_sniff_meta(const char *path, int *complex_, char *mode, size_t mode_len)
{
    return ulk_rx_sniff_meta(path, complex_, mode, mode_len);
}
