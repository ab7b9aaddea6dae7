/* src/cli/cmd_compile.c - placeholder until the stage lands; refuses with exit 2. */
#include <stdio.h>
#include "cli.h"
int cmd_compile(int argc, char **argv)
{
    (void)argc; (void)argv;
    fprintf(stderr, "ulk compile: not available in this build\n");
    return 2;
}
