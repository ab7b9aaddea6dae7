/* src/cli/main.c - the ulk program: dispatches to one subcommand, then checks that standard
 * output took everything (src/cli/cli_common.c). */
#include <signal.h>
#include <stdio.h>
#include <string.h>

#include "cli.h"
#include "util.h"

#ifndef ULK_VERSION
#error "ULK_VERSION comes from the CMake project version (CMakeLists.txt)"
#endif

const char ULK_CAUTION[] =
    "CAUTION: this output can drive a transmitter. Radiating it needs authorisation under\n"
    "your local radio regulations and licensed operators; commanding a real vehicle follows\n"
    "its operator's procedures.\n";

static const struct {
    const char *name;
    int (*fn)(int, char **);
    const char *what;
} cmds[] = {
    {"validate", cmd_validate, "check command dictionaries before a mission"},
    {"compile", cmd_compile, "compile a command list into an upload file"},
    {"inspect", cmd_inspect, "show every word of an upload, or print it back as a command list"},
    {"modulate", cmd_modulate, "turn an upload into PSK-on-subcarrier samples or a timing table"},
    {"impair", cmd_impair, "add noise, clock error, delay and other impairments to a capture"},
    {"decode", cmd_decode, "recover words and commands from a capture, blind"},
    {"verify", cmd_verify, "check that a capture holds exactly an upload's commands"},
    {"plan", cmd_plan, "composite carrier: power per channel, margins, index solver"},
    {"spectrum", cmd_spectrum, "power spectrum of a real or complex capture, channels marked"},
};
#define N_CMDS (sizeof cmds / sizeof cmds[0])

static void usage(FILE *out)
{
    fprintf(out, "usage: ulk COMMAND [options]   (ulk COMMAND --help or ulk help COMMAND for each)\n"
                 "       ulk --version\n\ncommands:\n");
    for (size_t i = 0; i < N_CMDS; i++) fprintf(out, "  %-9s %s\n", cmds[i].name, cmds[i].what);
    fprintf(out, "\nexit: 0 done, 1 findings, refusal or mismatch, 2 usage or I/O error (docs/cli.md)\n");
    fprintf(out, "\n%s", ULK_CAUTION);
}

static int find(const char *name)
{
    for (size_t i = 0; i < N_CMDS; i++)
        if (!strcmp(name, cmds[i].name)) return (int)i;
    return -1;
}

static int run(int argc, char **argv)
{
    if (argc < 2) { usage(stderr); return CLI_EXIT_USAGE_IO; }
    const char *a = argv[1];
    if (!strcmp(a, "--help") || !strcmp(a, "-h") || (!strcmp(a, "help") && argc == 2)) {
        usage(stdout);
        return CLI_EXIT_OK;
    }
    if (!strcmp(a, "help")) { /* `ulk help CMD` is `ulk CMD --help`: the same text */
        int i = find(argv[2]);
        if (i < 0 || argc > 3) {
            fprintf(stderr, "ulk help: %s\n", i < 0 ? "no such command" : "one command at a time");
            usage(stderr);
            return CLI_EXIT_USAGE_IO;
        }
        char help[] = "--help";
        char *av[] = {argv[2], help, NULL};
        return cmds[i].fn(2, av);
    }
    if (!strcmp(a, "--version")) {
        printf("ulk %s\n", ULK_VERSION);
        return CLI_EXIT_OK;
    }
    int i = find(a);
    if (i >= 0) return cmds[i].fn(argc - 1, argv + 1);
    fprintf(stderr, "ulk: unknown command '%s'\n", a);
    usage(stderr);
    return CLI_EXIT_USAGE_IO;
}

int main(int argc, char **argv)
{
    /* an interrupted run removes its temporary files; a file-size limit makes writes fail
     * (EFBIG, reported) instead of killing the run */
    ulk_tmp_cleanup_on_signals();
    signal(SIGXFSZ, SIG_IGN);
    cli_stdout_init();
    int code = run(argc, argv);
    const char *name = argc >= 2 && find(argv[1]) >= 0 ? argv[1]
                       : argc >= 3 && !strcmp(argv[1], "help") && find(argv[2]) >= 0 ? argv[2] : NULL;
    return cli_finish_stdout(name, code);
}
