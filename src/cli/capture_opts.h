/* src/cli/capture_opts.h - the options that describe a capture, shared by decode and verify
 * (and any command that reads one through the receiver): one spelling, one parser. */
#ifndef ULK_CLI_CAPTURE_OPTS_H
#define ULK_CLI_CAPTURE_OPTS_H

#include "capture.h"
#include "cli.h"

enum {
    CLI_CAP_IQ = CLI_LONG + 200,
    CLI_CAP_RATE,
    CLI_CAP_FORMAT,
    CLI_CAP_CHANNEL,
    CLI_CAP_MODE,
    CLI_CAP_MAX_OFFSET,
};

/* The entries to put in a command's option table (before its terminating {0}). */
#define CLI_CAPTURE_OPTIONS                                                                                    \
    {"iq", no_argument, 0, CLI_CAP_IQ}, {"rate", required_argument, 0, CLI_CAP_RATE},                         \
        {"format", required_argument, 0, CLI_CAP_FORMAT}, {"channel", required_argument, 0, CLI_CAP_CHANNEL}, \
        {"mode", required_argument, 0, CLI_CAP_MODE}, {"max-offset", required_argument, 0, CLI_CAP_MAX_OFFSET}

/* Sets o from one capture option (val from the table above); returns 0, or the exit code
 * after a message naming cmd. Options of other values are left alone (returns 0). */
int cli_capture_option(const char *cmd, int val, const char *arg, cli_capture_opts *o);
/* The checks after parsing: --format goes with --rate. Returns 0 or the exit code. */
int cli_capture_check(const char *cmd, const cli_capture_opts *o);

#endif
