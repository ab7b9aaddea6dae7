/* src/cli/main.c - the ulk program: dispatches to one subcommand. */
#include <stdio.h>
#include <string.h>

#include "cli.h"

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

static void usage(FILE *out)
{
    fprintf(out, "usage: ulk COMMAND [options]   (ulk COMMAND --help for each)\n\ncommands:\n");
    for (size_t i = 0; i < sizeof cmds / sizeof cmds[0]; i++)
        fprintf(out, "  %-9s %s\n", cmds[i].name, cmds[i].what);
    fprintf(out, "\n%s", ULK_CAUTION);
}

int main(int argc, char **argv)
{
    if (argc < 2) { usage(stderr); return 2; }
    if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
        usage(stdout);
        return 0;
    }
    if (!strcmp(argv[1], "--version")) { printf("ulk 0.1.0\n"); return 0; }
    for (size_t i = 0; i < sizeof cmds / sizeof cmds[0]; i++)
        if (!strcmp(argv[1], cmds[i].name)) return cmds[i].fn(argc - 1, argv + 1);
    fprintf(stderr, "ulk: unknown command '%s'\n", argv[1]);
    usage(stderr);
    return 2;
}
