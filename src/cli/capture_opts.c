/* src/cli/capture_opts.c - parsing of the capture options (src/cli/capture_opts.h). */
#include "capture_opts.h"

#include <stdio.h>

#include "ulk/link.h"

int cli_capture_option(const char *cmd, int val, const char *arg, cli_capture_opts *o)
{
    unsigned long long u;
    int r;
    switch (val) {
    case CLI_CAP_IQ: o->iq = 1; return 0;
    case CLI_CAP_MODE: o->mode = arg; return 0;
    case CLI_CAP_FORMAT: return cli_format(cmd, arg, &o->format, NULL);
    case CLI_CAP_CHANNEL:
        if ((r = cli_uint(cmd, "--channel", arg, 255, &u))) return r;
        o->channel = (int)u;
        return 0;
    case CLI_CAP_RATE: {
        ulk_ratio q;
        if (ulk_ratio_parse(arg, &q) < 0 || q.num <= 0) {
            fprintf(stderr, "ulk %s: --rate '%s': expected a positive sample rate in Hz\n", cmd, arg);
            return CLI_EXIT_USAGE_IO;
        }
        o->rate_hz = ulk_ratio_to_double(q);
        return 0;
    }
    case CLI_CAP_MAX_OFFSET:
        if ((r = cli_number(cmd, "--max-offset", arg, &o->max_offset_hz))) return r;
        if (!(o->max_offset_hz > 0)) {
            fprintf(stderr, "ulk %s: --max-offset '%s': expected a positive frequency in Hz\n", cmd, arg);
            return CLI_EXIT_USAGE_IO;
        }
        return 0;
    default: return 0;
    }
}

int cli_capture_check(const char *cmd, const cli_capture_opts *o)
{
    if (o->format >= 0 && !(o->rate_hz > 0)) {
        fprintf(stderr, "ulk %s: --format goes with --rate (a raw capture needs both)\n", cmd);
        return CLI_EXIT_USAGE_IO;
    }
    return 0;
}
