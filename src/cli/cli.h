/* src/cli/cli.h - the subcommands of the ulk program; one file each under src/cli/.
 * Each returns the process exit code: 0 success, 1 findings/refusal, 2 usage or I/O error. */
#ifndef ULK_CLI_H
#define ULK_CLI_H

int cmd_validate(int argc, char **argv);
int cmd_compile(int argc, char **argv);
int cmd_inspect(int argc, char **argv);
int cmd_modulate(int argc, char **argv);
int cmd_decode(int argc, char **argv);
int cmd_verify(int argc, char **argv);
int cmd_impair(int argc, char **argv);
int cmd_plan(int argc, char **argv);
/* `ulk modulate UPLOAD --carrier ...` (src/cli/cmd_modulate_carrier.c), called by cmd_modulate. */
int cmd_modulate_carrier(int argc, char **argv);
int cmd_spectrum(int argc, char **argv);

/* The caution printed by every command that produces a radiatable waveform. */
extern const char ULK_CAUTION[];

#endif
