/* src/cli/cli.h - the subcommands of the ulk program (one file each under src/cli/) and the one
 * command-line layer they share (src/cli/cli_common.c): option tables, exit codes, standard
 * input and output, outputs that would overwrite an input. docs/cli.md is the user's page. */
#ifndef ULK_CLI_H
#define ULK_CLI_H

#include <getopt.h>
#include <stddef.h>
#include <stdio.h>

struct ulk_dict;
struct ulk_diag;

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

/* ---- exit codes: the one mapping from an outcome to the process status (docs/cli.md) ---- */
enum {
    CLI_EXIT_OK = 0,       /* done */
    CLI_EXIT_REFUSED = 1,  /* findings, refusal or mismatch: the input breaks a rule */
    CLI_EXIT_USAGE_IO = 2, /* usage error, a file that cannot be read or written, out of memory */
};
/* The exit code of a library status (include/ulk/error.h): 0 -> 0; EPARSE, ELIMIT, EFORMAT,
 * EINTEGRITY, EMISMATCH -> 1; EINVAL, EIO, ENOMEM -> 2. */
int cli_exit_for(int status);

/* ---- options: each command declares one getopt_long table ----
 * Entries whose val is a letter also get that short option (-o, -q, -h); long-only options use
 * values from CLI_LONG upwards. `--name=value` and `--name value` both work (getopt_long);
 * options and operands may come in any order; `--` ends the options; a lone `-` is an operand
 * (standard input or output). */
#define CLI_LONG 256
typedef int (*cli_opt_fn)(int val, const char *arg, void *ctx); /* 0, or an exit code (message printed) */
typedef struct {
    const char *name;                /* "compile" */
    const struct option *opts;       /* terminated by {0} */
    void (*usage)(FILE *out);        /* the one help text: --help, -h and `ulk help CMD` */
} cli_command;
/* Parses argv[1..]; calls fn for every option other than -h/--help. Returns -1 when parsing
 * went through (operands are argv[*first..argc-1]), else the exit code to return at once: 0
 * after --help (usage printed to stdout), 2 on an unknown option or missing value (message and
 * usage on stderr), or what fn returned. */
int cli_parse(const cli_command *c, int argc, char **argv, cli_opt_fn fn, void *ctx, int *first);

/* Option values: print "ulk CMD: --OPT 'TEXT': expected ..." and return 2 on a bad value. */
int cli_number(const char *cmd, const char *opt, const char *text, double *out);
int cli_uint(const char *cmd, const char *opt, const char *text, unsigned long long max, unsigned long long *out);
/* "f32" / "s16" (and "cf32" / "ci16", the same sample types as complex I/Q: *complex_ = 1). */
int cli_format(const char *cmd, const char *text, int *fmt, int *complex_);

/* ---- files ---- */
/* 1 when path is "-" (standard input or output). */
int cli_is_std(const char *path);
/* An input path as the library can read it: path itself, or for "-" a temporary copy of
 * standard input (removed at exit and on interruption), for inputs read more than once
 * (captures, dictionaries). NULL after a message when it cannot be made or when "-" is given
 * for a second input. */
const char *cli_input(const char *cmd, const char *path);
/* 1 when out names the same file as in: the same device and inode when both exist, else the
 * same absolute path after resolving the folders. "-" is never the same as a file. */
int cli_same_file(const char *out, const char *in);
/* Refuses (message, returns 2) when output out is one of the n inputs (what[i] says which);
 * returns 0 otherwise. */
int cli_refuse_overwrite(const char *cmd, const char *out, const char *const *ins, const char *const *what, size_t n);

/* Refuses (message, returns the exit code) a picture name whose extension is not .png or
 * .svg, before any work is done; returns 0 otherwise. */
int cli_check_picture(const char *cmd, const char *path);

/* Loads a dictionary, printing its findings; returns 0 (dict set) or the exit code, the same
 * for every command: 1 when the dictionary breaks a rule, 2 when it cannot be read. */
int cli_load_dict(const char *cmd, const char *path, struct ulk_dict **dict);

/* Puts standard output behind a stream that remembers the first write error (called once, by
 * main, before any output). */
void cli_stdout_init(void);
/* Flushes and closes standard output; on failure prints "ulk CMD: standard output: write
 * failed: REASON" and returns 2, else returns code. Called once, by main, after every command
 * (help and version forms too). */
int cli_finish_stdout(const char *cmd, int code);

#endif
