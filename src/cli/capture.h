/* src/cli/capture.h - the options `ulk decode` and `ulk verify` share to name a capture and
 * set up the receiver (include/ulk/rx.h), which does all the work. */
#ifndef ULK_CLI_CAPTURE_H
#define ULK_CLI_CAPTURE_H

#include "ulk/rx.h"

typedef struct {
    ulk_rx_file_options f;   /* --rate, --format, --channel, --iq */
    ulk_rx_options r;        /* --mode, --max-offset (and decode's --voice, --ranging) */
} cli_capture_opts;

/* Defaults: nothing given (format and channel -1). */
void cli_capture_init(cli_capture_opts *o);

/* Parses one capture option at argv[*i] ("--rate", "--format", "--channel", "--iq", "--mode",
 * "--max-offset"); returns 1 when it was one (and advances *i past its value), 0 when not, -1
 * on a bad value (message printed, prefixed with cmd). */
int cli_capture_opt(const char *cmd, int argc, char **argv, int *i, cli_capture_opts *o);

/* The checks after parsing: --format needs --rate. Returns 0, or -1 with the message printed. */
int cli_capture_check(const char *cmd, const cli_capture_opts *o);

/* ulk_rx_sniff_meta under its older name (ulk impair reads the metadata the same way). */
int cli_sniff_meta(const char *path, int *complex_, char *mode, size_t mode_len);

#endif
