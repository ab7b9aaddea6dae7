/* src/cli/capture_opts.h - the options that describe a capture, shared by decode and verify
 * (and any command that reads one through the receiver, include/ulk/rx.h): one spelling, one
 * parser, one struct. The receiver does all the work; these only fill its options. */
#ifndef ULK_CLI_CAPTURE_OPTS_H
#define ULK_CLI_CAPTURE_OPTS_H

#include <stdio.h>

#include "cli.h"
#include "ulk/rx.h"

typedef struct {
    ulk_rx_file_options f;   /* --rate, --format, --channel, --iq: how to read the file */
    ulk_rx_options r;        /* --mode, --max-offset, --keys, --state (and decode's --voice,
                                --ranging) */
} cli_capture_opts;

enum {
    CLI_CAP_IQ = CLI_LONG + 200,
    CLI_CAP_RATE,
    CLI_CAP_FORMAT,
    CLI_CAP_CHANNEL,
    CLI_CAP_MODE,
    CLI_CAP_MAX_OFFSET,
    CLI_CAP_KEYS,
    CLI_CAP_STATE,
};

/* The entries to put in a command's option table (before its terminating {0}). */
#define CLI_CAPTURE_OPTIONS                                                                                    \
    {"iq", no_argument, 0, CLI_CAP_IQ}, {"rate", required_argument, 0, CLI_CAP_RATE},                         \
        {"format", required_argument, 0, CLI_CAP_FORMAT}, {"channel", required_argument, 0, CLI_CAP_CHANNEL}, \
        {"mode", required_argument, 0, CLI_CAP_MODE}, {"max-offset", required_argument, 0, CLI_CAP_MAX_OFFSET}, \
        {"keys", required_argument, 0, CLI_CAP_KEYS}, {"state", required_argument, 0, CLI_CAP_STATE}

/* Defaults: nothing given (format and channel -1, every receiver option 0). */
void cli_capture_init(cli_capture_opts *o);
/* Sets o from one capture option (val from the table above); returns 0, or the exit code
 * after a message naming cmd. Options of other values are left alone (returns 0). */
int cli_capture_option(const char *cmd, int val, const char *arg, cli_capture_opts *o);
/* The checks after parsing: --format goes with --rate, --state with --keys, and the receive
 * state (read and written) names none of the inputs: the capture, the dictionary, the key
 * file, the upload (NULL ones are skipped). Returns 0 or the exit code (message printed). */
/* The positional part of the command line of a command over one capture (decode, verify):
 * exactly one capture, after the options. missing is the message for the first required option
 * not given ("--dict DICT is required"), NULL when all were. Returns -1 to go on with *capture
 * set, else the exit code after a message naming cmd (with the usage on stderr when something
 * is missing). */
int cli_capture_positional(const char *cmd, int argc, char **argv, int first, const char *missing,
                           void (*usage)(FILE *), const char **capture);
int cli_capture_check(const char *cmd, const cli_capture_opts *o, const char *capture, const char *dict,
                      const char *upload);

#endif
