/* src/cli/capture_opts.c - parsing of the capture options (src/cli/capture_opts.h). */
#include "capture_opts.h"

#include <stdio.h>
#include <string.h>

#include "ulk/link.h"

void cli_capture_init(cli_capture_opts *o)
{
    memset(o, 0, sizeof *o);
    o->f.format = -1;
    o->f.channel = -1;
}

int cli_capture_option(const char *cmd, int val, const char *arg, cli_capture_opts *o)
{
    unsigned long long u;
    int r;
    switch (val) {
    case CLI_CAP_IQ: o->f.iq = 1; return 0;
    case CLI_CAP_MODE: o->r.mode = arg; return 0;
    case CLI_CAP_KEYS: o->r.keys_path = arg; return 0;
    case CLI_CAP_STATE: o->r.state_path = arg; return 0;
    case CLI_CAP_FORMAT: return cli_format(cmd, arg, &o->f.format, &o->f.format_complex);
    case CLI_CAP_CHANNEL:
        if ((r = cli_uint(cmd, "--channel", arg, 255, &u))) return r;
        o->f.channel = (int)u;
        return 0;
    case CLI_CAP_RATE: {
        ulk_ratio q;
        if (ulk_ratio_parse(arg, &q) < 0 || q.num <= 0) {
            fprintf(stderr, "ulk %s: --rate '%s': expected a positive sample rate in Hz\n", cmd, arg);
            return CLI_EXIT_USAGE_IO;
        }
        o->f.rate_hz = ulk_ratio_to_double(q);
        return 0;
    }
    case CLI_CAP_MAX_OFFSET:
        if ((r = cli_number(cmd, "--max-offset", arg, &o->r.max_offset_hz))) return r;
        if (!(o->r.max_offset_hz > 0)) {
            fprintf(stderr, "ulk %s: --max-offset '%s': expected a positive frequency in Hz\n", cmd, arg);
            return CLI_EXIT_USAGE_IO;
        }
        return 0;
    default: return 0;
    }
}

int cli_capture_check(const char *cmd, const cli_capture_opts *o, const char *capture, const char *dict,
                      const char *upload)
{
    if (o->f.format >= 0 && !(o->f.rate_hz > 0)) {
        fprintf(stderr, "ulk %s: --format goes with --rate (a raw capture needs both)\n", cmd);
        return CLI_EXIT_USAGE_IO;
    }
    if (o->r.state_path && !o->r.keys_path) {
        fprintf(stderr, "ulk %s: --state needs --keys (only authenticated frames move the window)\n", cmd);
        return CLI_EXIT_USAGE_IO;
    }
    if (!o->r.state_path) return 0;
    /* the state is written back: it must not be one of the inputs */
    const char *ins[] = {capture, dict, o->r.keys_path, upload};
    const char *what[] = {"capture", "dictionary", "key file", "upload"};
    return cli_refuse_overwrite(cmd, o->r.state_path, ins, what, 4);
}

int cli_capture_positional(const char *cmd, int argc, char **argv, int first, const char *missing,
                           void (*usage)(FILE *), const char **capture)
{
    *capture = first < argc ? argv[first] : NULL;
    if (argc - first > 1) {
        fprintf(stderr, "ulk %s: one capture at a time ('%s' is extra)\n", cmd, argv[first + 1]);
        return CLI_EXIT_USAGE_IO;
    }
    if (!missing && !*capture) missing = "no capture given";
    if (missing) {
        fprintf(stderr, "ulk %s: %s\n", cmd, missing);
        usage(stderr);
        return CLI_EXIT_USAGE_IO;
    }
    return -1;
}
